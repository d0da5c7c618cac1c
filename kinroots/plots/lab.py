"""Figures for the lab predictions: launched waves and the scattered spectrum.

Each function draws on the axes it is given (``ax=``) or on a new Figure, returns the
Figure, and writes it when given ``path`` (format from the suffix: png, svg or pdf).
"""

from __future__ import annotations

import math
from collections.abc import Mapping, Sequence
from pathlib import Path
from typing import Any

import numpy as np

from kinroots.plots._style import (
    axes_grid,
    branch_style,
    literal,
    math_label,
    plain_log_ticks,
    save_figure,
    set_title,
)

__all__ = ["LaunchCurve", "launch_curves_from_rows", "plot_launch", "plot_spectrum"]


class LaunchCurve:
    """One launched wave: frequencies [Hz] and complex k [1/m] (NaN where failed),
    and optionally which points a survey verified."""

    def __init__(self, label: str, freq_hz: Sequence[float], k_per_m: Sequence[complex],
                 verified: Sequence[bool] | None = None):
        self.label = label
        self.freq_hz = np.asarray(freq_hz, dtype=float)
        self.k_per_m = np.asarray(k_per_m, dtype=complex)
        self.verified = None if verified is None else np.asarray(verified, dtype=bool)


def launch_curves_from_rows(rows: Sequence[Mapping[str, Any]]) -> list[LaunchCurve]:
    """Launched-wave curves from typed launch.csv rows (``branch``, ``freq_hz``,
    ``k_real_per_m``, ``k_imag_per_m``, ``converged``, ``verified``); failed points NaN.
    An Im k marked as rounding noise (``below_resolution``) is drawn as 0, not as a
    spike of 1e-20 that the axis would autoscale to."""
    by_branch: dict[Any, list[Mapping[str, Any]]] = {}
    for r in rows:
        by_branch.setdefault(r["branch"], []).append(r)
    curves = []
    for b, pts in by_branch.items():
        pts = sorted(pts, key=lambda r: float(r["freq_hz"]))
        ok = [bool(r.get("converged")) for r in pts]
        curves.append(LaunchCurve(
            f"wave {b}", [float(r["freq_hz"]) for r in pts],
            [complex(float(r["k_real_per_m"]),
                     0.0 if "imag" in str(r.get("below_resolution") or "")
                     else float(r["k_imag_per_m"])) if c
             else complex(math.nan, math.nan) for r, c in zip(pts, ok, strict=True)],
            [bool(r.get("verified")) and c for r, c in zip(pts, ok, strict=True)]))
    return curves


