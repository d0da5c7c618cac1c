"""Figures of sweeps: growth-rate map with contours, threshold curves.

Each function draws on the axes it is given (``ax=``) or on a new Figure, returns the
Figure, and writes it when given ``path`` (format from the suffix: png, svg or pdf).
"""

from __future__ import annotations

from collections.abc import Sequence
from pathlib import Path
from typing import Any

import numpy as np

from kinroots.plots._style import (
    OKABE_ITO,
    axes_grid,
    literal,
    math_label,
    plain_log_ticks,
    save_figure,
    set_title,
)

__all__ = ["parameter_label", "plot_growth_map", "plot_threshold", "sweep_map", "threshold_curve"]


def _scale(axis: Any, which: str, values: np.ndarray | None, log: bool) -> None:
    """Log scale for a log-spaced axis, ticks written as plain numbers (0.5, not 5×10⁻¹)."""
    if not (log and values is not None and np.size(values)
            and np.all(np.asarray(values) > 0)):
        return  # (no values: nothing to scale; a threshold with no point found)
    (axis.set_xscale if which == "x" else axis.set_yscale)("log")
    v = np.asarray(values, dtype=float)
    plain_log_ticks(axis.xaxis if which == "x" else axis.yaxis,
                    span=1.0 if v.max() / v.min() < 30 else 0.0)


def plot_growth_map(
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
    x_log: bool = False,
    y_log: bool = False,
    ax: Any = None,
    path: Path | None = None,
) -> Any:
    """Maximum growth rate over a 1-D or 2-D sweep.

    Colours: a diverging map centred on γ_max = 0 when the map holds both signs (each
    side scaled to its own extreme, so no half of the colour bar is empty), a sequential
    one otherwise; γ_max = 0 is drawn as a thick black contour, so the stable and
    unstable regions stay apart in grey.  The level contours are interpolated on the
    sweep grid; a threshold curve (bracketed root per across value) is drawn and
    labelled separately, which is why the two may differ between grid points.

    Parameters
    ----------
    x, y : array
        Axis values (``y`` None for a one-parameter sweep).
    growth : array
        γ_max, shape (len(x),) or (len(x), len(y)); NaN where a point failed.
    x_label, y_label, growth_label : str
        Axis labels (shown literally) and colour-bar label (subscripts set, see
        :func:`kinroots.plots._style.math_label`).
    levels : sequence of float
        Contour levels (2-D) or horizontal lines (1-D).
    threshold : (array, array), optional
        Marginal curve in map coordinates (x values, y values).
    x_log, y_log : bool
        Logarithmic axes (for log-spaced sweep axes).
    ax : Axes, optional
        Axes to draw on; a new Figure when omitted.
    path : Path, optional
        Write the figure there (png, svg or pdf by suffix).

    Returns
    -------
    matplotlib.figure.Figure
    """
    fig, (axis,) = axes_grid(ax, 1, figsize=(7.5, 5.8))
    g = np.asarray(growth, dtype=float)
    finite = g[np.isfinite(g)]
    if y is None:
        axis.plot(x, g, "o-", ms=4, color=OKABE_ITO[4])
        for lv in levels:
            axis.axhline(lv, color="k", ls="--", lw=0.8)
        axis.axhline(0.0, color="0.3", lw=0.8)
        lo, hi = axis.get_ylim()
        if hi > 0:
            axis.axhspan(0.0, hi, facecolor="#D55E00", alpha=0.08, hatch="//",
                         edgecolor="#D55E00", lw=0.0, zorder=0)
            axis.set_ylim(lo, hi)
        axis.set_xlabel(literal(x_label))
        axis.set_ylabel(math_label(growth_label))
    else:
        from matplotlib.colors import Normalize, TwoSlopeNorm

        gmin = float(finite.min()) if finite.size else -1.0
        gmax = float(finite.max()) if finite.size else 1.0
        if gmin < 0 < gmax:
            norm: Any = TwoSlopeNorm(0.0, gmin, gmax)
            cmap = "RdBu_r"
        else:
            norm = Normalize(gmin, gmax if gmax > gmin else gmin + 1.0)
            cmap = "viridis"
        mesh = axis.pcolormesh(x, y, g.T, shading="nearest", cmap=cmap, norm=norm)
        fig.colorbar(mesh, ax=axis, label=math_label(growth_label))
        grid_ok = len(x) > 1 and len(y) > 1 and finite.size
        filled = np.where(np.isfinite(g), g, gmin - 1.0).T
        legend: list[tuple[Any, str]] = []
        from matplotlib.lines import Line2D

        if grid_ok and gmin < 0 < gmax:
            axis.contour(x, y, filled, levels=[0.0], colors="k", linewidths=2.2)
            legend.append((Line2D([], [], color="k", lw=2.2),
                           math_label("γ_max = 0, interpolated on the sweep grid")))
        ok = [lv for lv in levels if lv != 0 and finite.size and gmin < lv < gmax]
        if ok and grid_ok:
            cs = axis.contour(x, y, filled, levels=ok, colors="k", linewidths=1.0,
                              linestyles="--")
            axis.clabel(cs, fmt="%.3g", fontsize="small")
            legend.append((Line2D([], [], color="k", lw=1.0, ls="--"),
                           math_label("γ_max levels, interpolated on the sweep grid")))
        axis.set_xlabel(literal(x_label))
        axis.set_ylabel(literal(y_label))
        if threshold is not None:
            line, = axis.plot(threshold[0], threshold[1], "s-", color=OKABE_ITO[1], ms=5,
                              lw=2.0, mec="k")
            legend.append((line, math_label((threshold_label or "threshold")
                                            + " (bracketed at each value)")))
        if legend:
            axis.legend([h for h, _ in legend], [t for _, t in legend], loc="best",
                        fontsize="small")
        _scale(axis, "y", y, y_log)
    _scale(axis, "x", x, x_log)
    set_title(axis, title, fontsize="medium")
    axis.grid(True, alpha=0.3)
    if path is not None:
        save_figure(fig, path)
    return fig


