"""Cost of D(ω) and dD/dω with kappa electrons against the same plasma with Maxwellian ones.

Plain script (not collected by pytest): ``.venv/bin/python benchmarks/bench_kappa.py``.
Electrons (kappa, or Maxwellian of the same temperatures) and Maxwellian protons; for each
model (unmagnetized ES and EM at 30°, magnetized ES and EM along B) and each κ, the time
of one D call on 1000 ω is divided by that of the Maxwellian plasma timed in the same
run (issue 13 floor: ≤ 3×).  Also the time of one call at a single ω (survey and tracer
steps), where fixed per-call costs dominate.  A component species (core + halo, two
Maxwellians) is timed too.  Ratios are meaningful only within one run; on a loaded
machine they move by tens of percent.
"""

from __future__ import annotations

import timeit
from dataclasses import replace

import numpy as np

from kinroots.physics.dispersion import Dispersion
from kinroots.physics.plasma import M_ELECTRON, M_PROTON, Component, Plasma, Species

N_OMEGA = 1000
FLOOR = 3.0


def best(f, number: int, repeat: int = 3) -> float:
    """Best time of one call [s] (min over repeats of the mean over ``number`` calls)."""
    return min(timeit.repeat(f, number=number, repeat=repeat)) / number


def main() -> None:
    rng = np.random.default_rng(0)
    electrons = Species("e", -1, M_ELECTRON, 1.0e18, 10.0, 15.0)
    protons = Species("p", 1, M_PROTON, 1.0e18, 5.0, 5.0)
    wpe = electrons.plasma_frequency
    k = 0.3 / electrons.debye_length
    om = (rng.uniform(0.05, 3.0, N_OMEGA) + 1j * rng.uniform(-1.0, 0.5, N_OMEGA)) * wpe
    one = om[:1]
    cases = [("electrostatic", 0.0, 30.0), ("electromagnetic", 0.0, 30.0),
             ("electrostatic", 0.05, 0.0), ("electromagnetic", 0.05, 0.0)]
    worst = 0.0
    print(f"{'model':16s} {'B':>5s} {'species':>18s} {'1000 ω [ms]':>12s} {'ratio':>7s} "
          f"{'one ω [µs]':>11s} {'ratio':>7s}")
    for model, b, angle in cases:
        def disp(e: Species, model=model, b=b, angle=angle) -> Dispersion:
            return Dispersion(Plasma((e, protons), b), k=k, angle_deg=angle, model=model,
                              omega_ref=wpe)

        base = disp(electrons)
        t_arr = best(lambda base=base: base(om), number=5)
        t_one = best(lambda base=base: base(one), number=50)
        print(f"{model:16s} {b:5.2f} {'maxwellian':>18s} {t_arr * 1e3:12.3f} {1.0:7.2f} "
              f"{t_one * 1e6:11.1f} {1.0:7.2f}")
        variants = [(f"kappa {kappa:g}", replace(electrons, distribution="kappa", kappa=kappa))
                    for kappa in (1.6, 2.5, 6.0, 30.0)]
        variants.append(("core + halo", replace(electrons, components=(
            Component(0.9, 10.0, 15.0), Component(0.1, 100.0, 150.0)))))
        for label, e in variants:
            d = disp(e)
            ta = best(lambda d=d: d(om), number=5)
            to = best(lambda d=d: d(one), number=50)
            ratio = ta / t_arr
            if label.startswith("kappa"):
                worst = max(worst, ratio)
            print(f"{model:16s} {b:5.2f} {label:>18s} {ta * 1e3:12.3f} {ratio:7.2f} "
                  f"{to * 1e6:11.1f} {to / t_one:7.2f}")
    print(f"worst kappa / Maxwellian ratio on {N_OMEGA} ω: {worst:.2f} (floor {FLOOR:g}): "
          + ("met" if worst <= FLOOR else "NOT met"))


if __name__ == "__main__":
    main()
