"""Maximum growth over k (and angle), parameter sweeps and marginal-stability thresholds.

Three layers, each a pure function of its inputs:

* :func:`max_growth` (:mod:`kinroots.study.growth`) — for one case: survey the search
  window at every k of the case's scan and every angle, link the roots of neighbouring
  grid points into families by continuation, and climb every local maximum of γ of
  every family between the grid points; the largest refined value wins, with flags
  when it sits at an end of the k or angle range or at the edge of the window.
* :func:`sweep_point` / :func:`threshold_point` — one grid point of a ``[sweep]`` or one
  value of ``threshold.across``: a pure function of (case, index), so local pool and Dask
  give identical rows.
* :func:`run_points` — executes the points not yet in the store, on a local process pool
  or an existing Dask cluster, committing each row as it finishes.

Order in which swept values are applied: in axis order, except that ``beta_par`` paths
(which set B from the species' T∥ and density) are applied last, so that the β∥ written
in the table is the β∥ of the case solved.

Growth values are in the case's normalized frequency unit *at that grid point* (for
B or beta_par sweeps with a cyclotron unit the unit follows B); SI columns accompany them.
"""

from __future__ import annotations

import hashlib
import json
import math
import os
from collections.abc import Callable, Iterable, Sequence
from typing import Any

import numpy as np

from kinroots.io.case import Case, parse_case
from kinroots.io.parameters import (
    ParameterError,
    ParameterPath,
    check_study_ranges,
    parameter_value,
    with_parameter,
    with_parameters,
)
from kinroots.physics import modes
from kinroots.study.growth import GrowthResult, max_growth
from kinroots.study.problem import with_window
from kinroots.study.threshold import find_threshold

__all__ = [
    "MAXIMIZER_COLUMNS",
    "SWEEP_COLUMNS",
    "THRESHOLD_COLUMNS",
    "case_hash",
    "check_ranges",
    "csv_table",
    "maximizer_cells",
    "run_points",
    "sweep_point",
    "threshold_point",
]

#: Mode identity of the maximizing root (see :mod:`kinroots.physics.modes`).
_MODE_CELLS = ("handedness", "db_c_over_de", "magnetic_compressibility",
               "electrostatic_fraction")
#: Columns describing the maximizing root, shared by sweep.csv and threshold.csv.
MAXIMIZER_COLUMNS: tuple[str, ...] = (
    "growth_residual", "growth_verified", *(f"growth_{c}" for c in _MODE_CELLS),
    "k_at_edge", "angle_at_edge", "root_at_window_edge", "candidates", "warnings",
)
#: Columns of sweep.csv.
SWEEP_COLUMNS: tuple[str, ...] = (
    "i", "j", "x", "y",
    "growth_max", "growth_omega_real", "growth_k", "growth_angle",
    "growth_per_s", "growth_freq_hz", "growth_k_per_m", "growing",
    *MAXIMIZER_COLUMNS,
    "least_damped_omega_real", "least_damped_omega_imag", "least_damped_k",
    "least_damped_angle",
    "roots_found", "evaluations", "converged", "reason",
)
#: Columns of threshold.csv.
THRESHOLD_COLUMNS: tuple[str, ...] = (
    "j", "across", "threshold", "growth_level",
    "growth_k", "growth_angle", "growth_omega_real", "growth_omega_imag",
    *MAXIMIZER_COLUMNS,
    "growth_at_low", "growth_at_high", "bracket_low", "bracket_high",
    "brent_iterations", "converged", "reason",
)
_SWEEP_VALUES = ("growth_max", "growth_omega_real", "growth_k", "growth_angle",
                 "growth_per_s", "growth_freq_hz", "growth_k_per_m")
_THRESHOLD_VALUES = ("threshold", "growth_k", "growth_angle", "growth_omega_real",
                     "growth_omega_imag")


def _plain(v: Any) -> Any:
    """Plain Python numbers for JSON and the store (numpy scalars do not serialize)."""
    if isinstance(v, np.bool_ | bool):
        return bool(v)
    if isinstance(v, np.integer):
        return int(v)
    if isinstance(v, np.floating):
        return float(v)
    return v


