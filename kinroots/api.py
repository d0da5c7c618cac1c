"""The public Python API: cases in, roots, branches, sweeps and the dispersion function out.

Every name here is re-exported by :mod:`kinroots` (``kinroots.solve`` etc.).  The functions
take a case as a :class:`~kinroots.io.case.Case`, a path to a case file, or a mapping with
the keys of a case file (:func:`~kinroots.io.case.case_from_dict`); numbers are in the
case's normalized units (``case.units``) unless a name ends in an SI unit.

This module wraps the layers below (``study``, ``io``, ``physics``) and adds no physics; no
module under them imports it.
"""

from __future__ import annotations

import html
import math
from collections.abc import Callable, Iterator, Mapping, Sequence
from dataclasses import dataclass, field
from pathlib import Path
from typing import TYPE_CHECKING, Any

import numpy as np

from kinroots.io.case import Case, CaseError, case_from_dict, load_case
from kinroots.io.tables import VALUE_COLUMNS, root_table_columns

if TYPE_CHECKING:
    import pandas as pd
    import xarray as xr

    from kinroots.physics.dispersion import Dispersion
    from kinroots.roots import RootResult, SurveyResult
    from kinroots.study.problem import WindowChoice
    from kinroots.study.solve import Solution as _StudySolution

__all__ = [
    "DispersionFunction",
    "Launch",
    "RootSet",
    "Solution",
    "Spectrum",
    "as_case",
    "dispersion",
    "launch",
    "roots",
    "solve",
    "spectrum",
    "sweep",
]

CaseLike = Case | str | Path | Mapping[str, Any]
#: Lines of branches or roots listed by a repr before "... and N more".
_REPR_ITEMS = 4


def as_case(case: CaseLike) -> Case:
    """A `Case` from a `Case`, a case-file path or a mapping of case keys.

    Raises
    ------
    CaseError
        The file or mapping is not a valid case (every problem listed).
    TypeError
        ``case`` is none of these.
    """
    if isinstance(case, Case):
        return case
    if isinstance(case, str | Path):
        return load_case(case)
    if isinstance(case, Mapping):
        return case_from_dict(case)
    raise TypeError(f"expected a Case, a case-file path or a mapping of case keys, got "
                    f"{type(case).__name__}")


def _positive_k(k: Any) -> float:
    try:
        if isinstance(k, bool):
            raise TypeError("a bool is not a wavenumber")
        value = float(k)
    except (TypeError, ValueError):
        raise ValueError(f"k: got {k!r}, expected one finite number > 0 (normalized)"
                         ) from None
    if not (math.isfinite(value) and value > 0):
        raise ValueError(f"k: got {k!r}, expected one finite number > 0 (normalized)")
    return value


def _dataframe(rows: Sequence[Mapping[str, Any]], columns: Sequence[str] | None = None,
               blank: frozenset[str] = VALUE_COLUMNS) -> pd.DataFrame:
    """Rows as a DataFrame with the table's columns (default: the root-table columns);
    the ``blank`` values of points that did not converge are NaN, as their CSV cells are
    empty."""
    import pandas as pd

    cols = root_table_columns(rows) if columns is None else tuple(columns)
    records = []
    for r in rows:
        failed = r.get("converged") is False
        records.append({c: (None if failed and c in blank else r.get(c)) for c in cols})
    return pd.DataFrame.from_records(records, columns=list(cols))


def _omega_text(w: complex, unit: str) -> str:
    return f"{w.real:.6g} {'+' if w.imag >= 0 else '-'} {abs(w.imag):.4g}i {unit}"


def _html(lines: list[str]) -> str:
    head, *rest = lines
    items = "".join(f"<li>{html.escape(line.strip())}</li>" for line in rest)
    return f"<b>{html.escape(head)}</b>" + (f"<ul>{items}</ul>" if items else "")


# ------------------------------------------------------------------------------- roots


