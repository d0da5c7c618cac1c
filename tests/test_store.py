"""SQLite point store: one transaction per point, resume, refusal of a changed case."""

from __future__ import annotations

import math
import sqlite3

import pytest

from kinroots.io.store import PointStore, StoreMismatch


def test_rows_round_trip_and_resume(tmp_path):
    db = tmp_path / "points.sqlite"
    row = {"i": 1, "x": 0.1 + 0.2, "g": math.nan, "ok": True, "reason": ""}
    with PointStore(db, "abc") as s:
        s.commit("sweep", 3, row)
        s.commit("sweep", 1, {"i": 0})
    with PointStore(db, "abc") as s:  # reopened: same case resumes
        assert s.done("sweep") == {1, 3}
        assert s.done("threshold") == set()
        got = s.rows("sweep")
    assert got[0] == {"i": 0}
    assert got[1]["x"] == 0.1 + 0.2 and math.isnan(got[1]["g"])  # exact float round trip
    mode = sqlite3.connect(db).execute("PRAGMA journal_mode").fetchone()[0]
    assert mode == "wal"


def test_changed_case_is_refused(tmp_path):
    db = tmp_path / "points.sqlite"
    PointStore(db, "abc", "a.toml").close()
    with pytest.raises(StoreMismatch, match="different case.*a.toml"):
        PointStore(db, "xyz", "a.toml")
