"""Validation: spatial damping of a launched ion acoustic wave (complex k at real ω).

Plasma: hydrogen, Te = 10 eV, Te/Ti = 10 and 20, electrostatic, unmagnetized.  Units
are ω_pi and 1/λ_De.  For a wave driven at real ω the spatial root k = k_r + i k_i
(spatial_roots) is the analytic continuation of the temporal branch ω(k).

Reference (common practice; e.g. T. H. Stix, *Waves in Plasmas*, 1992, on wave energy
flow, from memory): k_i ≈ −γ/v_g, with v_g = dω_r/dk at the temporal root ω(k0) =
ω_r + iγ, launched at ω_r.  Derived here: expanding ω(k0 + δ) = ω_r gives
δ = −iγ/v, with v = dω/dk complex.  So k_i = −γ Re v/|v|² + O(γ²ω″), and the relative
correction to −γ/Re v is (Im v/Re v)² plus ω″ terms.  Both are second order in the
damping, ~(γ/ω_r)² for a wave whose γ/ω varies slowly with k.  The tolerance is
3(γ/ω_r)².  At Te/Ti = 10 the measured (Im v/Re v)² is 1.5 (γ/ω_r)².  Likewise
Re k = k0 holds to second order, with the same tolerance (relative).
v_g comes from central differences of two more temporal roots at k0 ± 1e-4.  Their
O(h²) error is ~1e-8, negligible.
"""

from __future__ import annotations

import math

from _checks import Check, assert_all, validation

from kinroots.io.case import Case, parse_case
from kinroots.study.problem import spatial_roots, survey, trace_spatial

FAMILY = "Spatial damping"
T_E = 10.0
RATIOS = (10, 20)
K0 = 0.3  # k λ_De of the temporal root
H = 1e-4  # step for the group velocity
ROOT_RTOL = 1e-13
SOURCE = (
    "k_i ≈ −γ/v_g for weak damping (common practice; Stix, Waves in Plasmas 1992, from "
    "memory); second-order corrections derived here"
)


def hydrogen_case(ratio: float) -> Case:
    """Electrons and protons, Te/Ti = ratio; units ω_pi and λ_De."""
    w_f = K0 * math.sqrt(1 / (1 + K0 * K0) + 3 / ratio)
    return parse_case(
        {
            "title": f"Launched ion acoustic wave, Te/Ti = {ratio} (validation)",
            "species": [
                {"name": "e", "charge": -1, "mass": "electron", "density": 1e17,
                 "temperature": T_E},
                {"name": "H+", "charge": 1, "mass": "proton", "density": 1e17,
                 "temperature": T_E / ratio},
            ],
            "wave": {"model": "electrostatic", "angle": 0.0},
            "scan": {"k": {"start": 0.01, "stop": 1.0, "points": 2}},
            "units": {"frequency": "plasma:H+", "length": "debye:e"},
            "search": {"real": [0.5 * w_f, 1.5 * w_f], "imag": [-0.3 * w_f, 0.02 * K0]},
            "solver": {"tolerance": ROOT_RTOL},
        },
        "<validation: spatial damping>",
    )


def temporal_root_and_group_velocity(case: Case) -> tuple[complex, complex]:
    """Least-damped temporal root at K0 and complex dω/dk by central differences."""
    s = survey(case, K0)
    assert s.complete and len(s.values) > 0, s.notes
    w0 = max(s.values, key=lambda z: z.imag)
    box = (0.7 * w0.real, 1.3 * w0.real, 2 * w0.imag, -w0.imag)
    near = []
    for k in (K0 + H, K0 - H):
        sk = survey(case, k, box=box)
        assert sk.complete and len(sk.values) > 0, sk.notes
        near.append(min(sk.values, key=lambda z: abs(z - w0)))
    return complex(w0), complex((near[0] - near[1]) / (2 * H))


def spatial_root(case: Case, omega: float) -> complex:
    """The single complex k (normalized) near K0 at real ω."""
    ks = spatial_roots(case, omega, (0.8 * K0, 1.2 * K0, -0.2 * K0, 0.05 * K0))
    assert ks.complete and len(ks.values) == 1, ks.notes
    return complex(ks.values[0])


@validation(FAMILY)
def spatial_damping_checks() -> list[Check]:
    """Im k and Re k of the launched wave against the temporal root and v_g."""
    out = []
    for ratio in RATIOS:
        case = hydrogen_case(ratio)
        w0, v = temporal_root_and_group_velocity(case)
        kc = spatial_root(case, w0.real)
        tol = 3 * (w0.imag / w0.real) ** 2
        text = f"hydrogen, Te = {T_E:g} eV, Te/Ti = {ratio}, launched at Re ω(kλ_De = {K0})"
        reason = f"second-order corrections 3(γ/ω_r)², γ/ω_r = {w0.imag / w0.real:.3g}"
        out += [
            Check(FAMILY, "Im k λ_De of the launched wave", text, SOURCE,
                  -w0.imag / v.real, kc.imag, tol, reason),
            Check(FAMILY, "Re k λ_De of the launched wave", text, SOURCE, K0, kc.real, tol,
                  reason),
        ]
    return out


def test_spatial_damping() -> None:
    assert_all(spatial_damping_checks())


def figure(path: str) -> None:
    """Im k(ω) along the launched-wave branch, with −γ/v_g from temporal roots."""
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt
    import numpy as np

    fig, ax = plt.subplots(figsize=(5.5, 3.6), dpi=90)
    for ratio, mark in zip(RATIOS, ("o", "s"), strict=True):
        case = hydrogen_case(ratio)
        w0, v = temporal_root_and_group_velocity(case)
        omegas = np.linspace(0.6, 1.4, 17) * w0.real
        box = (0.3 * K0, 2.0 * K0, -0.2 * K0, 0.05 * K0)
        branches = trace_spatial(case, omegas, box)
        for b in branches:
            pts = [(p, r.value) for p, r in b.points if r.converged]
            ax.plot([p for p, _ in pts], [z.imag for _, z in pts], "-",
                    label=f"kinroots, Te/Ti = {ratio}")
        ax.plot([w0.real], [-w0.imag / v.real], mark, mfc="none",
                label=f"−γ/v_g at kλ_De = {K0}, Te/Ti = {ratio}")
    ax.set_xlabel("ω / ω_pi (real)")
    ax.set_ylabel("Im k λ_De")
    ax.set_title("Launched ion acoustic wave, hydrogen", fontsize=9)
    ax.legend(fontsize=7)
    fig.tight_layout()
    fig.savefig(path)
    plt.close(fig)
