"""Issue 14 figures owned by this script: single-call cost, BLAS threads, Z and Z', start-up,
memory. Every figure is a ratio of two times (or sizes) measured in this run.

Plain script (not collected by pytest): ``.venv/bin/python benchmarks/bench_issue14.py``.
Rows (floor and goal from the issue's table, printed beside each ratio):

* single-ω D / special-function floor, EM magnetized: one ``Dispersion`` call at one ω on
  three species at 45° against the special functions that call needs, one ``wofz`` call on
  the Σ_s (2N_s + 1) arguments ζ_n plus one ``ive`` call per species on its N_s + 2 orders;
* single-ω D / special-function floor, ES (unmagnetized, three species): one ``Dispersion``
  call at one ω against one ``wofz`` call on the three ζ_s;
* D on 256 ω, default BLAS / BLAS pinned to one thread (``OPENBLAS_NUM_THREADS`` and the
  like set to 1 in a second interpreter), EM magnetized;
* Z and Z' / wofz on 1,000+ points (10^4 and 10^6 points), and on short arrays (30 points);
* ``kinroots --help`` / ``python -c pass`` (wall time of fresh interpreters);
* ``kinroots roots`` map peak memory (resident set of the child) on a three-species EM case
  at k d_p = 20, 60° (hundreds of harmonics per ion), with the number of roots found.

Times are the minimum over repetitions (the median is printed beside it); the machine may
be loaded by other work, which moves the ratios by factors of 2–3. The ES single-ω row and
the Z&Z' rows time the two sides of each ratio alternately (:func:`timed_pair`).
"""

from __future__ import annotations

import json
import os
import resource
import subprocess
import sys
import tempfile
import time
import timeit
from pathlib import Path

import numpy as np
from bench_dispersion import plasma  # the same three species (this folder is on sys.path)
from scipy.special import ive, wofz

from kinroots.physics.dispersion import Dispersion
from kinroots.physics.models._harmonics import bessel_weights
from kinroots.physics.zfunc import plasma_z_and_prime

ROOT = Path(__file__).resolve().parent.parent


