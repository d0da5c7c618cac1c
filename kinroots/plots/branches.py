"""Figures of the temporal problem: branches ω(k) and the map of |D| at one k.

Each function draws on the axes it is given (``ax=``) or on a new Figure, returns the
Figure, and writes it when given ``path`` (format from the suffix: png, svg or pdf).
"""

from __future__ import annotations

import math
from collections.abc import Callable, Mapping, Sequence
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import numpy as np

from kinroots.plots._style import (
    axes_grid,
    branch_style,
    literal,
    math_label,
    save_figure,
    set_title,
)

__all__ = ["BranchCurve", "curves_from_rows", "plot_branches", "plot_root_map", "plot_roots"]

#: Light fill marking γ > 0 (growing) on growth-rate axes; hatched so it shows in grey.
GROWING_FILL: dict[str, Any] = {"facecolor": "#D55E00", "alpha": 0.08, "hatch": "//",
                                "edgecolor": "#D55E00", "lw": 0.0}


@dataclass(frozen=True)
class BranchCurve:
    """One branch for plotting.

    Attributes
    ----------
    label : str
        Legend text (user text is shown literally).
    k, omega : array
        Normalized k and complex ω (NaN where a point failed).
    verified : array of bool, optional
        Points confirmed by a survey of the window (argument principle); drawn as filled
        markers.  None: no point is marked.
    """

    label: str
    k: np.ndarray
    omega: np.ndarray
    verified: np.ndarray | None = None


def _plotted(r: Mapping[str, Any]) -> complex:
    noise = str(r.get("below_resolution") or "")
    return complex(0.0 if "real" in noise else float(r["omega_real"]),
                   0.0 if "imag" in noise else float(r["omega_imag"]))


def curves_from_rows(rows: Sequence[Mapping[str, Any]]) -> list[BranchCurve]:
    """Curves from table rows (the columns of branches.csv, typed: ``branch``, ``k``,
    ``omega_real``, ``omega_imag``, ``converged``, ``verified``; ``wave`` and
    ``wave_name`` when present).  Branches that are pieces of one wave make one curve,
    labelled by the wave's name, with a gap between the pieces; failed points become
    NaN.  A component marked as rounding noise (``below_resolution``) is drawn as 0, so
    that a purely growing mode's ω_r panel does not autoscale to 1e-28 spikes."""
    groups: dict[Any, list[Mapping[str, Any]]] = {}
    labels: dict[Any, str] = {}
    for r in rows:
        if r.get("branch") in (None, ""):
            continue
        wave = r.get("wave")
        key = ("wave", wave) if wave not in (None, "") else ("branch", r["branch"])
        groups.setdefault(key, []).append(r)
        if key[0] == "wave":
            name = r.get("wave_name") or "unidentified"
            labels[key] = f"wave {wave}: {name}"
        else:
            labels[key] = f"branch {r['branch']}"
    curves = []
    for key, pts in groups.items():
        by_branch: dict[Any, list[Mapping[str, Any]]] = {}
        for r in pts:
            by_branch.setdefault(r["branch"], []).append(r)
        ks: list[float] = []
        ws: list[complex] = []
        vs: list[bool] = []
        pieces = sorted(by_branch.values(), key=lambda p: min(float(r["k"]) for r in p))
        for n, piece in enumerate(pieces):
            piece = sorted(piece, key=lambda r: float(r["k"]))
            if n:  # a gap between two pieces of one wave: no line across it
                ks.append(0.5 * (ks[-1] + float(piece[0]["k"])))
                ws.append(complex(math.nan, math.nan))
                vs.append(False)
            for r in piece:
                ok = bool(r.get("converged"))
                ks.append(float(r["k"]))
                ws.append(_plotted(r) if ok else complex(math.nan, math.nan))
                vs.append(bool(r.get("verified")) and ok)
        curves.append(BranchCurve(label=labels[key], k=np.array(ks), omega=np.array(ws),
                                  verified=np.array(vs)))
    return curves


def secondary_axis(ax: Any, which: str, scale: float | None, label: str) -> Any:
    """A secondary axis (``"x"`` on top or ``"y"`` on the right) showing the same data
    times ``scale`` (e.g. SI units beside normalized ones); None when ``scale`` is None."""
    if scale is None or not np.isfinite(scale) or scale == 0:
        return None
    fwd = (lambda v: np.asarray(v) * scale, lambda v: np.asarray(v) / scale)
    sec = ax.secondary_xaxis("top", functions=fwd) if which == "x" else \
        ax.secondary_yaxis("right", functions=fwd)
    (sec.set_xlabel if which == "x" else sec.set_ylabel)(label)
    return sec


