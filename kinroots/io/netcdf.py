"""xarray Datasets of kinroots results, with their metadata (the one place that builds them).

Two Datasets: the branches of a trace (:func:`solution_dataset`, dimensions branch × k)
and a parameter sweep (:func:`sweep_dataset`, the dimensions of the ``[sweep]`` axes;
written as ``sweep.nc`` by ``kinroots sweep``).  Both are built from the table rows (the
dicts behind branches.csv and sweep.csv), so the numbers are the tables' numbers.

Metadata:

* every variable and coordinate has ``long_name`` and ``units`` (``"1"`` for pure
  numbers; normalized quantities name their unit, e.g. ``"omega_pe"``,
  ``"1/lambda_De"``);
* yes/no columns are int8 with ``flag_values`` and ``flag_meanings``; −1 means that the
  value does not exist (no point of that branch at that k, or a point never computed);
* a point that did not converge keeps its flags and counts, but its values are NaN, as
  its cells are empty in the CSV tables;
* global attributes: ``title``, ``kinroots_version``, ``source``, ``case`` (the case as
  TOML text), ``history`` and ``kinroots_sign_convention``.

The unit strings are the case's normalized units, which UDUNITS does not know, so the
files do not claim a CF ``Conventions`` attribute.
"""

from __future__ import annotations

import json
import math
from collections.abc import Mapping, Sequence
from datetime import UTC, datetime
from typing import TYPE_CHECKING, Any

import numpy as np

if TYPE_CHECKING:
    import xarray as xr

    from kinroots.io.case import Case

__all__ = [
    "SIGN_CONVENTION",
    "SOLUTION_VARIABLES",
    "SWEEP_VARIABLES",
    "dataset_bytes",
    "solution_dataset",
    "sweep_dataset",
    "toml_text",
]

#: The sign convention, as a global attribute of every Dataset.
SIGN_CONVENTION = (
    "perturbations proportional to exp(i k.x - i omega t): Im(omega) > 0 grows, "
    "Im(omega) < 0 is damped; B along z, k = (k_perp, 0, k_par); thermal speed "
    "w = sqrt(2 T / m); Omega_s = q_s B / m_s signed"
)

# Unit kinds, resolved per case: "omega" (normalized frequency), "k" (normalized
# wavenumber), or a literal unit string.
_OMEGA, _K = "<omega>", "<k>"

#: Variables of :func:`solution_dataset`: row key → (long_name, units or unit kind, kind).
#: Kinds: "value" (float, NaN when not converged), "float" (kept), "flag" (int8 yes/no),
#: "count" (int32, −1 when absent), "status" (int8 code of the root status).
SOLUTION_VARIABLES: dict[str, tuple[str, str, str]] = {
    "omega_real": ("real part of the frequency, Re(omega), normalized", _OMEGA, "value"),
    "omega_imag": ("growth rate Im(omega), normalized (> 0 grows)", _OMEGA, "value"),
    "freq_hz": ("frequency Re(omega) / (2 pi)", "Hz", "value"),
    "gamma_per_s": ("growth rate Im(omega) (> 0 grows)", "1/s", "value"),
    "residual": ("|D| at the root (D as scaled in the dispersion_scaling attribute)", "1",
                 "value"),
    "converged": ("root converged (Newton stopping test held at the value)", "1", "flag"),
    "verified": ("root confirmed by a survey of the window at this k", "1", "flag"),
    "multiplicity": ("multiplicity of the root", "1", "count"),
    "iterations": ("Newton iterations", "1", "count"),
    "evaluations": ("dispersion function evaluations", "1", "count"),
    "status": ("outcome of the root computation", "1", "status"),
    "e_x_re": ("Re of the x component of the unit electric field dE/|dE|", "1", "float"),
    "e_x_im": ("Im of the x component of the unit electric field dE/|dE|", "1", "float"),
    "e_y_re": ("Re of the y component of the unit electric field dE/|dE|", "1", "float"),
    "e_y_im": ("Im of the y component of the unit electric field dE/|dE|", "1", "float"),
    "e_z_re": ("Re of the z component of the unit electric field dE/|dE|", "1", "float"),
    "e_z_im": ("Im of the z component of the unit electric field dE/|dE|", "1", "float"),
    "handedness": ("2 Im(E_x* E_y) / (|E_x|^2 + |E_y|^2): +1 right-handed about B "
                   "(electron sense), -1 left", "1", "float"),
    "db_c_over_de": ("c |dB| / |dE|", "1", "float"),
    "magnetic_compressibility": ("|dB_z| / |dB|", "1", "float"),
    "electrostatic_fraction": ("|k_hat . dE| / |dE|", "1", "float"),
}
#: Per-species variables of :func:`solution_dataset`: prefix → (long_name, units).
_DENSITY_VARIABLES: dict[str, tuple[str, str]] = {
    "density_abs_": ("|dn_s / n_s| of species {name}, in units of e |dE| / (|k| T_ref)",
                     "1"),
    "density_phase_deg_": ("phase of dn_s / n_s of species {name} relative to dE",
                           "degree"),
}