def maximizer_cells(case: Case, g: GrowthResult) -> dict[str, Any]:
    """The :data:`MAXIMIZER_COLUMNS` cells of the maximizing root of ``g``."""
    cells: dict[str, Any] = dict.fromkeys(f"growth_{c}" for c in _MODE_CELLS)
    r = g.root
    if r is not None and r.converged:
        units = case.units
        ident = modes.mode_columns(
            case.plasma, omega=complex(units.omega_to_si(g.omega)),
            k=float(units.k_to_si(g.k)), angle_deg=g.angle, model=case.model,
            omega_ref=units.omega_unit, harmonic_tol=case.solver.harmonic_tolerance)
        cells.update({f"growth_{c}": ident.get(c) for c in _MODE_CELLS})
    cells.update({
        "growth_residual": float(r.residual) if r is not None else None,
        "growth_verified": bool(r.verified) if r is not None else False,
        "k_at_edge": g.k_at_edge,
        "angle_at_edge": g.angle_at_edge,
        "root_at_window_edge": g.root_at_window_edge,
        "candidates": g.candidates,
        "warnings": "; ".join(g.edge_warnings()),
    })
    return {k: _plain(v) for k, v in cells.items()}



# ----------------------------------------------------------------------- grid points


def _apply(case: Case, settings: Iterable[tuple[ParameterPath, float]]) -> Case:
    """Apply parameter settings; ``beta_par`` paths last (they read T∥ and n)."""
    return with_parameters(case, list(settings))


def grid_index(shape: tuple[int, ...], index: int) -> tuple[int, int]:
    """Flat index → (i, j) (j = 0 for a one-parameter sweep); x runs slowest."""
    if len(shape) == 1:
        return index, 0
    return divmod(index, shape[1])


def sweep_point(case: Case, index: int) -> dict[str, Any]:
    """The row of grid point ``index`` (flat, x slowest) of the case's ``[sweep]``.

    A pure function of (case, index).  A point whose parameter values make an invalid
    case, or whose search fails, is recorded (``converged = false`` with the reason).
    """
    spec = case.sweep
    i, j = grid_index(spec.shape, index)
    xv = float(spec.x.values[i])
    yv = float(spec.y.values[j]) if spec.y is not None else math.nan
    row: dict[str, Any] = {"i": i, "j": j, "x": xv, "y": yv}
    settings = [(spec.x.path, xv)] + ([(spec.y.path, yv)] if spec.y is not None else [])
    try:
        c = _apply(case, settings)
    except ParameterError as exc:
        return {**row, "converged": False, "reason": str(exc), "roots_found": 0,
                "evaluations": 0, "growing": False}
    g = max_growth(c, spec.angles)
    units = c.units
    w_si = complex(units.omega_to_si(g.omega))
    ld = g.least_damped
    row.update({
        "growth_max": g.growth,
        "growth_omega_real": g.omega.real,
        "growth_k": g.k,
        "growth_angle": g.angle,
        "growth_per_s": w_si.imag,
        "growth_freq_hz": w_si.real / (2 * math.pi),
        "growth_k_per_m": float(units.k_to_si(g.k)),
        "growing": g.growing,
        **maximizer_cells(c, g),
        "least_damped_omega_real": ld.real if ld is not None else math.nan,
        "least_damped_omega_imag": ld.imag if ld is not None else math.nan,
        "least_damped_k": g.least_damped_k,
        "least_damped_angle": g.least_damped_angle,
        "roots_found": g.roots_found,
        "evaluations": g.evaluations,
        "converged": g.complete,
        "reason": "; ".join(g.notes) if g.notes else
        ("" if g.roots_found else "no root in the search window"),
    })
    return {k: _plain(v) for k, v in row.items()}



