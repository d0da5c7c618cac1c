"""Windows where |D| exceeds double precision (issue 15, item 1): survey cost and the
overhead of the overflow-free evaluation.

Plain script (not collected by pytest): ``.venv/bin/python benchmarks/bench_overflow.py``.

1. Survey cost (dispersion evaluations, deterministic; wall time, machine-dependent) for
   windows that kinroots refused before the overflow-free evaluation ("f is not finite
   on the bottom edge"), each beside the narrower window that double precision handles
   unscaled, timed in the same run.
2. Overhead of :meth:`Dispersion.scaled` (mantissa and binary exponent per point) and of
   a survey's scaled call (``log2_offset`` set) against the plain ``Dispersion(ω)`` at
   points where double D is finite, 1000 ω per call, four models; floor ≤ 1.5×.
3. Cost of keeping a cyclotron harmonic's resonant term apart (``_rank_two_det``, the
   route ``Dispersion(ω)`` takes below a harmonic) against the plain determinant of the
   same summed tensor at the same points (noise there, but the cost the route replaces),
   1000 ω per call below the proton harmonics of the hydrogen window.
4. The same for Krook species: the overflow-free χ_s = N_s/Q_s builder against the plain
   ratio, the survey's F = (Π Q_s) D as mantissas (``log2_offset`` set) against plain F,
   unmagnetized and magnetized; and the spatial problem's D(k), dD/dk
   (``dispersion_in_k_scaled`` against ``dispersion_in_k``), at finite points.
Ratios are meaningful only within one run; on a loaded machine they move by tens of
percent.
"""

from __future__ import annotations

import time
import timeit
import tomllib
from pathlib import Path

import numpy as np

from kinroots.io.case import load_case, parse_case
from kinroots.physics.dispersion import (
    Dispersion,
    _det_and_derivative,
    dispersion_in_k,
    dispersion_in_k_scaled,
)
from kinroots.physics.models import krook
from kinroots.physics.plasma import M_ELECTRON, M_PROTON, Plasma, Species
from kinroots.study.problem import function_at, spatial_roots, survey

FLOOR = 1.5
N_OMEGA = 1000

#: The case files of tests/test_overflow_survey.py.
DATA = Path(__file__).resolve().parents[1] / "tests" / "data"
_HOT_IONS = DATA / "overflow_hot_ions.toml"
_WEIBEL = DATA / "overflow_weibel.toml"
_OBLIQUE = DATA / "overflow_oblique.toml"
_HYDROGEN = DATA / "harmonic_hydrogen.toml"

#: (name, case file, k, wide window (used to be refused), narrow window (double precision))
WINDOWS = [
    ("ES hot ions, chi_i overflows", _HOT_IONS, 0.5,
     (-0.1, 0.1, -0.45, 0.05), (-0.1, 0.1, -0.2, 0.05)),
    ("ES hot ions, |D| 1e1598", _HOT_IONS, 0.5,
     (-0.1, 0.1, -1.0, 0.05), (-0.1, 0.1, -0.2, 0.05)),
    ("EM Weibel, |D| 1e490", _WEIBEL, 0.5,
     (-0.002, 0.002, -0.01, 0.02), (-0.002, 0.002, -0.004, 0.02)),
    ("EM Weibel, |D| 1e4000", _WEIBEL, 0.5,
     (-0.002, 0.002, -0.03, 0.02), (-0.002, 0.002, -0.004, 0.02)),
    ("EM oblique B, 1e535", _OBLIQUE, 0.5,
     (0.2, 0.9, -5.0, 0.2), (0.2, 0.9, -3.0, 0.2)),
    ("EM 10 widths below nOmega", _HYDROGEN, 1.0,
     (0.05, 3.0, -0.1, 0.1), (0.05, 3.0, -0.025, 0.1)),
]


def best(f, number: int, repeat: int = 3) -> float:
    """Best time of one call [s] (min over repeats of the mean over ``number`` calls)."""
    return min(timeit.repeat(f, number=number, repeat=repeat)) / number


def surveys() -> None:
    print("1. survey of windows that used to be refused, beside the narrower window that "
          "double precision handles")
    print(f"{'window':26s} {'evals':>7s} {'time [s]':>9s} {'roots':>6s} {'complete':>9s}"
          f" | {'narrow evals':>12s} {'time [s]':>9s} {'roots':>6s}")
    for name, path, k, wide, narrow in WINDOWS:
        case = load_case(path)
        t0 = time.perf_counter()
        res = survey(case, k, box=wide)
        t1 = time.perf_counter()
        ref = survey(case, k, box=narrow)
        t2 = time.perf_counter()
        print(f"{name:26s} {res.evaluations:7d} {t1 - t0:9.2f} {len(res.roots):6d} "
              f"{str(res.complete):>9s} | {ref.evaluations:12d} {t2 - t1:9.2f} "
              f"{len(ref.roots):6d}")