#: Variables of :func:`sweep_dataset` (same layout as :data:`SOLUTION_VARIABLES`).
SWEEP_VARIABLES: dict[str, tuple[str, str, str]] = {
    "growth_max": ("largest growth rate Im(omega) over k and angle, normalized", _OMEGA,
                   "value"),
    "growth_omega_real": ("Re(omega) of the fastest-growing root, normalized", _OMEGA,
                          "value"),
    "growth_k": ("normalized wavenumber of the fastest-growing root", _K, "value"),
    "growth_angle": ("angle between k and B of the fastest-growing root", "degree", "value"),
    "growth_per_s": ("largest growth rate Im(omega)", "1/s", "value"),
    "growth_freq_hz": ("frequency Re(omega) / (2 pi) of the fastest-growing root", "Hz",
                       "value"),
    "growth_k_per_m": ("wavenumber of the fastest-growing root", "1/m", "value"),
    "growing": ("largest growth rate above the root finder's resolution", "1", "flag"),
    "k_at_edge": ("maximum found at an end of the k scan", "1", "flag"),
    "angle_at_edge": ("maximum found at an end of the angle list", "1", "flag"),
    "least_damped_omega_real": ("Re(omega) of the least-damped root, normalized", _OMEGA,
                                "float"),
    "least_damped_omega_imag": ("Im(omega) of the least-damped root, normalized", _OMEGA,
                                "float"),
    "least_damped_k": ("normalized wavenumber of the least-damped root", _K, "float"),
    "least_damped_angle": ("angle between k and B of the least-damped root", "degree",
                           "float"),
    "roots_found": ("roots found in the search window, all k and angles", "1", "count"),
    "evaluations": ("dispersion function evaluations", "1", "count"),
    "converged": ("every survey of the point complete", "1", "flag"),
}

_FLAG_MEANINGS: dict[str, str] = {
    "converged": "not_available not_converged converged",
    "verified": "no_point not_verified verified",
    "growing": "not_available not_growing growing",
    "k_at_edge": "not_available inside_k_range at_k_range_end",
    "angle_at_edge": "not_available inside_angle_range at_angle_range_end",
}
_FLAG_VALUES = np.array([-1, 0, 1], dtype=np.int8)

#: Root status names (``RootResult.status``, lower case) and their int8 codes.
STATUS_CODES: tuple[str, ...] = (
    "converged", "max_iter", "stalled", "diverged", "nonfinite", "left_region",
    "not_attempted", "incomplete",
)


def _units(kind: str, case: Case) -> str:
    if kind == _OMEGA:
        return case.units.frequency_label_ascii
    if kind == _K:
        return f"1/{case.units.length_label_ascii}"
    return kind


def _cell(kind: str, value: Any, converged: bool) -> float | int:
    """One array element of a variable of ``kind`` from a row value."""
    if kind == "flag":
        return -1 if value is None else int(bool(value))
    if kind == "count":
        return -1 if value is None else int(value)
    if kind == "status":
        return STATUS_CODES.index(value) if value in STATUS_CODES else -1
    if value is None or (kind == "value" and not converged):
        return math.nan
    return float(value)


_DTYPES = {"flag": np.int8, "count": np.int32, "status": np.int8}


def _variable(kind: str, shape: tuple[int, ...], name: str, long_name: str, units: str
              ) -> tuple[np.ndarray, dict[str, Any]]:
    """An empty array of ``kind`` (every cell "absent") and its attributes."""
    dtype = _DTYPES.get(kind, np.float64)
    fill = -1 if kind in _DTYPES else math.nan
    attrs: dict[str, Any] = {"long_name": long_name, "units": units}
    if kind == "flag":
        attrs.update(flag_values=_FLAG_VALUES,
                     flag_meanings=_FLAG_MEANINGS.get(name, "not_available no yes"))
    elif kind == "status":
        attrs.update(flag_values=np.arange(-1, len(STATUS_CODES), dtype=np.int8),
                     flag_meanings="no_point " + " ".join(STATUS_CODES))
    elif kind == "count":
        attrs["comment"] = "-1: no value (no point there)"
    return np.full(shape, fill, dtype=dtype), attrs