@dataclass(frozen=True, eq=False)
class RootSet:
    """Every root in the case's search window at one normalized k (result of `roots`).

    Attributes
    ----------
    case : Case
    k : float
        Normalized wavenumber.
    survey : SurveyResult
        The survey itself (count by the argument principle, roots, notes).
    """

    case: Case
    k: float
    survey: SurveyResult = field(repr=False)

    @property
    def search_window(self) -> WindowChoice:
        """The window surveyed and whether kinroots chose it from the plasma
        (:func:`kinroots.study.problem.window_choice`; summary.json ``search_window``)."""
        from kinroots.study.problem import window_choice

        return window_choice(self.case)

    @property
    def roots(self) -> list[RootResult]:
        """Every root found (each with residual, ``converged`` and ``verified``)."""
        return list(self.survey.roots)

    @property
    def values(self) -> np.ndarray:
        """The converged roots ω (normalized), complex."""
        return np.array([r.value for r in self.survey.roots if r.converged], dtype=complex)

    @property
    def complete(self) -> bool:
        """True when the roots found account for the argument-principle count."""
        return bool(self.survey.complete)

    @property
    def count(self) -> int | None:
        """Zeros in the window by the argument principle (None when it was not counted)."""
        return None if self.survey.count is None else int(self.survey.count)

    @property
    def evaluations(self) -> int:
        """Dispersion function evaluations used."""
        return int(self.survey.evaluations)

    @property
    def notes(self) -> list[str]:
        return list(self.survey.notes)

    def __len__(self) -> int:
        return len(self.survey.roots)

    def __iter__(self) -> Iterator[RootResult]:
        return iter(self.survey.roots)

    def rows(self) -> list[dict[str, Any]]:
        """The roots.csv rows (an incomplete survey adds a row saying so)."""
        from kinroots.study.rows import survey_rows

        return survey_rows(self.case, self.k, self.survey)

    def to_dataframe(self) -> pd.DataFrame:
        """pandas DataFrame with the roots.csv columns (failed points: values NaN)."""
        return _dataframe(self.rows())

    def _lines(self) -> list[str]:
        u = self.case.units
        head = (f"RootSet at k = {self.k:g} /{u.length_label_ascii} ({self.case.title!r}): "
                f"{len(self.values)} root(s), {self.survey.count_text}, "
                + ("complete" if self.complete else "INCOMPLETE"))
        lines = [head]
        for r in self.survey.roots[:_REPR_ITEMS]:
            state = ("verified" if r.verified else "not verified") if r.converged else (
                f"FAILED ({r.reason})")
            lines.append(f"  omega = {_omega_text(r.value, u.frequency_label_ascii)}, "
                         f"residual {r.residual:.1e}, {state}")
        if len(self.survey.roots) > _REPR_ITEMS:
            lines.append(f"  ... and {len(self.survey.roots) - _REPR_ITEMS} more")
        return lines

    def __repr__(self) -> str:
        return "\n".join(self._lines())

    def _repr_html_(self) -> str:
        return _html(self._lines())


def roots(case: CaseLike, k: float) -> RootSet:
    """Every root of the dispersion relation in the case's search window at one k.

    Parameters
    ----------
    case : Case, path or mapping
    k : float
        Normalized wavenumber (in 1/``case.units.length_label``), > 0.

    Returns
    -------
    RootSet
        The roots with residuals and flags; ``complete`` says whether the roots found
        account for the argument-principle count.  Failures are recorded, not raised.
    """
    from kinroots.study.problem import survey

    c = as_case(case)
    kk = _positive_k(k)
    return RootSet(c, kk, survey(c, kk))


# ------------------------------------------------------------------------------- solve


