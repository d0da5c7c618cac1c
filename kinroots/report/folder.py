"""Reading a kinroots output folder: which results it holds, their rows and metadata.

Nothing is recomputed: the tables are read back from the CSV files and the metadata from
the JSON files that the commands wrote; the case is re-read from the copy of its keys
stored in that JSON (for names, units and the sweep axes).
"""

from __future__ import annotations

import csv
import json
import math
from collections.abc import Mapping
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from kinroots.io.tables import TEXT_COLUMNS

__all__ = ["KINDS", "Output", "ReportError", "Result", "read_folder"]


class ReportError(Exception):
    """A folder that cannot be reported on (the message says why and what was expected)."""


@dataclass(frozen=True)
class Kind:
    """One kind of result: the command, its table, its metadata file, and the keys that
    tell its metadata apart (``roots`` and ``solve`` both write summary.json)."""

    command: str
    table: str
    meta: str
    first_columns: tuple[str, ...]
    meta_keys: tuple[str, ...]


#: Every result a kinroots command writes, in report order.
KINDS: tuple[Kind, ...] = (
    Kind("solve", "branches.csv", "summary.json", ("branch", "k", "omega_real"),
         ("branches", "case")),
    Kind("roots", "roots.csv", "summary.json", ("branch", "k", "omega_real"),
         ("count", "window", "case")),
    Kind("launch", "launch.csv", "launch.json", ("branch", "freq_hz"), ("k_box", "case")),
    Kind("scatter", "spectrum.csv", "spectrum.json",
         ("scattered_wavelength_nm", "wavelength_shift_nm"), ("alpha_bragg", "case")),
    Kind("sweep", "sweep.csv", "sweep.json", ("i", "j"), ("case_hash", "case")),
    Kind("threshold", "threshold.csv", "threshold.json", ("j",), ("case_hash", "case")),
)

_BOOLEAN = {"true": True, "false": False}


def typed(cell: str) -> Any:
    """A CSV cell back as Python: '' → None, true/false → bool, numbers → int or float
    (``nan`` stays NaN), anything else the text."""
    if cell == "":
        return None
    if cell in _BOOLEAN:
        return _BOOLEAN[cell]
    try:
        return int(cell)
    except ValueError:
        pass
    try:
        return float(cell)
    except ValueError:
        return cell


@dataclass
class Result:
    """One result found in the folder: its kind, rows (typed), metadata and case."""

    kind: Kind
    rows: list[dict[str, Any]]
    columns: list[str]
    meta: dict[str, Any]
    case: Any = None
    case_problem: str = ""


@dataclass
class Output:
    """Everything reportable in one folder."""

    folder: Path
    results: list[Result] = field(default_factory=list)

    def get(self, command: str) -> Result | None:
        return next((r for r in self.results if r.kind.command == command), None)


def _read_table(path: Path) -> tuple[list[str], list[dict[str, Any]]]:
    with open(path, newline="", encoding="utf-8") as fh:
        reader = csv.reader(fh)
        header = next(reader, None)
        if header is None:
            raise ReportError(f"{path}: empty file; expected a kinroots CSV table")
        rows = []
        for n, cells in enumerate(reader, start=2):
            if len(cells) != len(header):
                raise ReportError(f"{path}: line {n}: {len(cells)} cells; expected "
                                  f"{len(header)} as in the header")
            row = {h: typed(c) for h, c in zip(header, cells, strict=True)}
            for h, value in row.items():
                if isinstance(value, str) and h not in TEXT_COLUMNS:
                    raise ReportError(f"{path}: line {n}, column {h}: got {value!r}; "
                                      "expected a number, true/false or an empty cell (the "
                                      "table was edited?)")
            if row.get("converged") is True and any(
                    h in row and not finite(row[h]) for h in _VALUES_OF_CONVERGED):
                raise ReportError(f"{path}: line {n}: converged is true but "
                                  f"{' / '.join(h for h in _VALUES_OF_CONVERGED if h in row)} "
                                  "is not a finite number; expected the value of the root")
            rows.append(row)
    return header, rows