def toml_text(data: Mapping[str, Any]) -> str:
    """``data`` (plain case data: tables, arrays, strings, numbers, booleans) as TOML.

    Scalars and arrays of scalars first, then sub-tables (``[a.b]``) and arrays of tables
    (``[[species]]``); ``tomllib.loads`` of the result gives ``data`` back.
    """
    lines: list[str] = []

    def scalar(v: Any) -> str:
        if isinstance(v, bool):
            return "true" if v else "false"
        if isinstance(v, str):
            return json.dumps(v, ensure_ascii=False)
        if isinstance(v, float) and not math.isfinite(v):
            return "nan" if math.isnan(v) else ("inf" if v > 0 else "-inf")
        if isinstance(v, int | float):
            return repr(v)
        if isinstance(v, list):
            return "[" + ", ".join(scalar(x) for x in v) + "]"
        if isinstance(v, Mapping):
            return "{ " + ", ".join(f"{_key(k)} = {scalar(x)}" for k, x in v.items()) + " }"
        raise TypeError(f"cannot write {type(v).__name__} as TOML")

    def is_table_array(v: Any) -> bool:
        return isinstance(v, list) and bool(v) and all(isinstance(x, Mapping) for x in v)

    def table(d: Mapping[str, Any], prefix: str) -> None:
        for k, v in d.items():
            if not isinstance(v, Mapping) and not is_table_array(v):
                lines.append(f"{_key(k)} = {scalar(v)}")
        for k, v in d.items():
            name = f"{prefix}.{_key(k)}" if prefix else _key(k)
            if isinstance(v, Mapping):
                lines.append(f"\n[{name}]")
                table(v, name)
            elif is_table_array(v):
                for item in v:
                    lines.append(f"\n[[{name}]]")
                    table(item, name)

    table(data, "")
    return "\n".join(lines).lstrip("\n") + "\n"


def _key(k: str) -> str:
    bare = k.replace("_", "").replace("-", "").isalnum() and k.isascii()
    return k if bare else json.dumps(k, ensure_ascii=False)


def global_attributes(case: Case, history: str) -> dict[str, Any]:
    """``title``, ``kinroots_version``, ``source``, ``case`` (TOML), ``history`` and the
    sign convention."""
    from kinroots import __version__

    stamp = datetime.now(UTC).strftime("%Y-%m-%dT%H:%M:%SZ")
    return {
        "title": case.title,
        "kinroots_version": __version__,
        "source": str(case.source) if case.source else "case built in Python",
        "case": toml_text(case.raw),
        "history": f"{stamp} kinroots {__version__}: {history}",
        "kinroots_sign_convention": SIGN_CONVENTION,
        "frequency_unit": f"{case.units.frequency_label_ascii} = "
                          f"{case.units.omega_unit!r} rad/s",
        "length_unit": f"{case.units.length_label_ascii} = {case.units.length_unit!r} m",
    }


