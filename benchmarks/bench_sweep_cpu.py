"""Sweep CPU time: 2 local workers against 1 (in-process), and the old spawn pool, same run.

Every configuration runs in a fresh interpreter (so each pays its own imports, as a
user's command does); its whole CPU time (user + system, the interpreter and every
process it started, fork server and workers included, all reaped before it exits) is read
with ``getrusage(RUSAGE_CHILDREN)``.  CPU time, unlike wall time, barely depends on other
load on the machine.  Floor (issue 14): CPU(2 workers) / CPU(1 worker) <= 1.05.

Baseline "spawn, one task per point" is the pool kinroots used before: a spawned
interpreter per worker that imports kinroots, and one submitted task per point.
Run: .venv/bin/python benchmarks/bench_sweep_cpu.py [points per axis, default 8]
"""

from __future__ import annotations

import json
import resource
import subprocess
import sys
import time

FLOOR = 1.05

_CHILD = r"""
import copy, json, sys
from kinroots.io.case import load_case, parse_case
from kinroots.study import sweep

n_axis, mode = int(sys.argv[1]), sys.argv[2]
raw = copy.deepcopy(load_case("cases/sweep_proton_anisotropy.toml").raw)
raw["scan"]["k"] = {"start": 0.2, "stop": 0.8, "points": 3}
raw["sweep"]["x"].update(points=n_axis)
raw["sweep"]["y"].update(points=n_axis)
case = parse_case(raw, "bench")
n = n_axis * n_axis
rows = {}
if mode == "spawn":
    import multiprocessing as mp
    from concurrent.futures import ProcessPoolExecutor
    with ProcessPoolExecutor(2, mp_context=mp.get_context("spawn")) as pool:
        futs = [pool.submit(sweep.compute_point, raw, "bench", "sweep", i) for i in range(n)]
        for f in futs:
            i, r = f.result()
            rows[i] = r
else:
    sweep.run_points(case, "sweep", range(n), rows.__setitem__, workers=int(mode))
    import multiprocessing.forkserver as fs
    if fs._forkserver._forkserver_pid is not None:
        fs._forkserver._stop()  # reap the fork server (and through it, its workers)
print(json.dumps({str(k): v for k, v in sorted(rows.items())}, sort_keys=True))
"""


def run(n_axis: int, mode: str) -> tuple[float, float, str]:
    before = resource.getrusage(resource.RUSAGE_CHILDREN)
    t0 = time.perf_counter()
    out = subprocess.run([sys.executable, "-c", _CHILD, str(n_axis), mode], check=True,
                         capture_output=True, text=True).stdout
    wall = time.perf_counter() - t0
    after = resource.getrusage(resource.RUSAGE_CHILDREN)
    cpu = (after.ru_utime - before.ru_utime) + (after.ru_stime - before.ru_stime)
    return cpu, wall, out


def main() -> int:
    n_axis = int(sys.argv[1]) if len(sys.argv) > 1 else 8
    results = {}
    for mode in ("1", "2", "spawn"):
        cpu, wall, out = run(n_axis, mode)
        results[mode] = (cpu, wall, json.loads(out))
        print(f"{mode:>5} {'worker(s)' if mode != 'spawn' else '(old pool, 2 workers)'}: "
              f"CPU {cpu:.2f} s, wall {wall:.2f} s")
    ratio = results["2"][0] / results["1"][0]
    old = results["spawn"][0] / results["1"][0]
    same = results["1"][2] == results["2"][2] == results["spawn"][2]
    print(f"{n_axis * n_axis} points. CPU 2 workers / 1 worker: {ratio:.3f} (floor {FLOOR}); "
          f"old spawn pool / 1 worker: {old:.3f}; rows identical: {same}")
    return 0 if ratio <= FLOOR and same else 1


if __name__ == "__main__":
    sys.exit(main())