def threshold_point(case: Case, index: int) -> dict[str, Any]:
    """Row ``index`` of the ``[threshold]`` curve: pure function of (case, index)."""
    spec = case.threshold
    v = float(spec.across.values[index])
    row: dict[str, Any] = {"j": index, "across": v, "growth_level": spec.growth,
                           "bracket_low": spec.bracket[0], "bracket_high": spec.bracket[1]}
    try:
        c = _apply(case, [(spec.across.path, v)])
    except ParameterError as exc:
        return {**row, "converged": False, "reason": str(exc), "brent_iterations": 0}
    t = find_threshold(c, spec.path, spec.bracket, spec.growth, spec.angles)
    at = t.at
    at_case = with_parameter(c, spec.path, t.value) if math.isfinite(t.value) else c
    cells = maximizer_cells(at_case, at) if at else {}
    if t.notes:
        cells["warnings"] = "; ".join([*t.notes, *([cells["warnings"]] if cells.get(
            "warnings") else [])])
    row.update({
        "threshold": t.value,
        "growth_k": at.k if at else math.nan,
        "growth_angle": at.angle if at else math.nan,
        "growth_omega_real": at.omega.real if at else math.nan,
        "growth_omega_imag": at.omega.imag if at else math.nan,
        **cells,
        "growth_at_low": t.growth_low if math.isfinite(t.growth_low) else None,
        "growth_at_high": t.growth_high if math.isfinite(t.growth_high) else None,
        "brent_iterations": t.iterations,
        "converged": t.converged,
        "reason": t.reason,
    })
    return {k: _plain(v) for k, v in row.items()}


def blank_failed(rows: list[dict[str, Any]], kind: str) -> list[dict[str, Any]]:
    """Rows for the CSV: value cells emptied (None) where ``converged`` is false."""
    cols = _SWEEP_VALUES if kind == "sweep" else _THRESHOLD_VALUES
    out = []
    for r in rows:
        r = dict(r)
        if r.get("converged") is False:
            for c in cols:
                r[c] = None
        out.append(r)
    return out


def csv_table(case: Case, rows: list[dict[str, Any]], kind: str
              ) -> tuple[list[dict[str, Any]], list[str]]:
    """Rows and columns of sweep.csv / threshold.csv as written.

    Failed rows' value cells emptied (:func:`blank_failed`), and the grid columns named by
    their parameters (``x``, ``y`` and ``across`` become e.g. ``species_p_anisotropy``,
    the names of the netCDF dimensions; a 1-D sweep has no ``y`` column), so the table
    reads on its own.
    """
    rows = blank_failed(rows, kind)
    if kind == "sweep":
        spec = case.sweep
        columns = list(SWEEP_COLUMNS)
        names = {"x": spec.x.path.safe_name} if spec is not None else {}
        if spec is not None and spec.y is not None:
            names["y"] = spec.y.path.safe_name
        elif spec is not None:
            columns.remove("y")
    else:
        t = case.threshold
        columns = list(THRESHOLD_COLUMNS)
        names = {"across": t.across.path.safe_name} if t is not None else {}
    if len(set(names.values())) < len(names) or set(names.values()) & set(columns):
        return rows, columns  # two axes of one name, or a clash: keep the plain names
    columns = [names.get(c, c) for c in columns]
    return [{names.get(k, k): v for k, v in r.items()} for r in rows], columns


def check_ranges(case: Case) -> list[str]:
    """Messages for swept or bracketed values that make an invalid case (before any work).

    Every corner of the grid is checked (see `kinroots.io.parameters.check_study_ranges`);
    each message names the key path of the table and the value refused.
    """
    return check_study_ranges(case)[0]


def case_hash(case: Case) -> str:
    """SHA-256 of the case's TOML data in a normalized form (sorted keys, repr floats).

    What only the drawing or the labels use (``title``, ``sweep.growth_levels``) is left
    out, so changing it does not block resuming.
    """
    raw = {k: v for k, v in case.raw.items() if k != "title"}
    if isinstance(raw.get("sweep"), dict):
        raw["sweep"] = {k: v for k, v in raw["sweep"].items() if k != "growth_levels"}
    text = json.dumps(raw, sort_keys=True, separators=(",", ":"), default=str)
    return hashlib.sha256(text.encode("utf-8")).hexdigest()


# ------------------------------------------------------------------------- execution

_CASE_CACHE: dict[str, Case] = {}


def _case_from(raw: dict[str, Any], source: str) -> Case:
    key = hashlib.sha256(json.dumps(raw, sort_keys=True, default=str).encode()).hexdigest()
    key += source
    if key not in _CASE_CACHE:
        _CASE_CACHE.clear()
        _CASE_CACHE[key] = parse_case(raw, source)
    return _CASE_CACHE[key]


