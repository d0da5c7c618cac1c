"""Bounded memory of large evaluations (issue 14, item 6; DEVELOPERS.md, "Memory").

Dispersion and dispersion_pairs evaluate many points in blocks of about BLOCK_ELEMENTS
(point, harmonic) elements, so the memory traced during one call is bounded by the
output plus a constant, whatever the number of points. Measured with tracemalloc on a
three-species electromagnetic plasma at large k⊥ρ (hundreds of harmonics), where one
unblocked call on the same points would need several hundred MiB.
"""

from __future__ import annotations

import tracemalloc

import numpy as np

from kinroots.physics.dispersion import BLOCK_ELEMENTS, Dispersion, dispersion_pairs
from kinroots.physics.plasma import AMU, M_ELECTRON, M_PROTON, Plasma, Species

#: Bound stated in DEVELOPERS.md: peak traced memory of one call, beyond its output.
BOUND_MIB = 64.0


def _plasma() -> Plasma:
    return Plasma(
        (
            Species("p", 1, M_PROTON, 5.0e6, 10.0, 25.0),
            Species("alpha", 2, 4.001506 * AMU, 0.2e6, 40.0, 40.0),
            Species("e", -1, M_ELECTRON, 5.4e6, 12.0, 12.0),
        ),
        B=6.0e-9,
    )


def _peak_mib(func) -> float:
    tracemalloc.start()
    try:
        tracemalloc.reset_peak()
        base = tracemalloc.get_traced_memory()[0]
        out = func()
        peak = tracemalloc.get_traced_memory()[1] - base
    finally:
        tracemalloc.stop()
    out_bytes = sum(a.nbytes for a in out)
    return (peak - out_bytes) / 2**20


def test_dispersion_on_many_omega_stays_within_the_bound() -> None:
    pl = _plasma()
    wcp = pl.species[0].cyclotron_frequency(pl.B)
    rho = pl.species[0].thermal_speed_perp / wcp
    disp = Dispersion(pl, k=20.0 / rho, angle_deg=60.0, model="em", omega_ref=wcp)
    assert max(disp.harmonics.values()) > 100  # large k⊥ρ: many harmonics
    n = 3000
    assert n * (2 * max(disp.harmonics.values()) + 1) > 10 * BLOCK_ELEMENTS
    om = (np.linspace(0.02, 2.0, n) + 0.1j) * wcp
    peak = _peak_mib(lambda: disp(om))
    assert peak < BOUND_MIB
    # the blocks give the values of single calls (to rounding: sums over other shapes)
    d, dd = disp(om)
    d1, dd1 = disp(om[[0, 1500, 2999]])
    np.testing.assert_allclose(d[[0, 1500, 2999]], d1, rtol=1e-13)
    np.testing.assert_allclose(dd[[0, 1500, 2999]], dd1, rtol=1e-13)


def test_dispersion_pairs_on_many_pairs_stays_within_the_bound() -> None:
    pl = _plasma()
    wcp = pl.species[0].cyclotron_frequency(pl.B)
    rho = pl.species[0].thermal_speed_perp / wcp
    n = 3000
    k = np.linspace(15.0, 20.0, n) / rho
    om = (np.linspace(0.02, 2.0, n) + 0.1j) * wcp
    peak = _peak_mib(lambda: dispersion_pairs(pl, k=k, omega=om, angle_deg=60.0, model="em",
                                              omega_ref=wcp))
    assert peak < BOUND_MIB