def solution_dataset(case: Case, rows: Sequence[Mapping[str, Any]], *,
                     branches: Sequence[int] | None = None,
                     history: str = "branches traced across k") -> xr.Dataset:
    """Dataset over branch × k of the rows of branches.csv.

    Parameters
    ----------
    case : Case
        The case solved (units, metadata).
    rows : sequence of mapping
        The branches.csv rows (:func:`kinroots.study.rows.branch_rows`).
    branches : sequence of int, optional
        Branch numbers (default: those in ``rows``), so that a branch without points
        still has its row of absent values.
    history : str
        What made the data (global ``history`` attribute).
    """
    import xarray as xr

    ids = sorted({int(r["branch"]) for r in rows} if branches is None else set(branches))
    ks = np.asarray(case.k_values, dtype=float)
    k_index = {float(k): i for i, k in enumerate(ks)}
    prefixes = tuple(_DENSITY_VARIABLES)
    extra = dict.fromkeys(key for r in rows for key in r if key.startswith(prefixes))
    for r in rows:  # a k off the scan grid (not produced by solve) gets its own column
        k_index.setdefault(float(r["k"]), len(k_index))
    ks = np.array(sorted(k_index))
    k_index = {float(k): i for i, k in enumerate(ks)}
    b_index = {b: i for i, b in enumerate(ids)}
    shape = (len(ids), len(ks))
    names = dict(SOLUTION_VARIABLES)
    for key in extra:
        for prefix, (long_name, unit) in _DENSITY_VARIABLES.items():
            if key.startswith(prefix):
                names[key] = (long_name.format(name=key[len(prefix):]), unit, "float")
    arrays = {n: _variable(kind, shape, n, ln, _units(u, case))
              for n, (ln, u, kind) in names.items()}
    for r in rows:
        idx = (b_index[int(r["branch"])], k_index[float(r["k"])])
        ok = bool(r.get("converged"))
        for n, (_, _, kind) in names.items():
            arrays[n][0][idx] = _cell(kind, r.get(n), ok)
    u = case.units
    coords = {
        "branch": ("branch", np.asarray(ids, dtype=np.int32),
                   {"long_name": "branch number", "units": "1"}),
        "k": ("k", ks, {"long_name": f"normalized wavenumber k {u.length_label_ascii}",
                        "units": f"1/{u.length_label_ascii}"}),
        "k_per_m": ("k", np.asarray(u.k_to_si(ks), dtype=float),
                    {"long_name": "wavenumber k", "units": "1/m"}),
    }
    data = {n: (("branch", "k"), arr, attrs) for n, (arr, attrs) in arrays.items()}
    attrs = global_attributes(case, history)
    attrs["model"] = case.model
    attrs["angle_deg"] = float(case.angle_deg)
    return xr.Dataset(data, coords=coords, attrs=attrs)


def sweep_dataset(case: Case, rows: Sequence[Mapping[str, Any]], *,
                  history: str = "parameter sweep") -> xr.Dataset:
    """Dataset of a ``[sweep]``: one dimension per swept parameter (sweep.nc).

    Parameters
    ----------
    case : Case
        The case with its ``[sweep]`` table.
    rows : sequence of mapping
        The sweep.csv rows (:func:`kinroots.study.sweep.sweep_point`), indexed by their
        ``i`` (and ``j``) keys; grid points without a row stay "absent".
    history : str
        What made the data (global ``history`` attribute).
    """
    import xarray as xr

    spec = case.sweep
    if spec is None:
        raise ValueError("the case has no [sweep] table")
    axes = spec.axes
    dims = tuple(a.path.safe_name for a in axes)
    coords = {a.path.safe_name: (a.path.safe_name, np.asarray(a.values, dtype=float),
                                 {"long_name": a.path.text, "units": a.path.unit or "1"})
              for a in axes}
    shape = tuple(spec.shape)
    arrays = {n: _variable(kind, shape, n, ln, _units(u, case))
              for n, (ln, u, kind) in SWEEP_VARIABLES.items()}
    for r in rows:
        idx = (r["i"],) if spec.y is None else (r["i"], r["j"])
        ok = bool(r.get("converged"))
        for n, (_, _, kind) in SWEEP_VARIABLES.items():
            arrays[n][0][idx] = _cell(kind, r.get(n), ok)
    data = {n: (dims, arr, attrs) for n, (arr, attrs) in arrays.items()}
    attrs = global_attributes(case, history)
    attrs["frequency_unit"] += " (of the case at each grid point)"
    return xr.Dataset(data, coords=coords, attrs=attrs)


def _netcdf_name(name: str) -> str:
    """A name netCDF-3 can store: printable ASCII without '/'; any other character c
    becomes ``u<hex code of c>`` (species names may be any printable Unicode)."""
    return "".join(c if c.isascii() and c.isprintable() and c != "/" else f"u{ord(c):04x}"
                   for c in name)


def dataset_bytes(ds: xr.Dataset) -> bytes:
    """The Dataset as netCDF bytes (netCDF-3 64-bit offset, scipy; no extra library).

    Variable and dimension names are made ASCII (`_netcdf_name`); attributes keep their
    text (UTF-8)."""
    names = {str(n) for n in (*ds.variables, *ds.dims)}
    renames = {n: _netcdf_name(n) for n in names if _netcdf_name(n) != n}
    if renames:
        ds = ds.rename(renames)
    return bytes(ds.to_netcdf(engine="scipy"))
