"""Table and metadata writers: CSV and JSON, written atomically.

Numbers carry full double precision (Python's shortest round-trip ``repr``); rounding
for reports belongs to a separate export.  A failed point keeps its row, with
``converged = false`` and empty value cells, so it can never be read as a valid number.
"""

from __future__ import annotations

import csv
import io
import json
import math
import os
import tempfile
from collections.abc import Iterable, Mapping, Sequence
from pathlib import Path
from typing import Any

from kinroots.physics.modes import MODE_COLUMNS

#: How each root was obtained: the columns every root table ends its fixed part with.
RESULT_COLUMNS: tuple[str, ...] = (
    "residual",
    "converged",
    "verified",
    "multiplicity",
    "iterations",
    "evaluations",
    "status",
    "reason",
    "relative_error",
    "relative_residual",
    "below_resolution",
)

#: Columns of every kinroots table that hold text; every other column holds numbers,
#: true/false, or nothing (a failed point).
TEXT_COLUMNS: frozenset[str] = frozenset(
    {"status", "reason", "warnings", "wave_name", "below_resolution"})

#: Columns of ``branches.csv`` and ``roots.csv``, in order.  The first ten are the
#: contract of docs/design.md; then how each root was obtained; then the mode identity
#: (kinroots.physics.modes), followed by one ``density_abs_<s>``, ``density_phase_deg_<s>`` pair
#: per species, appended by rows_to_csv (see PER_SPECIES_PREFIXES).
ROOT_COLUMNS: tuple[str, ...] = (
    "branch",
    "k",
    "omega_real",
    "omega_imag",
    "k_per_m",
    "freq_hz",
    "gamma_per_s",
    *RESULT_COLUMNS,
    "wave",
    "wave_name",
    *MODE_COLUMNS,
)

#: Row keys with these prefixes are appended (in first-seen order) after the columns of
#: :data:`ROOT_COLUMNS` when that default column set is used: per-species columns whose
#: names depend on the case.
PER_SPECIES_PREFIXES: tuple[str, ...] = ("density_abs_", "density_phase_deg_")

#: Cells left empty when a point did not converge.
VALUE_COLUMNS: frozenset[str] = frozenset(
    {"omega_real", "omega_imag", "freq_hz", "gamma_per_s", "residual", "relative_error",
     "relative_residual"}
)


def format_cell(value: Any) -> str:
    """Format one CSV cell.

    Floats use the shortest repr that round-trips (full double precision); booleans are
    ``true``/``false``; ``None`` and non-finite numbers become an empty cell only where
    the caller passes ``None`` — non-finite floats are written as ``nan``/``inf`` so they
    are never mistaken for a missing value.
    """
    if value is None:
        return ""
    if isinstance(value, bool):
        return "true" if value else "false"
    if isinstance(value, float):
        if math.isnan(value):
            return "nan"
        if math.isinf(value):
            return "inf" if value > 0 else "-inf"
        return repr(value)
    return str(value)


def _umask() -> int:
    """The process umask (read by setting and restoring it: there is no getter)."""
    mask = os.umask(0o022)
    os.umask(mask)
    return mask


def atomic_write_bytes(path: Path, data: bytes) -> None:
    """Write ``data`` to ``path`` atomically (temporary file in the same folder, flushed
    to disk, then ``os.replace``), so a reader never sees a half-written file.  The file
    gets the permissions of a normally created one (0666 less the umask)."""
    path = Path(path)
    path.parent.mkdir(parents=True, exist_ok=True)
    fd, tmp = tempfile.mkstemp(prefix=f".{path.name}.", suffix=".tmp", dir=path.parent)
    try:
        # mkstemp creates the file 0600; give it the mode a plain open() would (the umask)
        os.fchmod(fd, 0o666 & ~_umask())
        with os.fdopen(fd, "wb") as fh:
            fh.write(data)
            fh.flush()
            os.fsync(fh.fileno())
        os.replace(tmp, path)
    except BaseException:
        try:
            os.unlink(tmp)
        except FileNotFoundError:
            pass
        raise


def atomic_write_text(path: Path, text: str) -> None:
    """Text (UTF-8) counterpart of :func:`atomic_write_bytes`."""
    atomic_write_bytes(path, text.encode("utf-8"))


