"""Sweep throughput: a 20×20 growth-rate map on 1 and 2 local workers (same run).

Per point: maximum growth over k d_p in [0.2, 0.8] (3 surveys + Brent refinement) of the
ion-cyclotron case cases/sweep_proton_anisotropy.toml.  Floor: 2 workers ≥ 1.7× faster.
Run: .venv/bin/python benchmarks/bench_sweep.py
"""

from __future__ import annotations

import copy
import sys
import time

from kinroots.io.case import load_case, parse_case
from kinroots.study.sweep import run_points

FLOOR = 1.7


def main() -> int:
    raw = copy.deepcopy(load_case("cases/sweep_proton_anisotropy.toml").raw)
    raw["scan"]["k"] = {"start": 0.2, "stop": 0.8, "points": 3}
    raw["sweep"]["x"].update(points=20)
    raw["sweep"]["y"].update(points=20)
    case = parse_case(raw, "bench")
    n = 400
    times = {}
    rows: dict[int, dict[int, dict]] = {}
    for workers in (1, 2):
        got: dict[int, dict] = {}
        t0 = time.perf_counter()
        run_points(case, "sweep", range(n), lambda i, r, g=got: g.__setitem__(i, r),
                   workers=workers)
        times[workers] = time.perf_counter() - t0
        rows[workers] = got
        print(f"{workers} worker(s): {times[workers]:.1f} s, {n / times[workers]:.2f} points/s")
    speedup = times[1] / times[2]
    same = rows[1] == rows[2]
    evals = sum(r.get("evaluations", 0) for r in rows[1].values()) / n
    print(f"speed-up 2 vs 1 workers: {speedup:.2f}x (floor {FLOOR}x); rows identical: {same}; "
          f"{evals:.0f} dispersion evaluations per point")
    return 0 if speedup >= FLOOR and same else 1


if __name__ == "__main__":
    sys.exit(main())