class Solution:
    """Branches traced across the case's k scan (result of `solve`).

    Attributes
    ----------
    case : Case
    branches : list
        One entry per branch: ``points`` maps normalized k to a RootResult (failed
        points have ``converged`` false), ``verified_at``, ``end_reason``.
    surveys, evaluations, notes, failed_points
        As in :class:`kinroots.study.solve.Solution`, which this wraps (``result``).
    """

    def __init__(self, result: _StudySolution) -> None:
        self.result = result
        self._rows: list[dict[str, Any]] | None = None

    def __getattr__(self, name: str) -> Any:
        if name.startswith("_") or name == "result":
            raise AttributeError(name)
        return getattr(self.result, name)

    def __getstate__(self) -> dict[str, Any]:
        return {"result": self.result, "_rows": self._rows}

    def __setstate__(self, state: dict[str, Any]) -> None:
        self.__dict__.update(state)

    @property
    def search_window(self) -> WindowChoice:
        """The window used and whether kinroots chose it from the plasma
        (:func:`kinroots.study.problem.window_choice`; summary.json ``search_window``)."""
        from kinroots.study.problem import window_choice

        return window_choice(self.result.case)

    def rows(self) -> list[dict[str, Any]]:
        """The branches.csv rows, branch by branch, k increasing."""
        if self._rows is None:
            from kinroots.study.rows import branch_rows

            self._rows = branch_rows(self.result)
        return [dict(r) for r in self._rows]

    def to_dataframe(self) -> pd.DataFrame:
        """pandas DataFrame with the branches.csv columns (failed points: values NaN)."""
        return _dataframe(self.rows())

    def to_xarray(self) -> xr.Dataset:
        """xarray Dataset over branch × k (:func:`kinroots.io.netcdf.solution_dataset`)."""
        from kinroots.io.netcdf import solution_dataset

        return solution_dataset(self.result.case, self.rows(),
                                branches=[b.id for b in self.result.branches])

    def _lines(self) -> list[str]:
        res = self.result
        u = res.case.units
        ks = res.case.k_values
        lines = [f"Solution of {res.case.title!r}: {len(res.branches)} branch(es) over "
                 f"{len(ks)} k from {ks[0]:g} to {ks[-1]:g} /{u.length_label_ascii}; "
                 f"{res.failed_points} failed point(s); {res.evaluations} evaluations"]
        for b in res.branches[:_REPR_ITEMS]:
            pts = b.sorted_points()
            if not pts:
                lines.append(f"  branch {b.id}: no points")
                continue
            good = [r.value for _, r in pts if r.converged]
            top = max(good, key=lambda w: w.imag) if good else None
            lines.append(
                f"  branch {b.id}: {len(pts)} point(s), k {pts[0][0]:g} to {pts[-1][0]:g}, "
                f"{b.end_reason}"
                + (f"; largest Im(omega) {top.imag:.4g} {u.frequency_label_ascii}"
                   if top is not None else ""))
        if len(res.branches) > _REPR_ITEMS:
            lines.append(f"  ... and {len(res.branches) - _REPR_ITEMS} more")
        return lines

    def __repr__(self) -> str:
        return "\n".join(self._lines())

    def _repr_html_(self) -> str:
        return _html(self._lines())


def solve(case: CaseLike, progress: Callable[[int, int], None] | None = None) -> Solution:
    """Survey the window at the first k and trace every branch across the case's scan.

    Parameters
    ----------
    case : Case, path or mapping
    progress : callable, optional
        ``progress(done, total)`` after each scan point.

    Returns
    -------
    Solution
        ``to_dataframe()`` (branches.csv columns) and ``to_xarray()`` (branch × k).
        Failed points are recorded in the branches, never raised.
    """
    from kinroots.study.solve import solve as solve_case

    return Solution(solve_case(as_case(case), progress=progress))


# ------------------------------------------------------------------------------- sweep


def _scheduler_address(scheduler: Any) -> str | None:
    """An address string from an address or a dask ``Client``."""
    if scheduler is None or isinstance(scheduler, str):
        return scheduler
    rpc = getattr(scheduler, "scheduler", None)
    address = getattr(rpc, "address", None)
    if not isinstance(address, str):
        raise TypeError(f"scheduler: got {type(scheduler).__name__}, expected the address "
                        "of a Dask scheduler (str) or a dask.distributed.Client")
    return address


def sweep(case: CaseLike, workers: int | None = None, scheduler: Any = None) -> xr.Dataset:
    """Every grid point of the case's ``[sweep]`` table, as the Dataset of sweep.nc.

    Parameters
    ----------
    case : Case, path or mapping
        Must have a ``[sweep]`` table.
    workers : int, optional
        Local worker processes (spawned); default one per core; 1 runs here.
    scheduler : str or dask.distributed.Client, optional
        A Dask scheduler address or a connected Client; the points run there.

    Returns
    -------
    xarray.Dataset
        One dimension per swept parameter (:func:`kinroots.io.netcdf.sweep_dataset`);
        failed points have ``converged`` = 0 and NaN growth values.

    Raises
    ------
    CaseError
        No ``[sweep]`` table, or swept values that make an invalid case.
    ConnectionError
        The scheduler cannot be reached.
    ModuleNotFoundError
        A scheduler is given but dask.distributed is not installed (the ``dask`` extra).
    """
    from kinroots.io.netcdf import sweep_dataset
    from kinroots.study.sweep import check_ranges, run_points

    if workers is not None and (isinstance(workers, bool) or not isinstance(workers, int)
                                or workers < 1):
        raise ValueError(f"workers: got {workers!r}, expected an integer >= 1 (or None: one "
                         "per core)")
    c = as_case(case)
    src = str(c.source) if c.source else "case"
    if c.sweep is None:
        raise CaseError([f"{src}: sweep: missing; expected a [sweep] table"])
    errors = check_ranges(c)
    if errors:
        raise CaseError(errors)
    total = int(np.prod(c.sweep.shape))
    rows: dict[int, dict[str, Any]] = {}

    def keep(index: int, row: dict[str, Any]) -> None:
        rows[index] = row

    run_points(c, "sweep", list(range(total)), keep, workers=workers,
               scheduler=_scheduler_address(scheduler))
    return sweep_dataset(c, [rows[i] for i in sorted(rows)])