#: Columns that a converged row always fills (the root itself).
_VALUES_OF_CONVERGED: tuple[str, ...] = ("k", "omega_real", "omega_imag", "freq_hz",
                                         "k_real", "k_imag")


def _case_of(meta: Mapping[str, Any], name: str) -> tuple[Any, str]:
    """The case rebuilt from the keys stored in the metadata (None and why if not)."""
    from kinroots.io.case import CaseError, parse_case

    raw = meta.get("case")
    if not isinstance(raw, Mapping):
        return None, f"{name}: no case stored"
    try:
        return parse_case(dict(raw), f"{name}: case"), ""
    except CaseError as exc:
        return None, "; ".join(exc.errors)


def _grid_names_back(command: str, case: Any, header: list[str],
                     rows: list[dict[str, Any]]) -> tuple[list[str], list[dict[str, Any]]]:
    """sweep.csv / threshold.csv name their grid columns by the parameters (e.g.
    ``species_p_anisotropy``); the report works with the generic ``x``, ``y``, ``across``."""
    names: dict[str, str] = {}
    if command == "sweep" and case is not None and case.sweep is not None:
        names[case.sweep.x.path.safe_name] = "x"
        if case.sweep.y is not None:
            names[case.sweep.y.path.safe_name] = "y"
    elif command == "threshold" and case is not None and case.threshold is not None:
        names[case.threshold.across.path.safe_name] = "across"
    if not names or not set(names) <= set(header):
        return header, rows
    return ([names.get(h, h) for h in header],
            [{names.get(k, k): v for k, v in r.items()} for r in rows])


def read_folder(folder: Path) -> Output:
    """Every kinroots result in ``folder``.

    Raises
    ------
    ReportError
        The folder is missing, not a folder, unreadable, or holds no kinroots result
        (a table with its metadata file).
    """
    folder = Path(folder)
    if not folder.exists():
        raise ReportError(f"{folder}: no such folder; expected a kinroots output folder")
    if not folder.is_dir():
        raise ReportError(f"{folder}: not a folder; expected a kinroots output folder")
    out = Output(folder)
    for kind in KINDS:
        table, meta_path = folder / kind.table, folder / kind.meta
        if not (table.is_file() and meta_path.is_file()):
            continue
        try:
            meta = json.loads(meta_path.read_text(encoding="utf-8"))
        except (OSError, UnicodeDecodeError, json.JSONDecodeError) as exc:
            raise ReportError(f"{meta_path}: cannot be read as JSON ({exc}); expected the "
                              f"metadata written by kinroots {kind.command}") from None
        if not isinstance(meta, dict) or not all(k in meta for k in kind.meta_keys):
            continue  # e.g. summary.json of the other of solve / roots
        try:
            header, rows = _read_table(table)
        except (OSError, UnicodeDecodeError, csv.Error) as exc:
            raise ReportError(f"{table}: cannot be read as CSV ({exc}); expected the "
                              f"table written by kinroots {kind.command}") from None
        if tuple(header[:len(kind.first_columns)]) != kind.first_columns:
            raise ReportError(f"{table}: columns start {', '.join(header[:3])}; expected "
                              f"{', '.join(kind.first_columns)} (kinroots {kind.command})")
        case, problem = _case_of(meta, str(meta_path))
        header, rows = _grid_names_back(kind.command, case, header, rows)
        out.results.append(Result(kind, rows, header, meta, case, problem))
    if not out.results:
        expected = "; ".join(f"{k.table} with {k.meta} ({k.command})" for k in KINDS)
        raise ReportError(f"{folder}: not a kinroots output folder (no result found); "
                          f"expected one of: {expected}")
    return out


def finite(value: Any) -> bool:
    """A number that can be shown (not None, not NaN or infinite)."""
    return isinstance(value, int | float) and not isinstance(value, bool) \
        and math.isfinite(value)