def overhead() -> float:
    print(f"\n2. overflow-free evaluation where double D is finite, {N_OMEGA} ω per call "
          f"(floor: ≤ {FLOOR}x plain)")
    rng = np.random.default_rng(0)
    electrons = Species("e", -1, M_ELECTRON, 1.0e18, 10.0, 15.0)
    protons = Species("p", 1, M_PROTON, 1.0e18, 5.0, 5.0)
    wpe = electrons.plasma_frequency
    k = 0.3 / electrons.debye_length
    om = (rng.uniform(0.05, 3.0, N_OMEGA) + 1j * rng.uniform(-0.3, 0.5, N_OMEGA)) * wpe
    print(f"{'model':16s} {'B':>5s} {'ω':>5s} {'plain [ms]':>11s} {'scaled':>8s} {'ratio':>6s} "
          f"{'offset':>8s} {'ratio':>6s} {'floor':>6s}")
    worst = 0.0
    for model, b, angle in [("electrostatic", 0.0, 30.0), ("electromagnetic", 0.0, 30.0),
                            ("electrostatic", 0.05, 30.0), ("electromagnetic", 0.05, 30.0)]:
        d = Dispersion(Plasma((electrons, protons), b), k=k, angle_deg=angle, model=model,
                       omega_ref=wpe)
        v, dv = d(om)
        pts = om[np.isfinite(v) & np.isfinite(dv)]  # where double D is finite
        t_plain = best(lambda d=d, pts=pts: d(pts), number=5)
        t_scaled = best(lambda d=d, pts=pts: d.scaled(pts), number=5)
        d.log2_offset = 64
        t_offset = best(lambda d=d, pts=pts: d(pts), number=5)
        d.log2_offset = 0
        r1, r2 = t_scaled / t_plain, t_offset / t_plain
        worst = max(worst, r1, r2)
        print(f"{model:16s} {b:5.2f} {pts.size:5d} {t_plain * 1e3:11.3f} "
              f"{t_scaled * 1e3:8.3f} {r1:6.2f} {t_offset * 1e3:8.3f} {r2:6.2f} {FLOOR:6.1f}")
    print(f"worst ratio {worst:.2f} (floor {FLOOR}): {'met' if worst <= FLOOR else 'NOT met'}")
    return worst


def resonant_overhead() -> float:
    print(f"\n3. resonant term kept apart below the proton harmonics, {N_OMEGA} ω per call")
    case = load_case(_HYDROGEN)
    d = Dispersion(case.plasma, k=1.0 / case.units.length_unit, angle_deg=case.angle_deg,
                   model=case.model, omega_ref=case.units.omega_unit)
    rng = np.random.default_rng(0)
    n = rng.integers(0, 4, N_OMEGA)
    om = (n + rng.uniform(-0.08, 0.08, N_OMEGA) + 1j * rng.uniform(-0.1, -0.03, N_OMEGA))
    om = om * case.units.omega_unit
    with np.errstate(all="ignore"):
        share = float(np.mean(d._scaled_sum.resonant_columns(om) >= 0))
    t_split = best(lambda: d(om), number=5)
    t_plain = best(lambda: _det_and_derivative(*d._scaled(om)), number=5)
    ratio = t_split / t_plain
    print(f"points kept apart {share:.0%}; split {t_split * 1e3:.3f} ms, plain det "
          f"{t_plain * 1e3:.3f} ms, ratio {ratio:.2f}")
    return ratio


def _with_nu(case, **nus: float):
    raw = dict(case.raw)
    species = [dict(s) for s in raw["species"]]
    for s in species:
        if s["name"] in nus:
            s["collision_frequency"] = nus[s["name"]] * case.units.omega_unit
    raw["species"] = species
    return parse_case(raw, "bench")