def mark_growing(ax: Any) -> None:
    """Shade γ > 0 (hatched, light) and draw γ = 0 on a growth-rate axis."""
    lo, hi = ax.get_ylim()
    if hi > 0:
        ax.axhspan(0.0, hi, zorder=0, **GROWING_FILL)
        ax.text(0.995, 0.98, "growing (γ > 0)", transform=ax.transAxes, ha="right",
                va="top", fontsize="small", color="#8a3a00")
    if lo < 0:
        ax.text(0.995, 0.02, "damped (γ < 0)", transform=ax.transAxes, ha="right",
                va="bottom", fontsize="small", color="0.3")
    ax.axhline(0.0, color="0.3", lw=0.8)
    ax.set_ylim(lo, hi)


#: Branches named in the legend of :func:`plot_branches`; the rest are counted.
_LEGEND_BRANCHES = 12


def plot_branches(
    curves: Sequence[BranchCurve],
    *,
    k_label: str,
    omega_label: str,
    title: str = "",
    growth_floor: float = 0.0,
    k_unit_per_m: float | None = None,
    omega_unit_rad_per_s: float | None = None,
    ax: Any = None,
    path: Path | None = None,
) -> Any:
    """ω_r and γ against k, one colour, dash pattern and marker per branch.

    Growing stretches (γ > growth_floor·|ω|) are drawn with a thick translucent band on
    the ω_r panel; the γ > 0 half-plane is hatched on the γ panel.  Points confirmed by a
    survey of the window carry a filled marker.  With the unit sizes given, secondary
    axes show k in 1/m, f = ω_r/2π in Hz and γ in 1/s.

    Parameters
    ----------
    curves : sequence of BranchCurve
        Normalized k and complex ω per branch.
    k_label, omega_label : str
        Unit symbols of the normalization, e.g. ``"λ_De"`` and ``"ω_pe"``.
    growth_floor : float
        Resolution of the sign of γ, relative to |ω|.
    k_unit_per_m, omega_unit_rad_per_s : float, optional
        Size of the normalized units in SI, for the secondary axes.
    ax : (Axes, Axes), optional
        Axes for ω_r and γ; a new Figure when omitted.
    path : Path, optional
        Write the figure there (png, svg or pdf by suffix).

    Returns
    -------
    matplotlib.figure.Figure
    """
    fig, (ax_r, ax_i) = axes_grid(ax, 2, figsize=(8.0, 7.0), sharex=True)
    any_growth = any_verified = False
    for i, c in enumerate(curves):
        st = branch_style(i)
        k = np.asarray(c.k, dtype=float)
        w = np.asarray(c.omega, dtype=complex)
        label = literal(c.label)
        # a branch of one finite point (or isolated points between failures) would be an
        # invisible line: give it its marker
        finite_pts = int(np.count_nonzero(np.isfinite(w)))
        mk = st["marker"] if finite_pts <= 2 else None
        ax_r.plot(k, w.real, ls=st["ls"], color=st["color"], lw=1.5, label=label, marker=mk)
        ax_i.plot(k, w.imag, ls=st["ls"], color=st["color"], lw=1.5, marker=mk)
        with np.errstate(invalid="ignore"):
            grow = w.imag > growth_floor * np.abs(w)
        if np.any(grow):
            any_growth = True
            ax_r.plot(k, np.where(grow, w.real, np.nan), "-", color=st["color"], lw=6,
                      alpha=0.3, solid_capstyle="butt")
        if c.verified is not None:
            v = np.asarray(c.verified, dtype=bool) & np.isfinite(w)
            if np.any(v):
                any_verified = True
                for a, y in ((ax_r, w.real), (ax_i, w.imag)):
                    a.plot(k[v], y[v], ls="none", marker=st["marker"], color=st["color"],
                           ms=5)
    omega_unit = math_label(omega_label)
    ax_r.set_ylabel(f"{math_label('ω_r')} / {omega_unit}")
    ax_i.set_ylabel(f"γ / {omega_unit}")
    ax_i.set_xlabel(f"k {math_label(k_label)}")
    for a in (ax_r, ax_i):
        a.grid(True, alpha=0.3)
    if curves and len(ax_i.get_lines()):
        mark_growing(ax_i)
    secondary_axis(ax_r, "x", k_unit_per_m, "k [1/m]")
    two_pi = 2 * np.pi
    secondary_axis(ax_r, "y", None if omega_unit_rad_per_s is None
                   else omega_unit_rad_per_s / two_pi, math_label("f = ω_r/2π [Hz]"))
    secondary_axis(ax_i, "y", omega_unit_rad_per_s, "γ [1/s]")
    set_title(ax_r, title)
    if not any(np.isfinite(np.asarray(c.omega, dtype=complex)).any() for c in curves):
        for a in (ax_r, ax_i):  # say why the panels are blank
            a.text(0.5, 0.5, "no root found in the search window\n(see the notes in the "
                   "summary)", transform=a.transAxes, ha="center", va="center",
                   color="0.3")
    if curves:
        from matplotlib.lines import Line2D

        handles, labels = ax_r.get_legend_handles_labels()
        if len(handles) > _LEGEND_BRANCHES:  # dozens of branches: a legend would fill the
            more = len(handles) - _LEGEND_BRANCHES  # figure (and collapse the axes)
            handles = handles[:_LEGEND_BRANCHES] + [Line2D([], [], ls="none")]
            labels = labels[:_LEGEND_BRANCHES] + [f"... and {more} more branches"]
        if any_verified:
            handles.append(Line2D([], [], ls="none", marker="o", color="0.2", ms=5))
            labels.append("marker: verified by a survey")
        if any_growth:
            handles.append(Line2D([], [], color="0.2", lw=6, alpha=0.3))
            labels.append("band: growing (γ > 0)")
        ax_r.legend(handles, labels, fontsize="small", ncol=2, loc="best")
    if path is not None:
        save_figure(fig, path)
    return fig


