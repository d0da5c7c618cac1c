"""Sweep execution and its store under stress (issues 14 and 19): numpy values, damaged or
linked stores, one run per folder, resume after drawing-only changes, Ctrl-C on a huge
grid, and no orphaned worker after SIGKILL of the main process."""

from __future__ import annotations

import os
import signal
import sqlite3
import subprocess
import sys
import time
from pathlib import Path

import numpy as np
import pytest
from test_cli_sweep import small_case_text  # sibling test module (rootdir import)
from typer.testing import CliRunner

from kinroots.cli import app
from kinroots.io.store import PointStore, StoreError
from kinroots.study.pool import chunk_size

runner = CliRunner()


def test_numpy_scalars_are_stored_as_plain_json(tmp_path: Path) -> None:
    # A maximum on the first or last k gives k_at_edge = numpy.bool_ (issue 19).
    with PointStore(tmp_path / "points.sqlite", "h") as store:
        store.commit("sweep", 0, {"k_at_edge": np.bool_(True), "g": np.float64(0.5),
                                  "n": np.int64(3), "v": np.arange(2)})
        row = store.rows("sweep")[0]
    assert row == {"k_at_edge": True, "g": 0.5, "n": 3, "v": [0, 1]}
    assert type(row["k_at_edge"]) is bool


def test_damaged_linked_and_busy_stores_are_refused(tmp_path: Path) -> None:
    db = tmp_path / "a" / "points.sqlite"
    db.parent.mkdir()
    db.write_bytes(b"not a database" * 100)
    with pytest.raises(StoreError, match="damaged or not a kinroots points database"):
        PointStore(db, "h")
    link = tmp_path / "b" / "points.sqlite"
    link.parent.mkdir()
    link.symlink_to(tmp_path / "elsewhere.sqlite")  # dangling
    with pytest.raises(StoreError, match="symbolic link"):
        PointStore(link, "h")
    assert not (tmp_path / "elsewhere.sqlite").exists()
    with PointStore(tmp_path / "c" / "points.sqlite", "h"), pytest.raises(
            StoreError, match="another kinroots run"):
        PointStore(tmp_path / "c" / "points.sqlite", "h")
    with PointStore(tmp_path / "c" / "points.sqlite", "h"):  # released on close
        pass


def test_damaged_store_is_exit_2_through_the_command(tmp_path: Path) -> None:
    case = tmp_path / "case.toml"
    case.write_text(small_case_text(1, 1, 2))
    out = tmp_path / "out"
    out.mkdir()
    (out / "points.sqlite").write_bytes(b"\x00" * 4096)
    res = runner.invoke(app, ["sweep", str(case), "-o", str(out), "--workers", "1"])
    assert res.exit_code == 2, res.output
    assert "points.sqlite" in res.stderr and "start over" in res.stderr


def test_growth_levels_change_does_not_block_resume(tmp_path: Path) -> None:
    case = tmp_path / "case.toml"
    text = small_case_text(1, 2, 2)
    case.write_text(text)
    out = tmp_path / "out"
    first = runner.invoke(app, ["sweep", str(case), "-o", str(out), "--workers", "1"])
    assert first.exit_code in (0, 1), first.output
    assert "growth_levels" in text
    case.write_text(text.replace("growth_levels = [", "growth_levels = [0.0123, "))
    again = runner.invoke(app, ["sweep", str(case), "-o", str(out), "--workers", "1"])
    assert again.exit_code == first.exit_code, again.output
    assert "resuming: 2 of 2 points" in again.stderr


def test_chunks_are_small_enough_to_commit_as_points_finish() -> None:
    assert chunk_size(4, 2) == 1
    assert chunk_size(400, 2) == 16  # eight chunks per worker, capped
    assert chunk_size(10**6, 2) == 16


def _children(pid: int) -> list[int]:
    out = []
    for entry in Path("/proc").iterdir():
        if entry.name.isdigit():
            try:
                fields = (entry / "stat").read_text().rsplit(")", 1)[1].split()
            except OSError:
                continue
            if int(fields[1]) == pid:
                out.append(int(entry.name))
    return out


def _alive(pid: int) -> bool:
    try:
        state = Path(f"/proc/{pid}/stat").read_text().rsplit(")", 1)[1].split()[0]
    except OSError:
        return False
    return state != "Z"