def plot_launch(curves: Sequence[LaunchCurve], *, title: str = "", ax: Any = None,
                path: Path | None = None) -> Any:
    """Wavelength, phase speed and damping length 1/Im k against driving frequency.

    Waves that decay along +k (Im k > 0) are drawn solid in the damping-length panel;
    waves that grow along +k (Im k < 0) are drawn there as |1/Im k| with open markers
    and labelled "growing".  Filled markers: points verified by a survey.

    Parameters
    ----------
    ax : sequence of three Axes, optional
        Axes for wavelength, phase speed and damping length; a new Figure when omitted.

    Returns
    -------
    matplotlib.figure.Figure
    """
    fig, (ax_l, ax_v, ax_d) = axes_grid(ax, 3, figsize=(8.0, 9.0), sharex=True)
    any_growth = False
    for i, c in enumerate(curves):
        st = branch_style(i)
        f = c.freq_hz / 1e6
        k = c.k_per_m
        ver = c.verified if c.verified is not None else np.zeros(f.size, bool)
        with np.errstate(all="ignore"):
            lam = 100 * 2 * np.pi / k.real
            vph = 2 * np.pi * c.freq_hz / k.real
            damp = 100.0 / k.imag
        for a, y in ((ax_l, lam), (ax_v, vph)):
            a.plot(f, y, ls=st["ls"], color=st["color"], lw=1.4,
                   label=literal(c.label) if a is ax_l else None)
            a.plot(f[ver], y[ver], ls="none", marker=st["marker"], color=st["color"], ms=4)
        decays = np.where(damp > 0, damp, np.nan)
        ax_d.plot(f, decays, ls=st["ls"], color=st["color"], lw=1.4)
        ax_d.plot(f[ver], decays[ver], ls="none", marker=st["marker"], color=st["color"],
                  ms=4)
        if np.any(damp < 0):
            any_growth = True
            ax_d.plot(f, np.where(damp < 0, -damp, np.nan), ls=":", color=st["color"],
                      lw=1.4, marker=st["marker"], mfc="white", ms=4)
    ax_l.set_ylabel("wavelength [cm]")
    ax_v.set_ylabel("phase speed [m/s]")
    ax_d.set_ylabel("damping length 1/Im k [cm]")
    ax_d.set_xlabel("driving frequency [MHz]")
    for a in (ax_l, ax_v, ax_d):
        a.grid(True, alpha=0.3)
        if any(np.any(np.isfinite(ln.get_ydata()) & (np.asarray(ln.get_ydata()) > 0))
               for ln in a.get_lines()):
            a.set_yscale("log")
            plain_log_ticks(a.yaxis, span=1.0)
    if not any(np.isfinite(c.k_per_m).any() for c in curves):
        for a in (ax_l, ax_v, ax_d):  # say why the panels are blank
            a.text(0.5, 0.5, "no wave found in the k box\n(see the notes in launch.json)",
                   transform=a.transAxes, ha="center", va="center", color="0.3")
    if any_growth:
        ax_d.text(0.01, 0.02, "dotted, open markers: growing along +k (|1/Im k| shown)",
                  transform=ax_d.transAxes, fontsize="small", va="bottom")
    if curves:
        from matplotlib.lines import Line2D

        handles, labels = ax_l.get_legend_handles_labels()
        if any(c.verified is not None and np.any(c.verified) for c in curves):
            handles.append(Line2D([], [], ls="none", marker="o", color="0.2", ms=4))
            labels.append("marker: verified by a survey")
        ax_l.legend(handles, labels, fontsize="small", ncol=2)
    set_title(ax_l, title)
    if path is not None:
        save_figure(fig, path)
    return fig


def plot_spectrum(
    shift_nm: np.ndarray,
    power: np.ndarray,
    *,
    ion_window_nm: float,
    alpha: float | None = None,
    title: str = "",
    ax: Any = None,
    path: Path | None = None,
) -> Any:
    """Relative scattered power per nm against wavelength shift: whole and centre.

    The lower panel is the ion feature only in the collective regime (α = 1/(k λ_De)
    ≳ 1); for α < 1 the centre holds a slice of the electron feature, and the panel's
    title says so.

    Parameters
    ----------
    ax : (Axes, Axes), optional
        Axes for the whole spectrum and its centre; a new Figure when omitted.

    Returns
    -------
    matplotlib.figure.Figure
    """
    fig, (ax_all, ax_ion) = axes_grid(ax, 2, figsize=(8.0, 7.5))
    x = np.asarray(shift_nm, dtype=float)
    y = np.asarray(power, dtype=float)
    ax_all.semilogy(x, np.maximum(y, 1e-12), "-", lw=1.2, color="#0072B2")
    ax_all.set_ylim(max(1e-8, float(np.nanmin(y[y > 0])) if np.any(y > 0) else 1e-8), 2.0)
    shift_label = math_label("wavelength shift λ_s − λ_i [nm]")
    ax_all.set_xlabel(shift_label)
    ax_all.set_ylabel("relative power per nm")
    sel = np.abs(x) <= ion_window_nm
    ax_ion.plot(x[sel], y[sel], "-", lw=1.2, color="#0072B2")
    ax_ion.set_xlabel(shift_label)
    ax_ion.set_ylabel("relative power per nm")
    if alpha is not None and alpha < 1.0:
        note = (f"centre ±{ion_window_nm:.3g} nm: non-collective (α = {alpha:.2g} < 1), "
                "no separate ion feature; this is the middle of the electron feature")
    else:
        note = f"ion feature (centre ±{ion_window_nm:.3g} nm)"
    set_title(ax_ion, note, fontsize="small")
    for a in (ax_all, ax_ion):
        a.grid(True, alpha=0.3)
    set_title(ax_all, title)
    if path is not None:
        save_figure(fig, path)
    return fig