def timed(f, number: int, repeat: int = 7) -> tuple[float, float]:
    """(min, median) time of one call [s] over ``repeat`` means of ``number`` calls."""
    ts = sorted(t / number for t in timeit.repeat(f, number=number, repeat=repeat))
    return ts[0], ts[len(ts) // 2]


def timed_pair(f, g, number: int, rounds: int = 21
               ) -> tuple[tuple[float, float], tuple[float, float]]:
    """(min, median) time of one call [s] of ``f`` and of ``g``, timed alternately in
    ``rounds`` rounds of ``number`` calls each, so that a burst of load on the machine
    hits both sides of a ratio."""
    tf, tg = [], []
    for _ in range(rounds):
        tf.append(timeit.timeit(f, number=number) / number)
        tg.append(timeit.timeit(g, number=number) / number)
    tf.sort()
    tg.sort()
    return (tf[0], tf[rounds // 2]), (tg[0], tg[rounds // 2])


def row(name: str, ratio: float, floor: float, goal: float, extra: str = "") -> None:
    mark = "goal met" if ratio <= goal else ("floor met" if ratio <= floor else "NOT MET")
    print(f"{name:52s} {ratio:8.2f}   floor <= {floor:<6g} goal <= {goal:<6g} {mark}"
          + (f"   ({extra})" if extra else ""))


def one_omega(B: float, angle: float, model: str, number: int):
    """The plasma, k, the Dispersion, one ω and the (min, median) time of D there."""
    pl = plasma(B)
    e = pl.species[0]
    wpe = e.plasma_frequency
    k = 0.3 * wpe / e.thermal_speed_par
    disp = Dispersion(pl, k=k, angle_deg=angle, model=model, omega_ref=wpe)
    one = np.array([1.1 * wpe + 0.05j * wpe])
    disp(one)
    return pl, k, disp, one, timed(lambda: disp(one), number)


def single_omega_em() -> None:
    pl, k, disp, one, (t_d, m_d) = one_omega(1.0, 45.0, "em", 300)
    # the special functions of that call: wofz on every ζ_n, ive per species
    zetas = []
    lams = []
    cos = np.cos(np.radians(45.0))
    sin = np.sin(np.radians(45.0))
    for s in pl.species:
        n_s = disp.harmonics[s.name]
        om_c = s.cyclotron_frequency(pl.B)
        n = np.arange(-n_s, n_s + 1)
        zetas.append((one[0] - n * om_c) / (k * cos * s.thermal_speed_par))
        lam = (k * sin * s.thermal_speed_perp / om_c) ** 2 / 2.0
        lams.append((np.arange(n_s + 2.0), lam))
        assert bessel_weights(lam, 1e-14).harmonics == n_s
    zeta = np.concatenate(zetas).astype(complex)

    def floor() -> None:
        wofz(zeta)
        for orders, lam in lams:
            ive(orders, lam)

    t_f, m_f = timed(floor, 300)
    t_w, m_w = timed(lambda: wofz(zeta), 300)
    row("single-omega D / (wofz + ive), EM magnetized", t_d / t_f, 10, 4,
        f"D {t_d * 1e6:.0f} us (median {m_d * 1e6:.0f}), floor {t_f * 1e6:.1f} us, "
        f"{zeta.size} zeta, harmonics {disp.harmonics}")
    # stricter: the Bessel tables are computed once per k (cached), so a survey's calls
    # at one k need only the wofz part
    row("single-omega D / wofz alone, EM magnetized", t_d / t_w, 10, 4,
        f"wofz on {zeta.size} points {t_w * 1e6:.1f} us")


def single_omega_es() -> None:
    pl, k, disp, one, _ = one_omega(0.0, 30.0, "es", 1)
    zeta = np.array([(one[0] - 0.0) / (k * s.thermal_speed_par) for s in pl.species])
    (t_d, m_d), (t_f, m_f) = timed_pair(lambda: disp(one), lambda: wofz(zeta), 1000)
    row("single-omega D / special functions, ES", t_d / t_f, 5, 2,
        f"D {t_d * 1e6:.1f} us (median {m_d * 1e6:.1f}), floor {t_f * 1e6:.2f} us")


_BLAS_CHILD = """
import timeit, numpy as np
from kinroots.physics.dispersion import Dispersion
from kinroots.physics.plasma import AMU, M_ELECTRON, M_PROTON, Plasma, Species
pl = Plasma((Species("e", -1, M_ELECTRON, 1.0e19, 10.0, 10.0),
             Species("p", 1, M_PROTON, 0.9e19, 5.0, 12.0),
             Species("alpha", 2, 4.001506 * AMU, 0.05e19, 20.0, 20.0)), B=1.0)
e = pl.species[0]; wpe = e.plasma_frequency; k = 0.3 * wpe / e.thermal_speed_par
rng = np.random.default_rng(0)
om = (rng.uniform(0, 3, 256) + 1j * rng.uniform(-0.5, 0.5, 256)) * wpe
d = Dispersion(pl, k=k, angle_deg=45, model="em", omega_ref=wpe)
d(om)
print(min(timeit.repeat(lambda: d(om), number=3, repeat=7)) / 3)
"""

_THREAD_VARS = ("OPENBLAS_NUM_THREADS", "OMP_NUM_THREADS", "MKL_NUM_THREADS")


def blas_threads() -> None:
    def child(pinned: bool) -> float:
        env = {k: v for k, v in os.environ.items() if k not in _THREAD_VARS}
        if pinned:
            env.update({k: "1" for k in _THREAD_VARS})
        out = subprocess.run([sys.executable, "-c", _BLAS_CHILD], env=env, check=True,
                             capture_output=True, text=True)
        return float(out.stdout.strip())

    default = min(child(False) for _ in range(3))
    pinned = min(child(True) for _ in range(3))
    row("D on 256 omega, default BLAS / pinned to 1 thread", default / pinned, 1.2, 1.0,
        f"{default * 1e3:.1f} ms / {pinned * 1e3:.1f} ms, EM magnetized, 3 species")


def z_and_prime() -> None:
    rng = np.random.default_rng(12345)
    for n, number in ((30, 2000), (10**4, 20), (10**6, 1)):
        zeta = rng.uniform(-10, 10, n) + 1j * rng.uniform(-3, 3, n)
        (t_z, _), (t_w, _) = timed_pair(lambda zeta=zeta: plasma_z_and_prime(zeta),
                                        lambda zeta=zeta: wofz(zeta), number,
                                        rounds=7 if n == 10**6 else 21)
        row(f"Z&Z' / wofz, {n} points", t_z / t_w, 2, 1.5,
            f"{t_z * 1e6:.1f} us / {t_w * 1e6:.1f} us")


def startup() -> None:
    def wall(args: list[str]) -> float:
        best = float("inf")
        for _ in range(7):
            t0 = time.perf_counter()
            subprocess.run(args, check=True, capture_output=True)
            best = min(best, time.perf_counter() - t0)
        return best

    t_pass = wall([sys.executable, "-c", "pass"])
    t_help = wall([sys.executable, "-m", "kinroots", "--help"])
    t_check = wall([sys.executable, "-m", "kinroots", "check",
                    str(ROOT / "cases" / "argon_ion_acoustic.toml")])
    row("kinroots --help / python -c pass", t_help / t_pass, 6, 3,
        f"{t_help * 1e3:.0f} ms / {t_pass * 1e3:.0f} ms; check: {t_check / t_pass:.2f}")


def roots_map_memory() -> None:
    text = (ROOT / "cases" / "space_protons_alphas.toml").read_text()
    text = text.replace("angle = 0.0", "angle = 60.0")
    assert "angle = 60.0" in text
    with tempfile.TemporaryDirectory() as tmp:
        case = Path(tmp) / "big.toml"
        case.write_text(text)
        before = resource.getrusage(resource.RUSAGE_CHILDREN).ru_maxrss
        t0 = time.perf_counter()
        run = subprocess.run([sys.executable, "-m", "kinroots", "roots", str(case), "--at", "20",
                              "-o", str(Path(tmp) / "out")], capture_output=True, text=True)
        wall = time.perf_counter() - t0
        peak = resource.getrusage(resource.RUSAGE_CHILDREN).ru_maxrss  # KiB on Linux
        summary = json.loads((Path(tmp) / "out" / "summary.json").read_text())
        found = len((Path(tmp) / "out" / "roots.csv").read_text().splitlines()) - 1
    # ru_maxrss of children is the largest child so far: the earlier children are small
    mib = max(peak, before) / 1024.0
    print(f"{'roots map peak memory, 3-species EM, k d_p = 20, 60 deg':52s} {mib:8.0f} MiB"
          f"   floor <= 300   goal <= 100    "
          f"{'goal met' if mib <= 100 else ('floor met' if mib <= 300 else 'NOT MET')}"
          f"   (exit {run.returncode}, {wall:.1f} s, roots found {found}"
          f" (count {summary['count']}, complete {summary['complete']}), "
          f"harmonics {summary['harmonics']})")


def main() -> None:
    print("issue 14 (single-call cost, BLAS, Z&Z', start-up, memory); ratio, floor, goal")
    single_omega_em()
    single_omega_es()
    blas_threads()
    z_and_prime()
    startup()
    roots_map_memory()


if __name__ == "__main__":
    main()
