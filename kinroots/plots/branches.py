"""Figures that accompany every table (matplotlib, imported inside the functions).

Each function takes plain arrays and labels, renders with the non-interactive Agg
backend and writes the PNG atomically.
"""

from __future__ import annotations

from collections.abc import Callable, Sequence
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from kinroots.plots._style import colours, new_figure, save_figure


@dataclass(frozen=True)
class BranchCurve:
    """One branch for plotting: normalized k and ω (NaN where a point failed)."""

    label: str
    k: np.ndarray
    omega: np.ndarray


def plot_branches(
    path: Path,
    curves: Sequence[BranchCurve],
    *,
    k_label: str,
    omega_label: str,
    title: str = "",
    growth_floor: float = 0.0,
) -> None:
    """ω_r and γ against k, one colour per branch; growing parts (γ > 0) marked.

    Parameters
    ----------
    path : Path
        Output PNG.
    curves : sequence of BranchCurve
        Normalized k and complex ω per branch.
    k_label, omega_label : str
        Axis unit labels, e.g. ``"λ_De"`` and ``"ω_pe"``.
    growth_floor : float
        A point is marked growing when γ > growth_floor·|ω| (the root finder's
        resolution of the sign of γ).
    """
    fig = new_figure(figsize=(8.0, 6.5), layout="constrained")
    ax_r, ax_i = fig.subplots(2, 1, sharex=True)
    cmap = colours(len(curves))
    any_growth = False
    for colour, c in zip(cmap, curves, strict=False):
        k = np.asarray(c.k, dtype=float)
        w = np.asarray(c.omega, dtype=complex)
        ax_r.plot(k, w.real, "-", color=colour, lw=1.5, label=c.label)
        ax_i.plot(k, w.imag, "-", color=colour, lw=1.5, label=c.label)
        grow = w.imag > growth_floor * np.abs(w)
        if np.any(grow):
            any_growth = True
            ax_r.plot(k[grow], w.real[grow], "o", color=colour, ms=3.5, mfc="none")
            ax_i.plot(k[grow], w.imag[grow], "o", color=colour, ms=3.5, mfc="none")
    ax_i.axhline(0.0, color="0.5", lw=0.8, ls="--")
    ax_r.set_ylabel(f"ω_r / {omega_label}")
    ax_i.set_ylabel(f"γ / {omega_label}")
    ax_i.set_xlabel(f"k · {k_label}")
    if title:
        ax_r.set_title(title)
    if curves:
        ax_r.legend(fontsize="small", ncol=2, loc="best")
    if any_growth:
        ax_i.text(
            0.01, 0.97, "open circles: growing (γ > 0)", transform=ax_i.transAxes,
            va="top", fontsize="small",
        )
    for ax in (ax_r, ax_i):
        ax.grid(True, alpha=0.3)
    save_figure(fig, path)


def plot_root_map(
    path: Path,
    func: Callable[[np.ndarray], np.ndarray],
    box: tuple[float, float, float, float],
    roots: Sequence[complex],
    *,
    omega_label: str,
    title: str = "",
    resolution: int = 160,
    margin: float = 0.08,
) -> None:
    """log10|D| over the search window (with a margin), the window drawn, roots marked.

    Parameters
    ----------
    func : callable
        Vectorized ``D(omega)`` in normalized frequency.
    box : (re_min, re_max, im_min, im_max)
        The search window, normalized.
    roots : sequence of complex
        Converged roots to mark.
    """
    re0, re1, im0, im1 = box
    dr, di = (re1 - re0) * margin, (im1 - im0) * margin
    x = np.linspace(re0 - dr, re1 + dr, resolution)
    y = np.linspace(im0 - di, im1 + di, resolution)
    zz = x[None, :] + 1j * y[:, None]
    with np.errstate(all="ignore"):
        vals = np.asarray(func(zz.ravel())).reshape(zz.shape)
        logd = np.log10(np.abs(vals))
    logd[~np.isfinite(logd)] = np.nan
    fig = new_figure(figsize=(7.5, 6.0), layout="constrained")
    ax = fig.subplots()
    mesh = ax.pcolormesh(x, y, logd, shading="auto", cmap="viridis")
    fig.colorbar(mesh, ax=ax, label="log10 |D|")
    ax.plot([re0, re1, re1, re0, re0], [im0, im0, im1, im1, im0], "w--", lw=1.0,
            label="search window")
    if roots:
        r = np.asarray(roots, dtype=complex)
        ax.plot(r.real, r.imag, "x", color="red", ms=9, mew=2, label="roots")
    ax.axhline(0.0, color="w", lw=0.6, alpha=0.6)
    ax.set_xlabel(f"Re ω / {omega_label}")
    ax.set_ylabel(f"Im ω / {omega_label}")
    if title:
        ax.set_title(title)
    ax.legend(loc="lower right", fontsize="small")
    save_figure(fig, path)