def root_table_columns(rows: Iterable[Mapping[str, Any]]) -> tuple[str, ...]:
    """:data:`ROOT_COLUMNS` and the per-species columns of ``rows`` (first-seen order)."""
    extra: dict[str, None] = {}
    for row in rows:
        for key in row:
            if key.startswith(PER_SPECIES_PREFIXES) and key not in ROOT_COLUMNS:
                extra[key] = None
    return (*ROOT_COLUMNS, *extra)


#: Units of columns whose unit does not depend on the case (see :func:`column_units`).
_FIXED_UNITS: dict[str, str] = {
    "scattered_wavelength_nm": "nm", "wavelength_shift_nm": "nm",
    "relative_power_per_nm": "1/nm", "omega_rad_per_s": "rad/s", "spectral_density_s": "s",
    "phase_speed_m_per_s": "m/s", "damping_length_cm": "cm",
}
#: Columns in the case's frequency unit (ω/ω_unit, γ/ω_unit).
_FREQUENCY_COLUMNS = frozenset({
    "omega_real", "omega_imag", "omega", "growth_max", "growth_omega_real",
    "growth_omega_imag", "growth_level", "growth_at_low", "growth_at_high",
    "least_damped_omega_real", "least_damped_omega_imag"})
#: Columns in 1 / the case's length unit (normalized k).
_WAVENUMBER_COLUMNS = frozenset({"k", "k_real", "k_imag", "growth_k", "least_damped_k"})
_ANGLE_COLUMNS = frozenset({"growth_angle", "least_damped_angle"})


def column_units(columns: Sequence[str], *, frequency: str, length: str,
                 parameters: Mapping[str, str] | None = None) -> list[tuple[str, str]]:
    """(column, unit) for every column of a kinroots table.

    ``frequency`` and ``length`` name the case's units (ASCII, e.g. ``omega_pe`` and
    ``lambda_De``); ``parameters`` maps columns holding a swept or bracketed parameter to
    its unit.  SI columns carry their unit in their name (``_hz``, ``_per_s``, ``_per_m``,
    ``_m``, ``_deg``); counts, flags, dimensionless ratios, residuals of the
    (dimensionless) dispersion function and text get ``1`` or ``text``.  Written beside
    every CSV as ``<table>.units.csv`` so that the units travel with the table while the
    table itself stays plain CSV for any reader.
    """
    params = dict(parameters or {})
    out = []
    for c in columns:
        if c in params:
            unit = params[c]
        elif c in _FIXED_UNITS:
            unit = _FIXED_UNITS[c]
        elif c in _FREQUENCY_COLUMNS:
            unit = frequency
        elif c in _WAVENUMBER_COLUMNS:
            unit = f"1/{length}"
        elif c in _ANGLE_COLUMNS or c.endswith("_deg") or c.startswith("density_phase_deg_"):
            unit = "degree"
        elif c.endswith(("_hz",)):
            unit = "Hz"
        elif c.endswith("_per_s"):
            unit = "1/s"
        elif c.endswith("_per_m"):
            unit = "1/m"
        elif c.endswith("_m"):
            unit = "m"
        elif c in TEXT_COLUMNS:
            unit = "text"
        else:
            unit = "1"
        out.append((c, unit))
    return out


def write_units(path: Path, units: Sequence[tuple[str, str]]) -> None:
    """Write ``column,unit`` rows (from :func:`column_units`) atomically."""
    atomic_write_text(path, rows_to_csv(({"column": c, "unit": u} for c, u in units),
                                        ("column", "unit")))


def rows_to_csv(rows: Iterable[Mapping[str, Any]], columns: Sequence[str] = ROOT_COLUMNS) -> str:
    """Render rows (mappings from column name to value) as CSV text.

    Rows with ``converged`` false get empty cells in :data:`VALUE_COLUMNS`.  With the
    default columns, per-species keys (:data:`PER_SPECIES_PREFIXES`) are appended.
    """
    if columns is ROOT_COLUMNS:
        rows = list(rows)
        columns = root_table_columns(rows)
    buf = io.StringIO()
    writer = csv.writer(buf, lineterminator="\n")
    writer.writerow(columns)
    for row in rows:
        failed = row.get("converged") is False
        cells = []
        for col in columns:
            value = row.get(col)
            if failed and col in VALUE_COLUMNS:
                value = None
            cells.append(format_cell(value))
        writer.writerow(cells)
    return buf.getvalue()


def write_csv(
    path: Path, rows: Iterable[Mapping[str, Any]], columns: Sequence[str] = ROOT_COLUMNS
) -> None:
    """Write rows as CSV atomically; see :func:`rows_to_csv`."""
    atomic_write_text(path, rows_to_csv(rows, columns))


