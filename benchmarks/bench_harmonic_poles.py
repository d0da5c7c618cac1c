"""Electron Bernstein window at k∥ = 0 with ions of any mass (issue 15.5): survey cost.

Plain script (not collected by pytest): ``.venv/bin/python benchmarks/bench_harmonic_poles.py``.
The issue's case (invented): B = 0.1 T, electrons and singly charged ions at 5 eV,
1e17 m^-3, 90°, window Re ω ∈ [1.05, 3.95] Ω_ce, Im ω ∈ [−0.05, 0.05] Ω_ce, k ρ_e = 1.
For each model, the survey without ions is the baseline timed in the same run; each ion
mass prints the D evaluations (deterministic), the excluded points and the wall-time
ratio against that baseline. Issue floor: comparable cost (here: evaluations within 3×;
before issue 15.5 these windows were refused: 2.1e4 to 5.3e12 harmonic poles).
"""

from __future__ import annotations

import time

from kinroots.io.case import parse_case
from kinroots.study.problem import function_at, survey

MASSES = {"no ions": None, "He": 4.002602, "Ar": 39.948, "1e5 u": 1e5, "1e9 u": 1e9}
BOX = (1.05, 3.95, -0.05, 0.05)


def case(model: str, mass: float | None):
    species = [{"name": "e", "charge": -1, "mass": "electron", "density": 1e17,
                "temperature": 5.0}]
    if mass is not None:
        species.append({"name": "i", "charge": 1, "mass": mass, "density": 1e17,
                        "temperature": 5.0})
    return parse_case({
        "title": "electron Bernstein waves with ions",
        "magnetic_field": {"B": 0.1},
        "species": species,
        "wave": {"model": model, "angle": 90.0},
        "scan": {"k": 1.0},
        "units": {"frequency": "cyclotron:e", "length": "gyroradius:e"},
        "search": {"real": list(BOX[:2]), "imag": list(BOX[2:])},
    }, "<bench>")


def timed(c, repeat: int = 3) -> tuple[float, object]:
    best, result = float("inf"), None
    for _ in range(repeat):
        t = time.perf_counter()
        result = survey(c, 1.0)
        best = min(best, time.perf_counter() - t)
    return best, result


def main() -> None:
    for model in ("electrostatic", "electromagnetic"):
        print(f"{model}:")
        base_t, base = timed(case(model, None))
        for name, mass in MASSES.items():
            c = case(model, mass)
            t, res = (base_t, base) if mass is None else timed(c)
            excluded = function_at(c, 1.0).excluded(BOX)
            ratio = res.evaluations / base.evaluations
            print(f"  {name:8s} evaluations {res.evaluations:5d} ({ratio:.2f}x)"
                  f"  time {t * 1e3:7.1f} ms ({t / base_t:.2f}x)  roots {len(res.values)}"
                  f"  complete {res.complete}  excluded {len(excluded)}")


if __name__ == "__main__":
    main()