def _start_sweep(tmp_path: Path, text: str) -> tuple[subprocess.Popen, list[int]]:
    case = tmp_path / "case.toml"
    case.write_text(text)
    proc = subprocess.Popen([sys.executable, "-m", "kinroots", "sweep", str(case), "-o",
                             str(tmp_path / "out"), "--workers", "2"],
                            stdout=subprocess.DEVNULL, stderr=subprocess.PIPE,
                            start_new_session=True)
    deadline = time.monotonic() + 120
    workers: list[int] = []
    while time.monotonic() < deadline and len(workers) < 2 and proc.poll() is None:
        time.sleep(0.2)
        workers = _children(proc.pid)
    assert len(workers) >= 2, "the workers did not start"
    return proc, workers


@pytest.mark.slow
@pytest.mark.skipif(not sys.platform.startswith("linux"), reason="uses /proc")
def test_sigkill_of_the_main_process_leaves_no_worker(tmp_path: Path) -> None:
    proc, workers = _start_sweep(tmp_path, small_case_text(20, 20, 3))
    os.kill(proc.pid, signal.SIGKILL)
    proc.wait()
    deadline = time.monotonic() + 10
    while time.monotonic() < deadline and any(_alive(w) for w in workers):
        time.sleep(0.1)
    alive = [w for w in workers if _alive(w)]
    for w in alive:  # do not leave them running if the test fails
        os.kill(w, signal.SIGKILL)
    assert not alive


@pytest.mark.slow
@pytest.mark.skipif(not sys.platform.startswith("linux"), reason="uses /proc")
def test_ctrl_c_stops_a_huge_sweep_within_seconds(tmp_path: Path) -> None:
    # 500 x 400 = 2e5 grid points: nothing is queued up front, so Ctrl-C is prompt.
    proc, workers = _start_sweep(tmp_path, small_case_text(500, 400, 3))
    time.sleep(1.0)
    t0 = time.monotonic()
    os.killpg(proc.pid, signal.SIGINT)
    try:
        code = proc.wait(timeout=20)
    except subprocess.TimeoutExpired:
        os.killpg(proc.pid, signal.SIGKILL)
        raise
    assert time.monotonic() - t0 < 20
    stderr = proc.stderr.read().decode() if proc.stderr else ""
    assert code == 130, stderr
    assert "Traceback" not in stderr
    assert not [w for w in workers if _alive(w)]
    db = sqlite3.connect(tmp_path / "out" / "points.sqlite")
    assert db.execute("SELECT COUNT(*) FROM points").fetchone()[0] >= 0  # readable


def test_non_ascii_species_name_through_sweep_and_netcdf(tmp_path: Path) -> None:
    import xarray as xr

    text = (small_case_text(1, 2, 2).replace('name = "p"', 'name = "π"')
            .replace("species.p.", "species.π.").replace(':p"', ':π"'))
    case = tmp_path / "case.toml"
    case.write_text(text, encoding="utf-8")
    res = runner.invoke(app, ["sweep", str(case), "-o", str(tmp_path / "o"), "--workers", "1"])
    assert res.exit_code in (0, 1), res.output
    with xr.open_dataset(tmp_path / "o" / "sweep.nc", engine="scipy") as ds:
        assert "species_u03c0_anisotropy" in ds.dims
        assert "π" in ds.attrs["case"]  # attributes keep their UTF-8 text


def test_after_an_abort_only_the_executors_own_thread_errors_are_dropped(capsys) -> None:
    import threading

    from kinroots.study import pool

    previous = threading.excepthook
    seen: list[str] = []
    threading.excepthook = lambda args: seen.append(str(args.exc_value))
    try:
        pool._quiet_pool_threads()
        scope: dict = {}
        # a function whose code lives in the executor's package (as the manager thread's)
        exec(compile("def boom():\n    raise OSError('closed pipe')\n",  # noqa: S102
                     "/usr/lib/python3/concurrent/futures/process.py", "exec"), scope)

        def ours() -> None:
            raise ValueError("a real error")

        for target in (scope["boom"], ours):
            t = threading.Thread(target=target)
            t.start()
            t.join()
    finally:
        threading.excepthook = previous
    assert seen == ["a real error"]