def plot_roots(
    roots: Sequence[complex],
    verified: Sequence[bool],
    box: tuple[float, float, float, float] | None,
    *,
    omega_label: str,
    title: str = "",
    ax: Any = None,
    path: Path | None = None,
) -> Any:
    """Roots at one k in the complex ω plane (no evaluation of D): verified roots
    filled, others open; the search window dashed; γ > 0 hatched.

    Parameters
    ----------
    roots, verified : sequences
        Normalized complex roots and their verification flags.
    box : (re_min, re_max, im_min, im_max) or None
        The search window, normalized.

    Returns
    -------
    matplotlib.figure.Figure
    """
    fig, (axis,) = axes_grid(ax, 1, figsize=(7.0, 5.5))
    r = np.asarray(roots, dtype=complex)
    v = np.asarray(verified, dtype=bool)
    if box is not None:
        re0, re1, im0, im1 = box
        axis.plot([re0, re1, re1, re0, re0], [im0, im0, im1, im1, im0], "--", color="0.4",
                  lw=1.0, label="search window")
    if r.size:
        axis.plot(r.real[v], r.imag[v], "o", color="#0072B2", ms=7, label="verified root")
        axis.plot(r.real[~v], r.imag[~v], "o", mfc="white", color="#D55E00", ms=7,
                  mew=1.5, label="not verified")
    axis.margins(0.08)
    mark_growing(axis)
    u = math_label(omega_label)
    axis.set_xlabel(f"Re ω / {u}")
    axis.set_ylabel(f"Im ω / {u}")
    axis.grid(True, alpha=0.3)
    axis.legend(loc="best", fontsize="small")
    set_title(axis, title)
    if path is not None:
        save_figure(fig, path)
    return fig


def _interior_limits(
    logd: np.ndarray, x: np.ndarray, y: np.ndarray, box: tuple[float, float, float, float]
) -> tuple[float | None, float | None]:
    """Colour limits of a log10|D| map from the finite values inside the window.

    The 2nd and 98th percentiles (common practice for a robust colour scale), the upper
    limit at most 8 decades above the median: roots are dips of |D|, and a region where
    |D| climbs by hundreds of decades would otherwise take the whole scale.  ``None``
    (matplotlib's own limits) when the window holds no finite value.
    """
    re0, re1, im0, im1 = box
    inside = ((x[None, :] >= re0) & (x[None, :] <= re1)
              & (y[:, None] >= im0) & (y[:, None] <= im1))
    vals = logd[inside & np.isfinite(logd)]
    if vals.size == 0:
        return None, None
    lo, med, hi = np.percentile(vals, [2.0, 50.0, 98.0])
    hi = min(hi, med + 8.0)
    if not hi > lo:
        lo, hi = lo - 1.0, hi + 1.0
    return float(lo), float(hi)