# -------------------------------------------------------------------------- dispersion


class DispersionFunction:
    """D(ω) of a case at one normalized k, as a function of normalized ω.

    Calling it gives D (the function whose zeros are the roots; its scaling is
    ``scaling``): electrostatic D = 1 + Σ_s χ_s; electromagnetic
    D = (ω/ω_u)⁴ det Λ (:class:`kinroots.physics.dispersion.Dispersion`).

    Attributes
    ----------
    case : Case
    k : float
        Normalized wavenumber.
    k_per_m : float
        The same in 1/m.
    """

    def __init__(self, case: Case, k: float) -> None:
        from kinroots.study.problem import dispersion_at

        self.case = case
        self.k = k
        self.k_per_m = float(case.units.k_to_si(k))
        self._d: Dispersion = dispersion_at(case, k)

    @property
    def scaling(self) -> str:
        """How D is normalized (plain text)."""
        return str(self._d.scaling)

    def _omega_si(self, omega: Any) -> np.ndarray:
        try:
            om = np.asarray(omega, dtype=complex)
        except (TypeError, ValueError):
            raise ValueError(f"omega: got {omega!r}, expected complex numbers (normalized "
                             f"frequency, units of {self.case.units.frequency_label_ascii})"
                             ) from None
        with np.errstate(over="ignore", invalid="ignore"):
            return om * self.case.units.omega_unit  # beyond double: inf, so D is NaN

    def __call__(self, omega: Any) -> np.ndarray:
        """D at normalized ω (any shape, complex allowed)."""
        return self._d.value(self._omega_si(omega))

    def derivative(self, omega: Any) -> np.ndarray:
        """dD/dω̂ (derivative in the normalized frequency)."""
        return self._d(self._omega_si(omega))[1] * self.case.units.omega_unit

    def susceptibilities(self, omega: Any) -> dict[str, np.ndarray]:
        """χ_s of every species at normalized ω, by species name.

        Electrostatic models: scalars shaped like ``omega`` (D = 1 + Σ χ_s).
        Electromagnetic: 3×3 tensors in (x, y, z), B along z, k in the x-z plane,
        shaped ``omega.shape + (3, 3)`` (ε = I + Σ χ_s).
        """
        return self._d.susceptibilities(self._omega_si(omega))

    def _lines(self) -> list[str]:
        u = self.case.units
        return [f"DispersionFunction of {self.case.title!r} at k = {self.k:g} "
                f"/{u.length_label_ascii} ({self.k_per_m:.6g} 1/m)",
                f"  {self.case.model}, omega in {u.frequency_label_ascii}; {self.scaling}"]

    def __repr__(self) -> str:
        return "\n".join(self._lines())

    def _repr_html_(self) -> str:
        return _html(self._lines())


def dispersion(case: CaseLike, k: float) -> DispersionFunction:
    """The dispersion function of a case at one normalized k.

    Parameters
    ----------
    case : Case, path or mapping
    k : float
        Normalized wavenumber, > 0.

    Returns
    -------
    DispersionFunction
        ``f(omega)`` gives D at normalized ω; ``f.susceptibilities(omega)`` the χ_s of
        every species; ``f.derivative(omega)`` dD/dω̂.
    """
    return DispersionFunction(as_case(case), _positive_k(k))


# ------------------------------------------------------------------- launch, spectrum


