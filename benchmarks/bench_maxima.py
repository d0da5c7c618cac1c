"""Threshold cost: coarse (k, θ) grid with every maximum climbed, against grid-only fine grids.

Case: the oblique-firehose trial of issue 16 (bi-Maxwellian protons, isotropic electrons with
T_e = T∥p, β∥p = 2, v_A/c = 1e-4, k d_p 0.1–1.2, θ 30–70°, level γ = 1e-3 Ω_p), built by
``firehose_trial`` of tests/test_maxima.py.

1. ``find_threshold`` on the coarse 8 × 5 grid (every local maximum of every root family
   climbed between grid points).
2. The grid-only maximum (``max_growth(..., refine=False)``) on finer and finer grids over the
   same ranges, its threshold by Brent (scipy.optimize.brentq, same tolerance), until T⊥/T∥ − 1
   agrees with the coarse-climbed answer within 1 % (the issue's accuracy), then 0.1 %.

Printed: wall time, dispersion evaluations (deterministic) and threshold of each, and the
ratios fine-grid / coarse-climbed at equal accuracy.

Run: ``.venv/bin/python benchmarks/bench_maxima.py`` (wall-time ratios move with the load
on the machine; evaluation counts do not).
"""

from __future__ import annotations

import sys
import time
from pathlib import Path

import numpy as np
from scipy.optimize import brentq

sys.path.insert(0, str(Path(__file__).resolve().parents[1] / "tests"))
sys.path.insert(0, str(Path(__file__).resolve().parents[1] / "tests" / "validation"))

from test_maxima import firehose_trial  # noqa: E402

from kinroots.io.parameters import with_parameter  # noqa: E402
from kinroots.study import threshold as threshold_module  # noqa: E402
from kinroots.study.growth import max_growth  # noqa: E402

PATH = "species.p.anisotropy"
BRACKET = (0.25, 0.6)
LEVEL = 1e-3
XTOL = 1e-6
GRIDS = [(8, 5), (16, 9), (32, 17), (48, 25), (64, 33)]


def coarse_climbed() -> tuple[float, float, int]:
    """Threshold, wall time and evaluations of find_threshold on the coarse grid."""
    case, angles = firehose_trial(0.34)
    evaluations = 0
    original = threshold_module.max_growth

    def counting(*args, **kwargs):
        nonlocal evaluations
        g = original(*args, **kwargs)
        evaluations += g.evaluations
        return g

    threshold_module.max_growth = counting
    try:
        t0 = time.perf_counter()
        t = threshold_module.find_threshold(case, PATH, BRACKET, LEVEL, angles, xtol=XTOL)
        wall = time.perf_counter() - t0
    finally:
        threshold_module.max_growth = original
    if not t.converged:
        raise SystemExit(f"coarse climbed threshold not converged: {t.reason}")
    return t.value, wall, evaluations


def grid_only(nk: int, na: int) -> tuple[float, float, int]:
    """Threshold, wall time and evaluations from grid-only maxima on an nk × na grid."""
    case, angles = firehose_trial(0.34, nk, tuple(np.linspace(30.0, 70.0, na)))
    evaluations = 0

    def excess(p: float) -> float:
        nonlocal evaluations
        g = max_growth(with_parameter(case, PATH, p), angles, refine=False)
        evaluations += g.evaluations
        # no root in the window: nothing grows there (as find_threshold reads it)
        return (g.growth if np.isfinite(g.growth) else 0.0) - LEVEL

    t0 = time.perf_counter()
    try:
        value = brentq(excess, *BRACKET, xtol=XTOL)
    except ValueError:  # no sign change: the grid misses the growth in the whole bracket
        value = float("nan")
    return value, time.perf_counter() - t0, evaluations


def main() -> int:
    ref, wall_c, ev_c = coarse_climbed()
    print(f"coarse 8 x 5, climbed: T_perp/T_par = {ref:.6f}, {wall_c:.1f} s, "
          f"{ev_c} evaluations")
    pending = [0.01, 0.001]
    for nk, na in GRIDS:
        value, wall, ev = grid_only(nk, na)
        err = abs((value - ref) / (ref - 1)) if np.isfinite(value) else float("inf")
        print(f"grid only {nk} x {na}: T_perp/T_par = {value:.6f} "
              f"(off by {100 * err:.2f} % of 1 - T_perp/T_par), {wall:.1f} s, {ev} evaluations")
        while pending and err <= pending[0]:
            print(f"equal accuracy ({100 * pending.pop(0):g} %): fine grid / coarse climbed = "
                  f"{wall / wall_c:.1f}x wall time, {ev / ev_c:.1f}x evaluations")
        if not pending:
            return 0
    print(f"no grid up to {GRIDS[-1][0]} x {GRIDS[-1][1]} reaches {100 * pending[0]:g} %")
    return 0


if __name__ == "__main__":
    sys.exit(main())
