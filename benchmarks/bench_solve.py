"""Tracing cost: dispersion evaluations per accepted point, and wall time against a naive
baseline measured in the same run.

Two branches:

* electrostatic, three species (electrons, protons, alphas), unmagnetized: the Langmuir
  branch over 1000 k points;
* electromagnetic, magnetized (electrons, bi-Maxwellian protons, alphas, 30° to B): a
  proton-scale branch over 300 k points.

Baseline: ``scipy.optimize.root`` (hybr, finite-difference Jacobian) on (Re D, Im D) as a
function of (Re ω, Im ω), started from the previous point's root — the obvious thing to
write by hand.  Both use the same dispersion function objects, and the baseline's
tolerance is set so that its roots are at least as accurate as the tracer's (both are
compared with a tight re-polish of every point).

Run: ``.venv/bin/python benchmarks/bench_solve.py``
"""

from __future__ import annotations

import statistics
import time

import numpy as np
from scipy.optimize import root

from kinroots import scan
from kinroots.casefile import parse_case
from kinroots.roots import Tracer, polish

ORDER = 4


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


def run_tracer(case, start):
    ks = [float(k) for k in case.k_values]
    tr = Tracer(lambda k: scan.function_at(case, k), box=scan.window(case), param=ks[0],
                rtol=case.solver.tolerance, order=ORDER)
    b = tr.add_branch(start, param=ks[0])
    for k in ks[1:]:
        tr.advance_to(k)
        if not b.active:
            break
    return b


def run_baseline(case, start, xtol):
    ks = [float(k) for k in case.k_values]
    out = [(ks[0], start)]
    z = start
    evals = []
    for k in ks[1:]:
        f = scan.function_at(case, k)

        def fun(x, f=f):
            d = f(np.array([x[0] + 1j * x[1]]))[0][0]
            return [d.real, d.imag]

        sol = root(fun, [z.real, z.imag], method="hybr", options={"xtol": xtol})
        z = complex(sol.x[0], sol.x[1])
        evals.append(sol.nfev)
        out.append((k, z))
    return out, evals


def accuracy(case, points):
    """Largest |ω − ω_tight| / |ω| over the points (ω_tight: Newton to rtol 1e-15)."""
    worst = 0.0
    for k, z in points:
        r = polish(scan.function_at(case, k), z, rtol=1e-15, maxiter=20)
        worst = max(worst, abs(z - r.value) / abs(r.value))
    return worst


def bench(name, case):
    s0 = scan.survey(case, float(case.k_values[0]))
    start = max((r for r in s0.roots if r.converged), key=lambda r: r.value.imag)
    t0 = time.perf_counter()
    b = run_tracer(case, start)
    t_tr = time.perf_counter() - t0
    pts = b.points
    evals = [r.evaluations for _, r in pts[1:]]
    tr_points = [(k, r.value) for k, r in pts]
    t0 = time.perf_counter()
    base, base_evals = run_baseline(case, start.value, xtol=case.solver.tolerance)
    t_base = time.perf_counter() - t0
    acc_tr = accuracy(case, tr_points[:: max(1, len(tr_points) // 50)])
    acc_base = accuracy(case, base[:: max(1, len(base) // 50)])
    print(f"== {name}: {len(pts)} points traced (end: {b.end_reason.value})")
    print(f"   tracer   : {t_tr:8.3f} s, evaluations/point median {statistics.median(evals):.1f}"
          f" mean {statistics.fmean(evals):.2f} (floor: median <= 4), "
          f"worst rel. error {acc_tr:.1e}")
    print(f"   baseline : {t_base:8.3f} s, evaluations/point median "
          f"{statistics.median(base_evals):.1f} mean {statistics.fmean(base_evals):.2f}, "
          f"worst rel. error {acc_base:.1e}")
    print(f"   speed-up : {t_base / t_tr:6.1f}x (floor 10x)")


def main() -> None:
    bench("electrostatic, 3 species, 1000 k", es_case())
    bench("electromagnetic magnetized, 3 species, 300 k", em_case())


if __name__ == "__main__":
    main()
