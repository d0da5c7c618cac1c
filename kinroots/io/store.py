"""Finished grid points, committed one by one to an SQLite database (nothing lost).

One file per output folder (``points.sqlite``), WAL journal, one transaction per point.
One run at a time per folder: the store holds an exclusive lock (``points.lock``) while
open, and a second run is refused.  The database is never opened through a symbolic
link, and a damaged or foreign file is refused with a message saying how to start over.
Values are stored as plain JSON: numpy scalars (``numpy.bool_``, ``numpy.float64``)
and arrays are converted (`kinroots.io.tables`), anything else is an error before the
transaction.
The database remembers the hash of the normalized case it was started with; opening it
with a different case raises :class:`StoreMismatch`, so a resumed run never mixes rows
of two cases.  Rows are stored as JSON text (floats round-trip exactly; NaN kept).
"""

from __future__ import annotations

import json
import os
import sqlite3
from pathlib import Path
from typing import Any

from kinroots.io.tables import _json_default

__all__ = ["STORE_NAME", "PointStore", "StoreError", "StoreMismatch"]

#: File name of the database inside the output folder.
STORE_NAME = "points.sqlite"
#: Lock file beside it (held while a run uses the folder).
LOCK_NAME = "points.lock"


class StoreError(Exception):
    """The store cannot be used (damaged, a link, busy); the message says what to do."""


class StoreMismatch(StoreError):
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
        self._lock = self._acquire_lock()
        start_over = (f"delete {self.path} to start over (its finished points are lost), "
                      "or use another output folder")
        if self.path.is_symlink() or (self.path.exists() and not self.path.is_file()):
            self._release_lock()
            raise StoreError(f"{self.path}: is a symbolic link or not a regular file; "
                             f"expected the points database of kinroots; {start_over}")
        try:
            self._db = sqlite3.connect(str(self.path), isolation_level=None, timeout=30.0)
            self._open(case_hash, source)
        except sqlite3.DatabaseError as exc:
            self._release_lock()
            raise StoreError(f"{self.path}: damaged or not a kinroots points database "
                             f"({exc}); {start_over}") from None

    def _acquire_lock(self) -> Any:
        lock_path = self.path.parent / LOCK_NAME
        try:
            import fcntl
        except ImportError:  # not POSIX: no lock
            return None
        fh = open(lock_path, "a+b")  # held open while the store is open
        try:
            fcntl.flock(fh.fileno(), fcntl.LOCK_EX | fcntl.LOCK_NB)
        except OSError:
            fh.close()
            raise StoreError(f"{self.path.parent}: another kinroots run is using this "
                             "output folder (lock held on "
                             f"{lock_path}); expected one run per folder: wait for it to "
                             "finish or use another folder") from None
        os.set_inheritable(fh.fileno(), False)
        return fh

    def _release_lock(self) -> None:
        if self._lock is not None:
            self._lock.close()
            self._lock = None

    def _open(self, case_hash: str, source: str) -> None:
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
        text = json.dumps(row, sort_keys=True, allow_nan=True, default=_json_default)
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
        """Close the connection and release the folder's lock."""
        db = getattr(self, "_db", None)
        if db is not None:
            db.close()
        self._release_lock()

    def __enter__(self) -> PointStore:
        return self

    def __exit__(self, *exc: object) -> None:
        self.close()
