"""The report's tables: which points, which columns, how many digits.

One :class:`Table` per result, built from the rows read back from the folder.  Cells
are text already rounded (see :mod:`kinroots.report.numbers` for the digits rule);
the Markdown, HTML and LaTeX writers only lay them out.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from kinroots.report.folder import Result, finite
from kinroots.report.numbers import (
    digits_for,
    format_significant,
    relative_uncertainty,
    user_number,
)

__all__ = ["Column", "Table", "build_table", "select_rows"]

#: Significant digits of results that are not roots of D (maximum growth from a bounded
#: Brent search, thresholds from Brent bracketing, spectra): common practice for
#: quantities refined to a relative tolerance of about 1e-6 or better.
OTHER_DIGITS = 6
FAILED = "failed"


@dataclass(frozen=True)
class Column:
    """A column: its header (plain text, Unicode) and unit ("" for none)."""

    header: str
    unit: str = ""
    numeric: bool = True

    @property
    def label(self) -> str:
        return f"{self.header} [{self.unit}]" if self.unit else self.header


@dataclass
class Table:
    """A reportable table: title, columns, rounded cells (one list per row) and notes."""

    title: str
    columns: list[Column]
    cells: list[list[str]]
    notes: list[str] = field(default_factory=list)


def _positions(rows: Sequence[dict[str, Any]], key: str) -> list[float]:
    return sorted({float(r[key]) for r in rows if finite(r.get(key))})


def select_rows(rows: Sequence[dict[str, Any]], key: str, *, points: int | None,
                at: Sequence[float] = ()) -> tuple[list[dict[str, Any]], list[str]]:
    """Rows at a subset of the values of column ``key``: ``points`` evenly spaced values
    (first and last included) or the value nearest each of ``at``; every row at a chosen
    value is kept (all branches there).  Returns the rows and notes (which value stood
    in for each ``at``)."""
    values = _positions(rows, key)
    notes: list[str] = []
    if not values:
        return list(rows), notes
    if at:
        chosen = []
        for a in at:
            near = min(values, key=lambda v: abs(v - a))
            chosen.append(near)
            if not math.isclose(near, a, rel_tol=1e-9, abs_tol=0.0):
                notes.append(f"--at {user_number(a)}: nearest {key} in the table is "
                             f"{user_number(near)}")
        keep = set(chosen)
    elif points is not None and points < len(values):
        idx = np.unique(np.round(np.linspace(0, len(values) - 1, max(points, 1))).astype(int))
        keep = {values[i] for i in idx}
    else:
        keep = set(values)
    return [r for r in rows if finite(r.get(key)) and float(r[key]) in keep], notes


def _flag(row: dict[str, Any]) -> str:
    if not row.get("converged"):
        reason = str(row.get("reason") or row.get("status") or "")
        return f"failed: {reason}" if reason else "failed"
    return "verified" if row.get("verified") else "not verified"


def _uncertainty_of(row: dict[str, Any]) -> Any:
    """The root's estimated relative error (tables since relative_error), else the
    residual (older tables; right for the unscaled electrostatic D only)."""
    rel = row.get("relative_error")
    return rel if rel is not None and finite(rel) else row.get("residual")


#: Shown instead of a component that is rounding noise (and of what is derived from it).
UNRESOLVED = "unresolved"
#: A component below this multiple of ε·|z| is not resolved (the tables' rule, README
#: "Output", column ``below_resolution``).
_RESOLUTION = 10.0


def _unresolved(row: dict[str, Any], eps: float, whole: float, part: float,
                name: str) -> bool:
    """Whether component ``name`` ("real" or "imag") of a row's root is rounding noise:
    the table's ``below_resolution`` mark when the table has the column, else the same
    rule (|x| ≤ 10·ε·|z|) for tables written before it."""
    if "below_resolution" in row:
        return name in str(row.get("below_resolution") or "").split()
    return abs(part) <= _RESOLUTION * eps * whole


def _component(value: float, digits: int, unresolved: bool) -> str:
    return UNRESOLVED if unresolved else format_significant(value, digits)


def _residual_column(rows: list[dict[str, Any]]) -> tuple[Column, str]:
    """The residual column of a table and the row key it shows: ``relative_residual``
    (|D| over the largest term of D, judged against rounding; README "Output") where the
    table has it, else the bare |D| of older tables, whose size depends on the model's
    scaling of D."""
    if any("relative_residual" in r for r in rows):
        return Column("relative residual"), "relative_residual"
    return Column("residual |D|"), "residual"


def _residual(row: dict[str, Any], key: str) -> str:
    r = row.get(key)
    return format_significant(float(r), 2) if r is not None and finite(r) else "—"


def _wave(row: dict[str, Any]) -> str:
    """The row's wave name (``wave_name``: the branch's physical wave, one name over the
    pieces of a wave that left and re-entered the window), or "—"."""
    return str(row.get("wave_name") or "—")


def _root_table(res: Result, rows: list[dict[str, Any]], rtol: float) -> Table:
    case = res.case
    wl = case.units.frequency_label if case else "ω_unit"
    kl = case.units.length_label if case else "L"
    res_col, res_key = _residual_column(rows)
    named = any("wave_name" in r for r in rows)
    cols = [Column("branch", numeric=False), Column(f"k·{kl}"), Column(f"ω_r/{wl}"),
            Column(f"γ/{wl}"), Column("k", "1/m"), Column("f = ω_r/2π", "Hz"),
            Column("γ", "1/s"), res_col, Column("flag", numeric=False)]
    if named:
        cols.insert(1, Column("wave", numeric=False))
    cells = []
    for r in rows:
        head = [str(r.get("branch", ""))] + ([_wave(r)] if named else []) + [
            user_number(r.get("k"))]
        tail = [_residual(r, res_key), _flag(r)]
        if not r.get("converged") or not finite(r.get("omega_real")):
            cells.append(head + [FAILED] * 2 + [user_number(r.get("k_per_m"))]
                         + [FAILED] * 2 + tail)
            continue
        wr, wi = float(r["omega_real"]), float(r["omega_imag"])
        eps = relative_uncertainty(rtol, _uncertainty_of(r))
        mod = abs(complex(wr, wi))
        d_r, d_i = digits_for(eps, mod, wr), digits_for(eps, mod, wi)
        no_r = _unresolved(r, eps, mod, wr, "real")
        no_i = _unresolved(r, eps, mod, wi, "imag")
        cells.append(head + [
            _component(wr, d_r, no_r), _component(wi, d_i, no_i),
            user_number(r.get("k_per_m")),
            _component(float(r["freq_hz"]), d_r, no_r),
            _component(float(r["gamma_per_s"]), d_i, no_i)] + tail)
    table = Table(f"{res.kind.command}: roots", cols, cells)
    if any(UNRESOLVED in c for c in cells):
        table.notes.append(f"{UNRESOLVED}: that component of ω is below 10·ε·|ω|, the "
                           "root's accuracy (e.g. Landau damping far below the solver "
                           "tolerance, ω_r of a purely growing root): only its smallness "
                           "is known; the CSV keeps the value and marks it in "
                           "below_resolution.")
    return table


def _launch_table(res: Result, rows: list[dict[str, Any]], rtol: float) -> Table:
    case = res.case
    kl = case.units.length_label if case else "L"
    res_col, res_key = _residual_column(rows)
    named = any("wave_name" in r for r in rows)
    cols = [Column("wave", numeric=False), Column("f", "Hz"), Column(f"Re k·{kl}"),
            Column(f"Im k·{kl}"), Column("wavelength", "m"),
            Column("damping length 1/Im k", "m"), res_col, Column("flag", numeric=False)]
    if named:
        cols.insert(1, Column("name", numeric=False))
    cells = []
    for r in rows:
        head = [str(r.get("branch", ""))] + ([_wave(r)] if named else []) + [
            user_number(r.get("freq_hz"))]
        tail = [_residual(r, res_key), _flag(r)]
        if not r.get("converged") or not finite(r.get("k_real")):
            cells.append(head + [FAILED] * 4 + tail)
            continue
        kr, ki = float(r["k_real"]), float(r["k_imag"])
        eps = relative_uncertainty(rtol, _uncertainty_of(r))
        mod = abs(complex(kr, ki))
        d_r, d_i = digits_for(eps, mod, kr), digits_for(eps, mod, ki)
        no_i = _unresolved(r, eps, mod, ki, "imag")
        damp = r.get("damping_length_m")
        cells.append(head + [
            format_significant(kr, d_r), _component(ki, d_i, no_i),
            format_significant(float(r["wavelength_m"]), d_r),
            UNRESOLVED if no_i or damp is None
            else format_significant(float(damp), d_i) if finite(damp) else "∞"] + tail)
    table = Table("launch: waves at the driving frequencies", cols, cells)
    if any(UNRESOLVED in c for c in cells):
        table.notes.append(f"{UNRESOLVED}: Im k is below 10·ε·|k|, the root's accuracy, "
                           "so neither it nor the damping length 1/Im k is known beyond "
                           "being that small (launch.csv: below_resolution).")
    return table


def _other(value: Any, digits: int = OTHER_DIGITS) -> str:
    return format_significant(float(value), digits) if finite(value) else "—"


def _sweep_table(res: Result, rows: list[dict[str, Any]]) -> Table:
    from kinroots.plots.maps import parameter_label

    case = res.case
    spec = case.sweep if case is not None else None
    x_key = "x" if "x" in res.columns else res.columns[2]
    y_key = "y" if "y" in res.columns else res.columns[3]  # used only for a 2-D sweep
    x_name = parameter_label(spec.x.path) if spec else x_key
    y_name = parameter_label(spec.y.path) if spec and spec.y else ""
    wl = case.units.frequency_label if case else "ω_unit"
    cols = [Column(x_name, numeric=False)]
    if y_name:
        cols.append(Column(y_name, numeric=False))
    cols += [Column(f"γ_max/{wl}"), Column("γ_max", "1/s"), Column("at k·" + (
        case.units.length_label if case else "L")), Column("at angle", "°"),
        Column("flag", numeric=False)]
    cells = []
    for r in rows:
        row = [user_number(r.get(x_key))] + ([user_number(r.get(y_key))] if y_name else [])
        if not r.get("converged"):
            cells.append(row + [FAILED] * 4 + [f"failed: {r.get('reason') or ''}".rstrip(": ")])
            continue
        flag = "growing" if r.get("growing") else "no growth"
        if r.get("k_at_edge") or r.get("angle_at_edge"):
            flag += "; maximum at the edge of the k or angle range"
        cells.append(row + [_other(r.get("growth_max")), _other(r.get("growth_per_s")),
                            _other(r.get("growth_k")), _other(r.get("growth_angle")), flag])
    t = Table("sweep: maximum growth rate at each grid point", cols, cells)
    t.notes.append(f"γ_max in units of {wl} of the case at each grid point; "
                   f"{OTHER_DIGITS} significant digits (every local maximum of every root "
                   "family climbed between grid points).")
    return t


def _threshold_table(res: Result, rows: list[dict[str, Any]]) -> Table:
    from kinroots.plots.maps import parameter_label

    case = res.case
    t = case.threshold if case is not None else None
    across = parameter_label(t.across.path) if t else "across"
    param = parameter_label(t.path) if t else "threshold"
    cols = [Column(across, numeric=False), Column(param), Column("growth level"),
            Column("at k·" + (case.units.length_label if case else "L")),
            Column("flag", numeric=False)]
    cells = []
    across_key = "across" if "across" in res.columns else res.columns[1]
    for r in rows:
        head = [user_number(r.get(across_key))]
        if not r.get("converged"):
            cells.append(head + [FAILED, user_number(r.get("growth_level")), FAILED,
                                 f"failed: {r.get('reason') or ''}".rstrip(": ")])
            continue
        cells.append(head + [_other(r.get("threshold")), user_number(r.get("growth_level")),
                             _other(r.get("growth_k")), "converged"])
    table = Table("threshold: marginal values", cols, cells)
    table.notes.append(f"{OTHER_DIGITS} significant digits (Brent bracketing of γ_max − "
                       "level, common practice).")
    return table


def _scatter_table(res: Result, rows: list[dict[str, Any]]) -> Table:
    cols = [Column("shift λ_s − λ_i", "nm"), Column("λ_s", "nm"),
            Column("relative power per nm"), Column("S(k, ω)", "s"), Column("α")]
    cells = [[_other(r.get("wavelength_shift_nm")), _other(r.get("scattered_wavelength_nm"),
                                                           9),
              _other(r.get("relative_power_per_nm"), 4), _other(r.get("spectral_density_s"), 4),
              _other(r.get("alpha"), 4)] for r in rows]
    table = Table("scatter: fluctuation spectrum", cols, cells)
    table.notes.append("Spectrum values to 4 significant digits (a shape, not a root).")
    return table


#: Column of each kind along which --points and --at choose rows.
POSITION = {"solve": "k", "roots": "k", "launch": "freq_hz", "scatter": "wavelength_shift_nm",
            "sweep": "x", "threshold": "across"}


def build_table(res: Result, *, points: int | None, at: Sequence[float] = ()) -> Table:
    """The report table of one result at the chosen points."""
    kind = res.kind.command
    key = POSITION[kind]
    if kind in ("sweep", "threshold") and key not in res.columns:
        key = res.columns[2 if kind == "sweep" else 1]  # named by the parameter
    rows, notes = select_rows(res.rows, key, points=points, at=at)
    tol = res.meta.get("tolerances", {}) if isinstance(res.meta.get("tolerances"), dict) \
        else {}
    rtol = float(tol.get("root_rtol", res.case.solver.tolerance if res.case else 1e-10))
    if kind in ("solve", "roots"):
        table = _root_table(res, rows, rtol)
    elif kind == "launch":
        table = _launch_table(res, rows, rtol)
    elif kind == "sweep":
        table = _sweep_table(res, rows)
    elif kind == "threshold":
        table = _threshold_table(res, rows)
    else:
        table = _scatter_table(res, rows)
    if kind in ("solve", "roots", "launch"):
        table.notes.append(
            f"Digits: a root known to relative ε = max(rtol, relative_error) (rtol = "
            f"{user_number(rtol)}) gives a component x of modulus-|z| root "
            "floor(−log10(ε|z|/|x|)) significant digits; SI columns share the digits of "
            "the component they come from.")
    total = len({float(r[key]) for r in res.rows if finite(r.get(key))})
    shown = len({float(r[key]) for r in rows if finite(r.get(key))})
    # the position in words: the sweep/threshold parameter as the table's first column names it
    name = {"solve": "k", "roots": "k", "launch": "the driving frequency f",
            "scatter": "the wavelength shift"}.get(kind) or table.columns[0].label
    table.notes.insert(0, f"{len(rows)} row(s) at {shown} of {total} values of {name}.")
    table.notes.extend(notes)
    return table