def _json_default(obj: Any) -> Any:
    if isinstance(obj, complex):
        return {"real": obj.real, "imag": obj.imag}
    if isinstance(obj, Path):
        return str(obj)
    try:
        import numpy as np

        if isinstance(obj, np.generic):
            return obj.item()
        if isinstance(obj, np.ndarray):
            return obj.tolist()
    except ImportError:  # pragma: no cover - numpy is a dependency
        pass
    raise TypeError(f"cannot write {type(obj).__name__} to JSON")


def _finite_json(obj: Any) -> Any:
    """Replace non-finite floats by None: JSON has no NaN."""
    import numpy as np

    if isinstance(obj, np.ndarray):
        obj = obj.tolist()
    elif isinstance(obj, np.generic):
        obj = obj.item()
    if isinstance(obj, float) and not math.isfinite(obj):
        return None
    if isinstance(obj, Mapping):
        return {str(k): _finite_json(v) for k, v in obj.items()}
    if isinstance(obj, list | tuple):
        return [_finite_json(v) for v in obj]
    if isinstance(obj, complex):
        return {"real": _finite_json(obj.real), "imag": _finite_json(obj.imag)}
    return obj


def to_json(data: Mapping[str, Any]) -> str:
    """Serialize metadata to JSON text (floats in shortest round-trip form)."""
    return json.dumps(_finite_json(data), indent=2, default=_json_default, allow_nan=False) + "\n"


def write_json(path: Path, data: Mapping[str, Any]) -> None:
    """Write metadata as JSON atomically."""
    atomic_write_text(path, to_json(data))


#: Suffix of files staged by an `OutputSet` and not yet committed.
STAGED_SUFFIX = ".kinroots-part"


class OutputSet:
    """The files of one run, replaced together: a kill never leaves two runs' files mixed.

    Writers write to :meth:`stage` paths (hidden temporary names in the output folder);
    :meth:`commit` then removes the previous run's files of this command (listed in its
    manifest ``<command>-manifest.json``) and the files about to be replaced, renames the
    staged files into place and writes the new manifest (run id, time, every file with its
    size and SHA-256).  A kill before the removals leaves the previous set whole; a kill
    after them leaves part of the new set and no manifest — never old and new side by
    side.  Staged files of a run that failed are removed by the next `OutputSet` on that
    folder.

    Parameters
    ----------
    folder : Path
        Output folder (created).
    command : str
        Command name; names the manifest.
    """

    def __init__(self, folder: Path, command: str) -> None:
        import uuid

        self.folder = Path(folder)
        self.command = command
        self.run_id = uuid.uuid4().hex
        self._staged: dict[str, Path] = {}
        self.folder.mkdir(parents=True, exist_ok=True)
        for stale in self.folder.glob(f".*{STAGED_SUFFIX}*"):
            stale.unlink(missing_ok=True)

    @property
    def manifest(self) -> Path:
        return self.folder / f"{self.command}-manifest.json"

    def stage(self, name: str) -> Path:
        """Path to write ``name`` to (hidden until :meth:`commit`)."""
        # the real suffix last, so that writers choosing a format by suffix still can
        path = self.folder / f".{name}.{self.run_id[:12]}{STAGED_SUFFIX}{Path(name).suffix}"
        self._staged[name] = path
        return path

    def commit(self) -> list[Path]:
        """Swap the staged files in; return their final paths."""
        import datetime
        import hashlib

        previous: list[str] = []
        try:
            previous = list(json.loads(self.manifest.read_text(encoding="utf-8"))["files"])
        except (OSError, ValueError, KeyError, TypeError):
            previous = []
        self.manifest.unlink(missing_ok=True)
        for name in {*previous, *self._staged}:
            if isinstance(name, str) and "/" not in name and name != self.manifest.name:
                (self.folder / name).unlink(missing_ok=True)
        files: dict[str, dict[str, Any]] = {}
        final = []
        for name, staged in self._staged.items():
            data = staged.read_bytes()
            os.replace(staged, self.folder / name)
            final.append(self.folder / name)
            files[name] = {"bytes": len(data), "sha256": hashlib.sha256(data).hexdigest()}
        stamp = datetime.datetime.now(datetime.UTC).strftime("%Y-%m-%dT%H:%M:%SZ")
        write_json(self.manifest, {"command": self.command, "run_id": self.run_id,
                                   "finished": stamp, "files": files})
        return final