def plot_threshold(
    across: np.ndarray,
    values: np.ndarray,
    *,
    x_label: str,
    y_label: str,
    label: str,
    title: str = "",
    x_log: bool = False,
    ax: Any = None,
    path: Path | None = None,
) -> Any:
    """Marginal curve: bracketed parameter against the across parameter.

    Returns
    -------
    matplotlib.figure.Figure
    """
    fig, (axis,) = axes_grid(ax, 1, figsize=(7.0, 5.0))
    axis.plot(across, values, "s-", ms=5, color=OKABE_ITO[4], label=math_label(label))
    axis.set_xlabel(literal(x_label))
    axis.set_ylabel(literal(y_label))
    axis.legend(loc="best", fontsize="small")
    _scale(axis, "x", np.asarray(across), x_log)
    set_title(axis, title, fontsize="medium")
    axis.grid(True, alpha=0.3)
    if path is not None:
        save_figure(fig, path)
    return fig


# ------------------------------------------------------------ sweeps of a case

#: Display names of sweepable quantities (kinroots.io.parameter_paths).
QUANTITY_NAMES: dict[str, str] = {
    "B": "magnetic field B",
    "angle": "angle θ between k and B",
    "density": "density n",
    "temperature": "temperature T",
    "temperature_par": "temperature T∥",
    "temperature_perp": "temperature T⊥",
    "anisotropy": "anisotropy T⊥/T∥",
    "drift": "drift speed",
    "beta_par": "β∥",
}
_UNIT_TEXT = {"m^-3": "m⁻³", "deg": "°", "1": ""}


def parameter_label(path: Any) -> str:
    """Axis label of a sweep parameter with its name and unit, e.g. ``"β∥ of species p"``
    or ``"magnetic field B [T]"`` (``path`` is a kinroots.io.parameter_paths.ParameterPath)."""
    name = QUANTITY_NAMES.get(path.quantity, path.quantity)
    if path.species is not None:
        name += f" of species {path.species}"
    unit = _UNIT_TEXT.get(path.unit, path.unit)
    return f"{name} [{unit}]" if unit else name


def _typed_float(value: Any) -> float:
    try:
        return float(value)
    except (TypeError, ValueError):
        return float("nan")


def sweep_map(case: Any, rows: Sequence[Any], threshold_rows: Sequence[Any] | None = None,
              *, ax: Any = None, path: Path | None = None) -> Any:
    """The growth map of a case's [sweep] from its rows (``i``, ``j``, ``growth_max``,
    ``converged``), with the [threshold] curve when its rows are given and its
    parameters are the map's axes.  Log-spaced axes are drawn on log scales.

    Returns
    -------
    matplotlib.figure.Figure
    """
    spec = case.sweep
    g = np.full(spec.shape, np.nan)
    for r in rows:
        idx = (int(r["i"]),) if spec.y is None else (int(r["i"]), int(r["j"]))
        if r.get("converged"):
            g[idx] = _typed_float(r.get("growth_max"))
    curve = None
    label = ""
    t = case.threshold
    unit = case.units.frequency_label
    if threshold_rows and t is not None and spec.y is not None:
        ok = [r for r in threshold_rows if r.get("converged")]
        xs = np.array([_typed_float(r["across"]) for r in ok])
        ts = np.array([_typed_float(r["threshold"]) for r in ok])
        if t.across.path.text == spec.x.path.text and t.path.text == spec.y.path.text:
            curve = (xs, ts)
        elif t.across.path.text == spec.y.path.text and t.path.text == spec.x.path.text:
            curve = (ts, xs)
        label = f"threshold γ_max = {t.growth:g} {unit}"
    return plot_growth_map(
        np.asarray(spec.x.values), None if spec.y is None else np.asarray(spec.y.values), g,
        x_label=parameter_label(spec.x.path),
        y_label=parameter_label(spec.y.path) if spec.y else "",
        growth_label=f"γ_max / {unit}", levels=spec.growth_levels, threshold=curve,
        threshold_label=label, title=case.title, x_log=spec.x.spacing == "log",
        y_log=spec.y is not None and spec.y.spacing == "log", ax=ax, path=path)


def threshold_curve(case: Any, rows: Sequence[Any], *, ax: Any = None,
                    path: Path | None = None) -> Any:
    """The marginal curve of a case's [threshold] from its rows (``across``,
    ``threshold``, ``converged``).

    Returns
    -------
    matplotlib.figure.Figure
    """
    t = case.threshold
    ok = [r for r in rows if r.get("converged")]
    return plot_threshold(
        np.array([_typed_float(r["across"]) for r in ok]),
        np.array([_typed_float(r["threshold"]) for r in ok]),
        x_label=parameter_label(t.across.path), y_label=parameter_label(t.path),
        label=f"γ_max = {t.growth:g} {case.units.frequency_label}", title=case.title,
        x_log=t.across.spacing == "log", ax=ax, path=path)
