"""Cost of checking every k: ``kinroots solve`` with its boundary counts at every scan point
against tracing alone (one survey at the first k, nothing checked after it), in one run.

Case: three species (electrons, bi-Maxwellian protons, alphas), electromagnetic,
magnetized, 45° to B, 1,000 k points (our own invented parameters, solar-wind-like).

Printed: wall time of both (min over ``REPEAT`` runs, interleaved) and their ratio, dispersion
evaluations per k of both (deterministic), how they split (surveys, boundary counts,
tracing), the points verified by a count, and the roots lost: traced points of the
tracing-alone run that are missing from the default run's table (must be 0).  The same
rows for the counts without their smooth factor (``boundary.SMOOTH_DEGREE`` = 0) and for
loops thinned after each batch instead of respaced (``boundary.RESPACE`` = False), the
counts as they were before each of those, give the before/after comparisons in one run.

Run: ``.venv/bin/python benchmarks/bench_resurvey.py`` (on a quiet machine: with other
work on the two cores wall-time ratios move by factors of 2–3; evaluation counts do not).
"""

from __future__ import annotations

import sys
import time

from kinroots.io.case import parse_case
from kinroots.roots import boundary
from kinroots.study.solve import solve

REPEAT = 3


def case(points: int = 1000):
    return parse_case({
        "title": "bench: EM magnetized three species, oblique",
        "magnetic_field": {"B": 1e-8},
        "species": [
            {"name": "e", "charge": -1, "mass": "electron", "density": 5.5e6, "temperature": 10.0},
            {"name": "p", "charge": 1, "mass": "proton", "density": 5.0e6,
             "temperature_par": 10.0, "temperature_perp": 25.0},
            {"name": "a", "charge": 2, "mass": 4.0026, "density": 2.5e5, "temperature": 40.0},
        ],
        "wave": {"model": "electromagnetic", "angle": 45.0},
        "scan": {"k": {"start": 0.2, "stop": 0.8, "points": points}},
        "units": {"frequency": "cyclotron:p", "length": "inertial:p"},
        "search": {"real": [0.05, 2.0], "imag": [-0.1, 0.3]},
    }, "<bench-resurvey>")


def run(c, count, setting=None):
    """Wall and CPU time of one solve (CPU time moves less than wall time when other work
    shares the cores), with ``setting`` = (name, value) of ``boundary`` during it."""
    was = getattr(boundary, setting[0]) if setting else None
    if setting:
        setattr(boundary, *setting)
    try:
        t0, c0 = time.perf_counter(), time.process_time()
        sol = solve(c, count=count)
        return (time.perf_counter() - t0, time.process_time() - c0), sol
    finally:
        if setting:
            setattr(boundary, setting[0], was)


def table(sol):
    return {(k, r.value) for b in sol.branches for k, r in b.points.items() if r.converged}


def lost(off, on, tol):
    have = {}
    for k, z in table(on):
        have.setdefault(k, []).append(z)
    return sum(1 for k, z in table(off)
               if not any(abs(z - w) <= tol * max(abs(z), 1.0) for w in have.get(k, [])))


def main() -> int:
    points = int(sys.argv[1]) if len(sys.argv) > 1 else 1000
    c = case(points)
    runs = {"off": (False, None), "on": (True, None),
            "counts without the smooth factor": (True, ("SMOOTH_DEGREE", 0)),
            "loops thinned, not respaced": (True, ("RESPACE", False))}
    best: dict[str, tuple[float, float]] = {}
    sols = {}
    for _ in range(REPEAT):  # the runs interleaved: load changes hit all of them alike
        for name, (count, setting) in runs.items():
            t, sols[name] = run(c, count, setting)
            old = best.get(name, (float("inf"), float("inf")))
            best[name] = (min(old[0], t[0]), min(old[1], t[1]))
    t_off, off, t_on, on = best["off"], sols["off"], best["on"], sols["on"]
    variants = {name: (best[name], sols[name]) for name in list(runs)[2:]}
    n = len(c.k_values)
    surveys = sum(s.evaluations for _, s in on.surveys)
    print(f"{c.title}: {n} k points, {len(on.branches)} branches, "
          f"{sum(len(b.points) for b in on.branches)} rows")
    print(f"  wall time  default {t_on[0]:.2f} s  tracing alone {t_off[0]:.2f} s  "
          f"ratio {t_on[0] / t_off[0]:.2f}  (floor 2, goal 1.3)")
    print(f"  CPU time   default {t_on[1]:.2f} s  tracing alone {t_off[1]:.2f} s  "
          f"ratio {t_on[1] / t_off[1]:.2f}")
    print(f"  evaluations per k  default {on.evaluations / n:.1f}  tracing alone "
          f"{off.evaluations / n:.1f}  (floor 8, goal 4)")
    print(f"    default: surveys {surveys} ({len(on.surveys)} surveys), counts and tracing "
          f"{on.evaluations - surveys}")
    ver = sum(1 for ch in on.point_checks if ch.verified)
    print(f"  points verified by a count  default {ver}/{n}  tracing alone "
          f"{sum(1 for ch in off.point_checks if ch.verified)}/{n}")
    n_lost = lost(off, on, 1e-8)
    print(f"  roots lost (traced alone, missing with checks): {n_lost}")
    for name, (t_v, v) in variants.items():
        n_lost_v = lost(off, v, 1e-8)
        print(f"  {name}: wall {t_v[0]:.2f} s, ratio {t_v[0] / t_off[0]:.2f}, CPU ratio "
              f"{t_v[1] / t_off[1]:.2f}, evaluations per k {v.evaluations / n:.1f}, verified "
              f"{sum(1 for ch in v.point_checks if ch.verified)}/{n}")
        print(f"    roots lost: {n_lost_v}")
        n_lost += n_lost_v
    return 1 if n_lost else 0


if __name__ == "__main__":
    raise SystemExit(main())
