"""Output files: atomic writers respect the umask (issue 18 item 8)."""

from __future__ import annotations

import os
import stat

from kinroots.io.tables import atomic_write_bytes, write_csv, write_json


def test_written_files_follow_the_umask(tmp_path):
    old = os.umask(0o022)
    try:
        write_csv(tmp_path / "t.csv", [{"branch": 0, "k": 0.1}], columns=("branch", "k"))
        write_json(tmp_path / "s.json", {"a": 1})
        atomic_write_bytes(tmp_path / "f.png", b"x")
        os.umask(0o077)
        atomic_write_bytes(tmp_path / "private.bin", b"x")
    finally:
        os.umask(old)
    for name in ("t.csv", "s.json", "f.png"):
        assert stat.S_IMODE((tmp_path / name).stat().st_mode) == 0o644
    assert stat.S_IMODE((tmp_path / "private.bin").stat().st_mode) == 0o600
