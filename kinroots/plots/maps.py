"""Figures of sweeps: growth-rate map with contours, threshold curves (matplotlib Agg)."""

from __future__ import annotations

from collections.abc import Sequence
from pathlib import Path

import numpy as np

from kinroots.plots._style import new_figure, save_figure

__all__ = ["plot_growth_map", "plot_threshold"]


def plot_growth_map(
    path: Path,
    x: np.ndarray,
    y: np.ndarray | None,
    growth: np.ndarray,
    *,
    x_label: str,
    y_label: str = "",
    growth_label: str,
    levels: Sequence[float] = (),
    threshold: tuple[np.ndarray, np.ndarray] | None = None,
    threshold_label: str = "",
    title: str = "",
) -> None:
    """Maximum growth rate over a 1-D or 2-D sweep.

    Parameters
    ----------
    path : Path
        Output PNG.
    x, y : array
        Axis values (``y`` None for a one-parameter sweep).
    growth : array
        γ_max, shape (len(x),) or (len(x), len(y)); NaN where a point failed.
    x_label, y_label, growth_label : str
        Axis and colour-bar labels.
    levels : sequence of float
        Contour levels (2-D) or horizontal lines (1-D).
    threshold : (array, array), optional
        Marginal curve as (across values, threshold values): drawn on the map with the
        across parameter on x when it is the map's x axis.
    """
    fig = new_figure(figsize=(7.5, 5.5), layout="constrained")
    ax = fig.subplots()
    g = np.asarray(growth, dtype=float)
    if y is None:
        ax.plot(x, g, "o-", ms=3)
        for lv in levels:
            ax.axhline(lv, color="k", ls="--", lw=0.8)
        ax.axhline(0.0, color="0.5", lw=0.6)
        ax.set_xlabel(x_label)
        ax.set_ylabel(growth_label)
    else:
        from matplotlib.colors import TwoSlopeNorm

        finite = g[np.isfinite(g)]
        vmax = float(finite.max()) if finite.size else 1.0
        vmin = float(finite.min()) if finite.size else -1.0
        vmax = vmax if vmax > 0 else 1e-12
        vmin = vmin if vmin < 0 else -1e-12 * vmax
        mesh = ax.pcolormesh(x, y, g.T, shading="nearest", cmap="RdBu_r",
                             norm=TwoSlopeNorm(0.0, vmin, vmax))
        fig.colorbar(mesh, ax=ax, label=growth_label)
        ok = [lv for lv in levels if finite.size and finite.min() < lv < finite.max()]
        if ok and len(x) > 1 and len(y) > 1:
            cs = ax.contour(x, y, np.where(np.isfinite(g), g, -np.inf).T, levels=ok,
                            colors="k", linewidths=1.0)
            ax.clabel(cs, fmt="%.3g", fontsize="small")
        ax.set_xlabel(x_label)
        ax.set_ylabel(y_label)
        if threshold is not None:
            ax.plot(threshold[0], threshold[1], "s--", color="lime", ms=4, lw=1.5,
                    label=threshold_label or "threshold")
            ax.legend(loc="best", fontsize="small")
    if title:
        ax.set_title(title, fontsize="medium")
    ax.grid(True, alpha=0.3)
    save_figure(fig, path)


def plot_threshold(path: Path, across: np.ndarray, values: np.ndarray, *, x_label: str,
                   y_label: str, label: str, title: str = "") -> None:
    """Marginal curve: bracketed parameter against the across parameter."""
    fig = new_figure(figsize=(7.0, 5.0), layout="constrained")
    ax = fig.subplots()
    ax.plot(across, values, "s-", ms=4, label=label)
    ax.set_xlabel(x_label)
    ax.set_ylabel(y_label)
    ax.legend(loc="best", fontsize="small")
    if title:
        ax.set_title(title, fontsize="medium")
    ax.grid(True, alpha=0.3)
    save_figure(fig, path)