def plot_root_map(
    func: Callable[[np.ndarray], np.ndarray],
    box: tuple[float, float, float, float],
    roots: Sequence[complex],
    *,
    omega_label: str,
    title: str = "",
    resolution: int = 160,
    margin: float = 0.08,
    verified: Sequence[bool] | None = None,
    used: tuple[float, float, float, float] | None = None,
    excluded: Sequence[complex] = (),
    ax: Any = None,
    path: Path | None = None,
) -> Any:
    """log10|D| over the search window (with a margin), the window drawn, roots marked.

    The colour scale follows the finite values inside the window
    (:func:`_interior_limits`), so a region where |D| grows by hundreds of decades
    (a Landau term deep in the lower half-plane) does not flatten the interior; values
    beyond are clipped and points where D is not finite in double precision are grey.

    Parameters
    ----------
    func : callable
        Vectorized ``D(omega)`` in normalized frequency.
    box : (re_min, re_max, im_min, im_max)
        The search window, normalized.
    roots : sequence of complex
        Converged roots to mark (filled when verified, open otherwise).
    verified : sequence of bool, optional
        Verification flag of each root (all taken as verified when omitted).
    used : (re_min, re_max, im_min, im_max), optional
        The box the survey used, drawn when it differs from ``box`` (the survey moves an
        edge outward off a root or pole on it).
    excluded : sequence of complex
        Points the survey excluded (poles it circled), marked with a legend entry.

    Returns
    -------
    matplotlib.figure.Figure
    """
    re0, re1, im0, im1 = box
    dr, di = (re1 - re0) * margin, (im1 - im0) * margin
    x = np.linspace(re0 - dr, re1 + dr, resolution)
    y = np.linspace(im0 - di, im1 + di, resolution)
    zz = x[None, :] + 1j * y[:, None]
    with np.errstate(all="ignore"):
        vals = np.asarray(func(zz.ravel())).reshape(zz.shape)
        logd = np.log10(np.abs(vals))
    bad = ~np.isfinite(logd)
    logd[bad] = np.nan
    vmin, vmax = _interior_limits(logd, x, y, box)
    fig, (axis,) = axes_grid(ax, 1, figsize=(7.5, 6.0))
    from matplotlib import colormaps

    cmap = colormaps["viridis"].with_extremes(bad="0.75")
    mesh = axis.pcolormesh(x, y, logd, shading="auto", cmap=cmap, vmin=vmin, vmax=vmax)
    fig.colorbar(mesh, ax=axis, label="log$_{10}$ |D|", extend="both")
    if bad.any():
        axis.fill_between([], [], color="0.75", label="D not finite (overflow)")
    axis.plot([re0, re1, re1, re0, re0], [im0, im0, im1, im1, im0], "w--", lw=1.0,
              label="search window")
    if used is not None and tuple(used) != tuple(box):
        u0, u1, v0, v1 = used
        axis.plot([u0, u1, u1, u0, u0], [v0, v0, v1, v1, v0], "-", color="#E69F00",
                  lw=1.0, label="window surveyed (edge moved off a root or pole)")
    ex = np.asarray(excluded, dtype=complex)
    if ex.size:
        axis.plot(ex.real, ex.imag, "x", color="#D55E00", ms=8, mew=2.0,
                  label="excluded point (pole circled by the survey)")
    if not roots:
        axis.text(0.5, 0.5, "no root found in the search window\n(see the notes in the "
                  "summary)", transform=axis.transAxes, ha="center", va="center",
                  color="white")
    if roots:
        r = np.asarray(roots, dtype=complex)
        v = np.ones(r.size, bool) if verified is None else np.asarray(verified, bool)
        axis.plot(r.real[v], r.imag[v], "o", color="white", mec="black", ms=8, mew=1.5,
                  label="root (verified)")
        if np.any(~v):
            axis.plot(r.real[~v], r.imag[~v], "o", mfc="none", mec="white", ms=8, mew=1.5,
                      label="root (not verified)")
    axis.axhline(0.0, color="w", lw=0.8, alpha=0.8)
    if im1 + di > 0:
        axis.text(0.01, 0.99, "Im ω > 0: growing", transform=axis.transAxes, va="top",
                  color="white", fontsize="small")
    u = math_label(omega_label)
    axis.set_xlabel(f"Re ω / {u}")
    axis.set_ylabel(f"Im ω / {u}")
    set_title(axis, title)
    axis.legend(loc="lower right", fontsize="small")
    if path is not None:
        save_figure(fig, path)
    return fig