def krook_and_spatial() -> float:
    print("\n4. Krook species and the spatial problem")
    hot = _with_nu(load_case(_HOT_IONS), **{"H+": 0.01, "e": 0.001})
    oblique_text = _OBLIQUE.read_text().replace('"electromagnetic"', '"electrostatic"')
    raw = tomllib.loads(oblique_text)
    oblique = _with_nu(parse_case(raw, "oblique es"), **{"H+": 0.05})
    argon = load_case(Path(__file__).resolve().parents[1] / "cases" / "argon_ion_acoustic.toml")
    print(f"{'survey (used to be refused)':34s} {'evals':>7s} {'time [s]':>9s} {'roots':>6s} "
          f"| {'narrow evals':>12s} {'time [s]':>9s} {'roots':>6s}")
    rows = [("Krook ES hot ions, |F| 1e312", lambda b: survey(hot, 0.5, box=b),
             (-0.1, 0.1, -0.45, 0.05), (-0.1, 0.1, -0.2, 0.05)),
            ("Krook ES oblique B, |F| 1e446", lambda b: survey(oblique, 0.5, box=b),
             (0.2, 0.9, -8.0, 0.2), (0.2, 0.9, -3.0, 0.2)),
            ("spatial argon k box, |D| 1e618", lambda b: spatial_roots(argon, 0.3, b),
             (0.02, 0.0202, 0.0, 0.05), (0.02, 0.0202, 0.0, 0.022))]
    for name, run, wide, narrow in rows:
        t0 = time.perf_counter()
        res = run(wide)
        t1 = time.perf_counter()
        ref = run(narrow)
        t2 = time.perf_counter()
        print(f"{name:34s} {res.evaluations:7d} {t1 - t0:9.2f} {len(res.roots):6d} | "
              f"{ref.evaluations:12d} {t2 - t1:9.2f} {len(ref.roots):6d}")
    rng = np.random.default_rng(1)
    print(f"\n{'overhead where double is finite':40s} {'plain [ms]':>11s} {'new [ms]':>9s} "
          f"{'ratio':>6s}")
    worst = 0.0

    def row(name: str, plain, new) -> None:
        nonlocal worst
        # interleaved single calls (plain, new, plain, …), so that load bursts hit both
        # alike; on a loaded machine single calls are preempted in ~1.3 ms slices, and the
        # minimum over many is the unloaded time
        times: list[list[float]] = [[], []]
        for _ in range(60):
            for j, fn in enumerate((plain, new)):
                times[j].append(best(fn, number=1, repeat=1))
        t_plain, t_new = min(times[0]), min(times[1])
        worst = max(worst, t_new / t_plain)
        print(f"{name:40s} {t_plain * 1e3:11.3f} {t_new * 1e3:9.3f} {t_new / t_plain:6.2f}")

    ion = hot.plasma.species[1]
    f = function_at(hot, 0.5)
    d = f.dispersion
    om = (rng.uniform(-0.1, 0.1, N_OMEGA) + 1j * rng.uniform(-0.2, 0.05, N_OMEGA)) * d.omega_ref
    kw = dict(k_par=d.k_par, k_perp=d.k_perp)

    def old_chi():
        n, q, dn, dq = krook.unmagnetized_parts(om, ion, dk=False, **kw)
        return n / q, (dn * q - n * dq) / (q * q)

    row("Krook chi_s (N/Q from mantissas)", old_chi,
        lambda: krook.susceptibility(om, ion, **kw))
    w = om / d.omega_ref

    def offset(fn, pts, value):
        def call():
            fn.dispersion.log2_offset = value
            try:
                return fn(pts)
            finally:
                fn.dispersion.log2_offset = 0
        return call

    row("survey F, unmagnetized (log2_offset set)", offset(f, w, 0), offset(f, w, 64))
    fo = function_at(oblique, 0.5)
    wo = (rng.uniform(0.2, 0.9, N_OMEGA) + 1j * rng.uniform(-3.0, 0.2, N_OMEGA))
    row("survey F, magnetized (log2_offset set)", offset(fo, wo, 0), offset(fo, wo, 64))
    ks = (rng.uniform(0.02, 0.6, N_OMEGA) + 1j * rng.uniform(-0.05, 0.02, N_OMEGA))
    ks = ks / argon.units.length_unit
    kw2 = dict(omega=0.3 * argon.units.omega_unit, k=ks, angle_deg=0.0, model="es",
               omega_ref=argon.units.omega_unit)
    row("spatial D(k), dD/dk (mantissas)", lambda: dispersion_in_k(argon.plasma, **kw2),
        lambda: dispersion_in_k_scaled(argon.plasma, **kw2))
    print(f"worst ratio {worst:.2f} (floor {FLOOR}): {'met' if worst <= FLOOR else 'NOT met'}")
    return worst


def main() -> None:
    surveys()
    overhead()
    resonant_overhead()
    krook_and_spatial()


if __name__ == "__main__":
    main()
