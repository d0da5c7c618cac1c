"""Cost of evaluating D(ω) and dD/dω, per model, against the bare special functions.

Plain script (not collected by pytest): ``.venv/bin/python benchmarks/bench_dispersion.py``.
Three species (electrons, bi-Maxwellian protons, alphas); B = 0 for the unmagnetized
models, B ≠ 0 at 45° for the magnetized ones (skipped with a message if absent).
Prints the time of one evaluation at one ω and the time per ω of one call on 1000 ω,
and two ratios against baselines timed in the same run:

(a) magnetized EM on 1000 ω / the wofz and ive calls it needs on the same number of
    arguments (budget 4×);
(b) unmagnetized ES on 1000 ω / 3 bare wofz calls on 1000 points (budget 3×).
"""

from __future__ import annotations

import importlib.util
import timeit

import numpy as np
from scipy.special import ive, wofz

from kinroots.physics.dispersion import Dispersion
from kinroots.physics.plasma import AMU, M_ELECTRON, M_PROTON, Plasma, Species

N_OMEGA = 1000


def best(f, number: int, repeat: int = 5) -> float:
    """Best time of one call [s] (min over repeats of the mean over ``number`` calls)."""
    return min(timeit.repeat(f, number=number, repeat=repeat)) / number


def plasma(B: float) -> Plasma:
    return Plasma(
        (
            Species("e", -1, M_ELECTRON, 1.0e19, 10.0, 10.0),
            Species("p", 1, M_PROTON, 0.9e19, 5.0, 12.0),
            Species("alpha", 2, 4.001506 * AMU, 0.05e19, 20.0, 20.0),
        ),
        B=B,
    )


def main() -> None:
    rng = np.random.default_rng(0)
    cases = [("electrostatic", False), ("electromagnetic", False),
             ("electrostatic", True), ("electromagnetic", True)]
    results: dict[tuple[str, bool], float] = {}
    for model, magnetized in cases:
        kind = "es" if model == "electrostatic" else "em"
        name = f"{kind}_{'' if magnetized else 'un'}magnetized"
        if magnetized and importlib.util.find_spec(f"kinroots.physics.models.{name}") is None:
            print(f"{model:16s} magnetized=True   skipped: kinroots.physics.models.{name} absent")
            continue
        pl = plasma(1.0 if magnetized else 0.0)
        e = pl.species[0]
        wpe = e.plasma_frequency
        k = 0.3 * wpe / e.thermal_speed_par
        disp = Dispersion(pl, k=k, angle_deg=45.0 if magnetized else 30.0, model=model,
                          omega_ref=wpe)
        one = np.array([1.1 * wpe + 0.05j * wpe])
        many = (rng.uniform(0.0, 3.0, N_OMEGA) + 1j * rng.uniform(-0.5, 0.5, N_OMEGA)) * wpe
        t_one = best(lambda disp=disp, one=one: disp(one), number=50)
        t_many = best(lambda disp=disp, many=many: disp(many), number=5)
        results[(model, magnetized)] = t_many
        print(f"{model:16s} magnetized={magnetized!s:5s}  one ω: {t_one * 1e6:9.1f} µs   "
              f"1000 ω: {t_many * 1e3:8.2f} ms = {t_many / N_OMEGA * 1e6:7.2f} µs per ω   "
              f"harmonics {disp.harmonics}")

    z = rng.normal(size=N_OMEGA) * 2 + 1j * rng.normal(size=N_OMEGA)
    t_wofz = best(lambda: wofz(z), number=20)
    print(f"baseline: wofz on {N_OMEGA} points: {t_wofz * 1e6:.1f} µs")
    key = ("electrostatic", False)
    ratio_b = results[key] / (3 * t_wofz)
    print(f"(b) unmagnetized ES, {N_OMEGA} ω / 3 wofz({N_OMEGA}): {ratio_b:.2f}  (budget 3)")

    key = ("electromagnetic", True)
    if key in results:
        disp = Dispersion(plasma(1.0), k=0.3 * plasma(1.0).species[0].plasma_frequency
                          / plasma(1.0).species[0].thermal_speed_par, angle_deg=45.0,
                          model="electromagnetic", omega_ref=1.0)
        disp(np.array([1.0 + 0j]))
        n_terms = sum(2 * h + 1 for h in disp.harmonics.values())
        x = np.abs(rng.normal(size=N_OMEGA)) + 0.1
        zz = np.tile(z, n_terms)
        xx = np.tile(x, n_terms)
        orders = np.repeat(np.arange(n_terms) % 7, N_OMEGA)
        t_bare = best(lambda: (wofz(zz), ive(orders, xx)), number=3)
        print(f"baseline: wofz + ive on {n_terms} × {N_OMEGA} points "
              f"(Σ_s (2 N_s + 1) harmonics): {t_bare * 1e3:.2f} ms")
        print(f"(a) magnetized EM, {N_OMEGA} ω / bare special functions: "
              f"{results[key] / t_bare:.2f}  (budget 4)")
    else:
        print("(a) magnetized EM absent: ratio not measured")


if __name__ == "__main__":
    main()
