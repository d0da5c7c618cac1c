"""Figures for the lab predictions: launched waves and the scattered spectrum.

Plain arrays in, PNG out (Agg backend, written atomically through :mod:`kinroots.plots.branches`).
"""

from __future__ import annotations

from collections.abc import Sequence
from pathlib import Path

import numpy as np

from kinroots.plots._style import colours, new_figure, save_figure

__all__ = ["LaunchCurve", "plot_launch", "plot_spectrum"]


class LaunchCurve:
    """One launched wave: frequencies [Hz] and complex k [1/m] (NaN where failed)."""

    def __init__(self, label: str, freq_hz: Sequence[float], k_per_m: Sequence[complex]):
        self.label = label
        self.freq_hz = np.asarray(freq_hz, dtype=float)
        self.k_per_m = np.asarray(k_per_m, dtype=complex)


def plot_launch(path: Path, curves: Sequence[LaunchCurve], *, title: str = "") -> None:
    """Wavelength, phase speed and damping length 1/Im k against driving frequency."""
    fig = new_figure(figsize=(8.0, 8.5), layout="constrained")
    ax_l, ax_v, ax_d = fig.subplots(3, 1, sharex=True)
    for colour, c in zip(colours(len(curves)), curves, strict=False):
        f = c.freq_hz / 1e6
        k = c.k_per_m
        with np.errstate(all="ignore"):
            ax_l.plot(f, 100 * 2 * np.pi / k.real, "o-", color=colour, ms=3, label=c.label)
            ax_v.plot(f, 2 * np.pi * c.freq_hz / k.real, "o-", color=colour, ms=3)
            damp = 100.0 / k.imag
            ax_d.plot(f, np.where(damp > 0, damp, np.nan), "o-", color=colour, ms=3)
    ax_l.set_ylabel("wavelength [cm]")
    ax_v.set_ylabel("phase speed [m/s]")
    ax_d.set_ylabel("damping length 1/Im k [cm]")
    ax_d.set_xlabel("driving frequency [MHz]")
    for ax in (ax_l, ax_v, ax_d):
        ax.grid(True, alpha=0.3)
        ax.set_yscale("log")
    if curves:
        ax_l.legend(fontsize="small", ncol=2)
    if title:
        ax_l.set_title(title)
    save_figure(fig, path)


def plot_spectrum(
    path: Path, shift_nm: np.ndarray, power: np.ndarray, *, ion_window_nm: float,
    title: str = "",
) -> None:
    """Relative scattered power per nm against wavelength shift: whole and ion feature."""
    fig = new_figure(figsize=(8.0, 7.0), layout="constrained")
    ax_all, ax_ion = fig.subplots(2, 1)
    x = np.asarray(shift_nm, dtype=float)
    y = np.asarray(power, dtype=float)
    ax_all.semilogy(x, np.maximum(y, 1e-12), "-", lw=1.2)
    ax_all.set_ylim(max(1e-8, float(np.nanmin(y[y > 0])) if np.any(y > 0) else 1e-8), 2.0)
    ax_all.set_xlabel("wavelength shift λ_s − λ_i [nm]")
    ax_all.set_ylabel("relative power per nm")
    sel = np.abs(x) <= ion_window_nm
    ax_ion.plot(x[sel], y[sel], "-", lw=1.2)
    ax_ion.set_xlabel("wavelength shift λ_s − λ_i [nm] (ion feature)")
    ax_ion.set_ylabel("relative power per nm")
    for ax in (ax_all, ax_ion):
        ax.grid(True, alpha=0.3)
    if title:
        ax_all.set_title(title)
    save_figure(fig, path)