def _solve_point(case: Case, kind: str, index: int) -> dict[str, Any]:
    """One point; an unexpected error becomes a failed point naming it (never a crash
    of the whole sweep, never a number)."""
    try:
        return sweep_point(case, index) if kind == "sweep" else threshold_point(case, index)
    except Exception as exc:  # recorded as a failed point, with its reason
        key = "i" if kind == "sweep" else "j"
        row: dict[str, Any] = {key: index, "converged": False,
                               "reason": f"internal error: {type(exc).__name__}: {exc}"}
        if kind == "sweep":
            i, j = grid_index(case.sweep.shape, index)
            row.update(i=i, j=j, roots_found=0, evaluations=0, growing=False)
        return row


def compute_point(raw: dict[str, Any], source: str, kind: str, index: int
                  ) -> tuple[int, dict[str, Any]]:
    """Dask task: rebuild the case from its TOML data (cached) and solve one point."""
    return index, _solve_point(_case_from(raw, source), kind, index)


_WORKER: dict[str, Any] = {}


def _init_worker(raw: dict[str, Any], source: str, kind: str) -> None:
    """Pool worker start: the case is built once per worker."""
    _WORKER.update(case=parse_case(raw, source), kind=kind)


def _work_chunk(chunk: list[int]) -> list[tuple[int, dict[str, Any]]]:
    """Pool task: a chunk of points of the worker's case."""
    return [(i, _solve_point(_WORKER["case"], _WORKER["kind"], i)) for i in chunk]


def run_points(
    case: Case,
    kind: str,
    indices: Sequence[int],
    on_result: Callable[[int, dict[str, Any]], None],
    *,
    workers: int | None = None,
    scheduler: str | None = None,
) -> None:
    """Solve grid points and hand each row to ``on_result(index, row)`` as it completes.

    Parameters
    ----------
    case : Case
        Case with a ``[sweep]`` (kind "sweep") or ``[threshold]`` (kind "threshold").
    kind : str
        ``"sweep"`` or ``"threshold"``.
    indices : sequence of int
        Points to solve (the caller leaves out finished ones).
    on_result : callable
        Called in this process, once per point, in completion order.
    workers : int, optional
        Local worker processes (default: the number of cores); 1 runs in this process.
    scheduler : str, optional
        Address of a running Dask distributed scheduler; overrides ``workers``.

    Raises
    ------
    ConnectionError
        The scheduler cannot be reached (raised before any point is solved).
    ModuleNotFoundError
        A scheduler is given but dask.distributed is not installed (the ``dask`` extra).
    """
    source = str(case.source) if case.source is not None else "case"
    todo = list(indices)
    if not todo:
        return
    case = with_window(case)  # one window for every point, chosen once if not given
    if scheduler:
        _run_dask(case.raw, source, kind, todo, on_result, scheduler)
        return
    n = workers or os.cpu_count() or 1
    if n <= 1 or len(todo) == 1:
        for i in todo:
            on_result(i, _solve_point(case, kind, i))
        return
    from kinroots.study.pool import run_pool

    run_pool(_init_worker, (case.raw, source, kind), _work_chunk, todo, on_result, n)


#: Why a Dask scheduler cannot be used when dask.distributed is not installed.
DASK_MISSING = ("a Dask scheduler needs dask.distributed, which is not installed: "
                "install the 'dask' extra (pip install 'kinroots[dask]')")


def _run_dask(raw: dict[str, Any], source: str, kind: str, todo: list[int],
              on_result: Callable[[int, dict[str, Any]], None], scheduler: str) -> None:
    try:
        from dask.distributed import Client, as_completed
    except ImportError:
        raise ModuleNotFoundError(DASK_MISSING, name="dask") from None
    try:
        client = Client(scheduler, timeout="10s")
    except (OSError, TimeoutError) as exc:
        raise ConnectionError(f"cannot reach the Dask scheduler at {scheduler!r}: {exc}"
                              ) from None
    try:
        futures = client.map(compute_point, [raw] * len(todo), [source] * len(todo),
                             [kind] * len(todo), todo, pure=False)
        for fut in as_completed(futures):
            on_result(*fut.result())
    finally:
        client.close()


def grid_values(case: Case) -> dict[str, np.ndarray]:
    """Axis values of the ``[sweep]`` keyed by axis name ("x", "y")."""
    spec = case.sweep
    out = {"x": spec.x.values}
    if spec.y is not None:
        out["y"] = spec.y.values
    return out


def current_values(case: Case) -> dict[str, float]:
    """The case's own values of the swept parameters (for the summary)."""
    spec = case.sweep
    return {a.path.text: parameter_value(case, a.path) for a in spec.axes}
