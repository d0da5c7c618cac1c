"""Evaluations per root of the survey on the shared known-zero problems (tests/_problems.py).

Prints, per problem: zeros, evaluated points, points per zero, wall time, and the ratio
of the time to a baseline measured in the same run (one vectorized evaluation of the
function on as many points as the survey used).
"""

from __future__ import annotations

import pathlib
import sys
import time

import numpy as np

sys.path.insert(0, str(pathlib.Path(__file__).resolve().parents[1] / "tests"))
from _problems import PROBLEMS  # noqa: E402

from kinroots.roots import find_roots  # noqa: E402


def main() -> None:
    print(f"{'problem':22s} {'zeros':>5s} {'evals':>6s} {'per zero':>8s} {'ms':>7s} {'ratio':>7s}")
    for pid, p in PROBLEMS.items():
        t0 = time.perf_counter()
        res = find_roots(p.f, p.box, excluded=p.excluded)
        t = time.perf_counter() - t0
        z = np.linspace(p.box[0], p.box[1], res.evaluations) + 1j * p.box[2]
        t0 = time.perf_counter()
        p.f(z)
        base = time.perf_counter() - t0
        print(f"{pid:22s} {p.count:5d} {res.evaluations:6d} "
              f"{res.evaluations / p.count:8.1f} {1e3 * t:7.1f} {t / base:7.0f}"
              + ("" if res.complete else "  INCOMPLETE"))


if __name__ == "__main__":
    main()
