"""Finished grid points, committed one by one to an SQLite database (nothing lost).

One file per output folder (``points.sqlite``), WAL journal, one transaction per point.
The database remembers the hash of the normalized case it was started with; opening it
with a different case raises :class:`StoreMismatch`, so a resumed run never mixes rows
of two cases.  Rows are stored as JSON text (floats round-trip exactly; NaN kept).
"""

from __future__ import annotations

import json
import sqlite3
from pathlib import Path
from typing import Any

__all__ = ["STORE_NAME", "PointStore", "StoreMismatch"]

#: File name of the database inside the output folder.
STORE_NAME = "points.sqlite"


class StoreMismatch(Exception):
    """The database in the output folder belongs to a different case."""


class PointStore:
    """Rows of finished grid points, keyed by (kind, index).

    Parameters
    ----------
    path : Path
        Database file (created with its folder if missing).
    case_hash : str
        Hash of the normalized case (:func:`kinroots.study.sweep.case_hash`).
    source : str
        Case file name, for messages.

    Raises
    ------
    StoreMismatch
        The database was started with another case.
    """

    def __init__(self, path: Path, case_hash: str, source: str = "case") -> None:
        self.path = Path(path)
        self.path.parent.mkdir(parents=True, exist_ok=True)
        self._db = sqlite3.connect(str(self.path), isolation_level=None, timeout=30.0)
        self._db.execute("PRAGMA journal_mode=WAL")
        self._db.execute("PRAGMA synchronous=NORMAL")
        self._db.execute("CREATE TABLE IF NOT EXISTS meta (key TEXT PRIMARY KEY, value TEXT)")
        self._db.execute("CREATE TABLE IF NOT EXISTS points (kind TEXT, idx INTEGER, "
                         "row TEXT NOT NULL, PRIMARY KEY (kind, idx))")
        found = self._db.execute("SELECT value FROM meta WHERE key = 'case_hash'").fetchone()
        if found is None:
            self._db.execute("INSERT INTO meta VALUES ('case_hash', ?), ('source', ?)",
                             (case_hash, source))
        elif found[0] != case_hash:
            old = self._db.execute("SELECT value FROM meta WHERE key = 'source'").fetchone()
            self.close()
            raise StoreMismatch(
                f"{self.path}: holds points of a different case (started from "
                f"{old[0] if old else 'an unknown file'}; {source} has changed since); "
                "expected the same case to resume, or a new output folder"
            )

    def done(self, kind: str) -> set[int]:
        """Indices already committed for ``kind``."""
        cur = self._db.execute("SELECT idx FROM points WHERE kind = ?", (kind,))
        return {int(r[0]) for r in cur}

    def commit(self, kind: str, index: int, row: dict[str, Any]) -> None:
        """Store one finished point (its own transaction)."""
        text = json.dumps(row, sort_keys=True, allow_nan=True)
        self._db.execute("BEGIN IMMEDIATE")
        try:
            self._db.execute("INSERT OR REPLACE INTO points VALUES (?, ?, ?)",
                             (kind, int(index), text))
            self._db.execute("COMMIT")
        except BaseException:
            self._db.execute("ROLLBACK")
            raise

    def rows(self, kind: str) -> list[dict[str, Any]]:
        """All committed rows of ``kind``, by index."""
        cur = self._db.execute("SELECT row FROM points WHERE kind = ? ORDER BY idx", (kind,))
        return [json.loads(r[0]) for r in cur]

    def close(self) -> None:
        """Close the connection."""
        self._db.close()

    def __enter__(self) -> PointStore:
        return self

    def __exit__(self, *exc: object) -> None:
        self.close()
