"""Tracing cost: dispersion evaluations per accepted point, and wall time against a naive
baseline measured in the same run.

Two branches:

* electrostatic, three species (electrons, protons, alphas), unmagnetized: the Langmuir
  branch over 1000 k points;
* electromagnetic, magnetized (electrons, bi-Maxwellian protons, alphas, 30° to B): a
  proton-scale branch over 300 k points.

Baseline: ``scipy.optimize.root`` (hybr, finite-difference Jacobian) on (Re D, Im D) as a
function of (Re ω, Im ω), started from the previous point's root — the obvious thing to
write by hand — at the cases' tolerance (xtol 1e-10).  Both use the same dispersion
functions (``function_at``, built per k for both).

Accuracy: every point of both is compared with a tight re-polish (Newton to 1e-15); the
resolution of that comparison is the scatter of tight re-polishes started 1e-7 away in
four directions (rounding in D; measured on the tightest baseline run).  The baseline's
last quasi-Newton step usually overshoots its tolerance by orders of magnitude, so both
are run at several tolerances, and for each baseline run the speed-up is taken against
the fastest tracer run whose worst error is no larger than the baseline's plus that
resolution (each figure is uncertain by it): "at equal or better accuracy".  Times are
per point (a branch that leaves the window ends the tracer earlier than the baseline,
which does not notice).  Both tracer modes are shown: ``single`` (one parameter value
per dispersion call) and ``blocks`` (speculative blocks of k values evaluated in one call
through ``pair_function``, as ``kinroots solve`` runs).

Run: ``.venv/bin/python benchmarks/bench_solve.py``
"""

from __future__ import annotations

import statistics
import time

import numpy as np
from scipy.optimize import root

from kinroots.io.case import parse_case
from kinroots.roots import Tracer, polish
from kinroots.study.problem import function_at, pair_function, survey, window

ORDER = 4
#: Tracer tolerances (the first is the cases' default).
TOLERANCES = (1e-10, 1e-12, 1e-13, 1e-14, 3e-15)
#: Baseline tolerances (the last is the cases' default).
BASELINE_XTOL = (1e-6, 1e-8, 1e-10)


def es_case():
    return parse_case({
        "title": "bench: ES three species",
        "species": [
            {"name": "e", "charge": -1, "mass": "electron", "density": 1.2e17, "temperature": 5.0},
            {"name": "p", "charge": 1, "mass": "proton", "density": 1.0e17, "temperature": 1.0},
            {"name": "a", "charge": 2, "mass": 4.0026, "density": 1.0e16, "temperature": 1.0},
        ],
        "wave": {"model": "electrostatic", "angle": 0.0},
        "scan": {"k": {"start": 0.1, "stop": 0.6, "points": 1000}},
        "units": {"frequency": "plasma:e", "length": "debye:e"},
        "search": {"real": [0.8, 3.0], "imag": [-0.4, 0.05]},
    }, "<bench-es>")


def em_case():
    return parse_case({
        "title": "bench: EM magnetized three species",
        "magnetic_field": {"B": 1e-8},
        "species": [
            {"name": "e", "charge": -1, "mass": "electron", "density": 5.5e6, "temperature": 10.0},
            {"name": "p", "charge": 1, "mass": "proton", "density": 5.0e6,
             "temperature_par": 10.0, "temperature_perp": 25.0},
            {"name": "a", "charge": 2, "mass": 4.0026, "density": 2.5e5, "temperature": 40.0},
        ],
        "wave": {"model": "electromagnetic", "angle": 30.0},
        "scan": {"k": {"start": 0.2, "stop": 0.8, "points": 300}},
        "units": {"frequency": "cyclotron:p", "length": "inertial:p"},
        "search": {"real": [0.05, 2.0], "imag": [-0.3, 0.3]},
    }, "<bench-em>")


def run_tracer(case, start, rtol, batched=True):
    ks = [float(k) for k in case.k_values]
    tr = Tracer(lambda k: function_at(case, k), box=window(case), param=ks[0],
                rtol=rtol, order=ORDER, pairs=pair_function(case) if batched else None)
    b = tr.add_branch(start, param=ks[0])
    tr.advance_through(ks[1:])
    return b, tr