class Launch:
    """Complex wavenumbers of the waves driven at real frequencies (result of `launch`).

    Attributes
    ----------
    result : kinroots.study.launch.LaunchResult
        Branches across frequency (normalized complex k per point), surveys, notes.
    """

    def __init__(self, result: Any) -> None:
        self.result = result

    @property
    def case(self) -> Case:
        return self.result.case

    @property
    def failed_points(self) -> int:
        """Failed points plus incomplete surveys."""
        return int(self.result.failed_points)

    def rows(self) -> list[dict[str, Any]]:
        """The launch.csv rows, branch by branch, frequency increasing."""
        from kinroots.study.launch import launch_rows

        return launch_rows(self.result)

    def to_dataframe(self) -> pd.DataFrame:
        """pandas DataFrame with the launch.csv columns (failed points: values NaN)."""
        from kinroots.study.launch import LAUNCH_VALUE_COLUMNS, launch_columns

        return _dataframe(self.rows(), launch_columns(self.case), LAUNCH_VALUE_COLUMNS)

    def _lines(self) -> list[str]:
        res = self.result
        f = res.frequencies_hz
        return [f"Launch in {self.case.title!r}: {len(res.branches)} wave(s) over "
                f"{len(f)} frequencies from {f[0]:.6g} to {f[-1]:.6g} Hz; "
                f"{self.failed_points} failed point(s)"]

    def __repr__(self) -> str:
        return "\n".join(self._lines())

    def _repr_html_(self) -> str:
        return _html(self._lines())


def launch(case: CaseLike, frequencies_hz: Sequence[float] | None = None,
           progress: Callable[[int, int], None] | None = None) -> Launch:
    """Complex k of every wave in the case's ``[launch]`` box at each driving frequency.

    Parameters
    ----------
    case : Case, path or mapping
    frequencies_hz : sequence of float, optional
        Increasing frequencies [Hz] (default: the case's ``[launch]`` table).
    progress : callable, optional
        ``progress(done, total)`` after each frequency.

    Returns
    -------
    Launch
        ``to_dataframe()`` gives the launch.csv columns (wavelength, damping length...).
    """
    from kinroots.study.launch import launch as launch_case

    return Launch(launch_case(as_case(case), frequencies_hz=frequencies_hz,
                              progress=progress))


class Spectrum:
    """Electron density fluctuation spectrum seen by a probe laser (result of `spectrum`).

    Attributes
    ----------
    k_per_m : float
        The Bragg wavenumber |k_s − k_i| [1/m].
    alpha : float
        Scattering parameter 1/(k λ_De) at that k (> 1: collective).
    columns : dict of str to ndarray
        The spectrum.csv columns.
    """

    def __init__(self, result: Any) -> None:
        self.result = result
        self.k_per_m = float(result.k_bragg_per_m)
        self.alpha = float(result.alpha_bragg)
        self.columns: dict[str, np.ndarray] = result.columns

    def to_dataframe(self) -> pd.DataFrame:
        """pandas DataFrame with the spectrum.csv columns."""
        import pandas as pd

        from kinroots.physics.spectrum import SPECTRUM_COLUMNS

        return pd.DataFrame({c: self.columns[c] for c in SPECTRUM_COLUMNS})

    def _lines(self) -> list[str]:
        r = self.result
        return [f"Spectrum for a {r.laser_wavelength_m:.6g} m probe scattered through "
                f"{r.scattering_angle_deg:g} deg: k = {self.k_per_m:.6g} 1/m, alpha = "
                f"{self.alpha:.4g}, {len(self.columns['omega_rad_per_s'])} samples"]

    def __repr__(self) -> str:
        return "\n".join(self._lines())

    def _repr_html_(self) -> str:
        return _html(self._lines())


def spectrum(case: CaseLike, *, laser_wavelength: float, scattering_angle: float,
             points: int = 4001) -> Spectrum:
    """The scattered spectrum S(k, ω) of the case's plasma (unmagnetized, collisionless).

    Parameters
    ----------
    case : Case, path or mapping
        k = k_s − k_i makes the case's ``wave.angle`` with z.
    laser_wavelength : float
        Probe wavelength [m].
    scattering_angle : float
        Angle between incident and scattered wave vectors [degrees], in (0, 180].
    points : int
        Starting samples of the spectrum (bisected further where S is not resolved).

    Returns
    -------
    Spectrum
    """
    from kinroots.physics.spectrum import scattered_spectrum

    c = as_case(case)
    return Spectrum(scattered_spectrum(c.plasma, laser_wavelength=laser_wavelength,
                                       scattering_angle_deg=scattering_angle,
                                       k_angle_deg=c.angle_deg, points=points))
