"""Speed of Z and Z' against a bare scipy.special.wofz call on the same 10^6 points."""

from __future__ import annotations

import time
from collections.abc import Callable

import numpy as np
from scipy.special import wofz

from kinroots.physics.zfunc import plasma_z, plasma_z_and_prime

N = 10**6
REPEATS = 7
FLOOR_Z = 1.3
FLOOR_Z_AND_PRIME = 2.0


def best_of(f: Callable[[], object]) -> float:
    times = []
    for _ in range(REPEATS):
        t0 = time.perf_counter()
        f()
        times.append(time.perf_counter() - t0)
    return min(times)


def main() -> int:
    rng = np.random.default_rng(12345)
    zeta = rng.uniform(-10, 10, N) + 1j * rng.uniform(-3, 3, N)
    base = best_of(lambda: wofz(zeta))
    t_z = best_of(lambda: plasma_z(zeta))
    t_zp = best_of(lambda: plasma_z_and_prime(zeta))
    print(f"points: {N}, |Re| < 10, -3 < Im < 3, best of {REPEATS}")
    print(f"scipy.special.wofz     {base * 1e3:8.1f} ms   1.00x")
    print(f"plasma_z               {t_z * 1e3:8.1f} ms   {t_z / base:.2f}x  (floor {FLOOR_Z}x)")
    print(
        f"plasma_z_and_prime     {t_zp * 1e3:8.1f} ms   {t_zp / base:.2f}x"
        f"  (floor {FLOOR_Z_AND_PRIME}x)"
    )
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