def run_baseline(case, start, xtol):
    ks = [float(k) for k in case.k_values]
    out = [(ks[0], start)]
    z = start
    evals = []
    for k in ks[1:]:
        f = function_at(case, k)

        def fun(x, f=f):
            d = f(np.array([x[0] + 1j * x[1]]))[0][0]
            return [d.real, d.imag]

        sol = root(fun, [z.real, z.imag], method="hybr", options={"xtol": xtol})
        z = complex(sol.x[0], sol.x[1])
        evals.append(sol.nfev)
        out.append((k, z))
    return out, evals


def accuracy(case, points, scatter=False):
    """Largest |ω − ω_ref| / |ω_ref| over all the points (ω_ref: Newton to rtol 1e-15 from
    the point); with ``scatter``, also the resolution of that figure: the largest distance
    from ω_ref of such references started 1e-7 away in four directions (rounding in D
    limits any root to about it)."""
    worst = spread = 0.0
    for k, z in points:
        if not np.isfinite(z):
            return float("inf"), float("nan")
        f = function_at(case, k)
        r = polish(f, z, rtol=1e-15, maxiter=20)
        worst = max(worst, abs(z - r.value) / abs(r.value))
        for d in (1e-7, -1e-7, 1e-7j, -1e-7j) if scatter else ():
            r2 = polish(f, r.value * (1 + d), rtol=1e-15, maxiter=20)
            spread = max(spread, abs(r2.value - r.value) / abs(r.value))
    return worst, spread


def bench(name, case):
    """The baseline at several tolerances; the tracer (single steps and blocks) at several
    tolerances; for each baseline run, the fastest block run at equal or better accuracy
    (worst error no larger than the baseline's plus the resolution of the measurement,
    since each error figure is uncertain by that much)."""
    s0 = survey(case, float(case.k_values[0]))
    start = max((r for r in s0.roots if r.converged), key=lambda r: r.value.imag)
    print(f"== {name}")
    base_runs = []
    resolution = 0.0
    for xtol in BASELINE_XTOL:
        t0 = time.perf_counter()
        base, base_evals = run_baseline(case, start.value, xtol=xtol)
        t_base = time.perf_counter() - t0
        # [0] is the common start; the resolution is measured on these points once
        acc, res = accuracy(case, base[1:], scatter=xtol == BASELINE_XTOL[-1])
        resolution = max(resolution, res)
        base_runs.append((xtol, t_base / len(base), acc))
        print(f"   baseline (xtol {xtol:.0e}): {t_base:8.3f} s, {len(base)} points, "
              f"evaluations/point median {statistics.median(base_evals):.1f} "
              f"mean {statistics.fmean(base_evals):.2f}, worst rel. error {acc:.1e}")
    tracer_runs = []
    for rtol in TOLERANCES:
        for batched in (False, True):
            t0 = time.perf_counter()
            b, tracer = run_tracer(case, start, rtol, batched)
            t_tr = time.perf_counter() - t0
            pts = b.points
            evals = [r.evaluations for _, r in pts[1:]]
            acc, _ = accuracy(case, [(k, r.value) for k, r in pts[1:]])
            n = len(pts) - 1
            if batched:
                tracer_runs.append((rtol, t_tr / len(pts), acc))
            print(f"   tracer {'blocks' if batched else 'single'} (rtol {rtol:.0e}): "
                  f"{t_tr:8.3f} s, {len(pts)} points (end: {b.end_reason.value}), "
                  f"evaluations/point median {statistics.median(evals):.1f} "
                  f"mean {statistics.fmean(evals):.2f} all-in {tracer.evaluations / n:.2f}, "
                  f"worst rel. error {acc:.1e}")
    print(f"   resolution of the error figures (scatter of tight re-polishes): "
          f"{resolution:.1e}")
    for xtol, per_base, acc_b in base_runs:
        match = [(per, rtol, acc) for rtol, per, acc in tracer_runs
                 if acc <= acc_b + resolution]
        if not match:
            print(f"   vs baseline xtol {xtol:.0e} (error {acc_b:.1e}): no tracer run as "
                  "accurate")
            continue
        per, rtol, acc = min(match)
        print(f"   vs baseline xtol {xtol:.0e} (error {acc_b:.1e}): tracer blocks rtol "
              f"{rtol:.0e} (error {acc:.1e}) is {per_base / per:5.1f}x faster per point "
              "(floor 10x)")


def main() -> None:
    bench("electrostatic, 3 species, 1000 k", es_case())
    bench("electromagnetic magnetized, 3 species, 300 k", em_case())


if __name__ == "__main__":
    main()
