"""Case files: TOML → validated, immutable `Case`.

This is the only module that reads case files.  Every problem found is collected and
reported at once in `CaseError.errors`, one line per problem, each naming the file, the
key path, the value found and what was expected.

Key paths count ``[[species]]`` tables from 1 in file order: ``species[2].density`` is
the density of the second ``[[species]]`` table.

Which keys are required and what the optional ones default to is stated in one place,
`DEFAULTS` (echoed in the README).  Unknown keys are errors (with a "did you mean"
suggestion) so that a typo never silently falls back to a default.
"""

from __future__ import annotations

import difflib
import math
import os
import stat
import tomllib
from collections.abc import Mapping
from dataclasses import dataclass, field, replace
from importlib import resources
from pathlib import Path
from typing import Any

import numpy as np

from kinroots.io.checker import Checker, _show
from kinroots.io.grid import spaced_grid
from kinroots.io.limits import (
    LIMITS,
    MAX_CASE_BYTES,
    MAX_DEPTH,
    MAX_LAUNCH_POINTS,
    MAX_SCAN_POINTS,
    MAX_WINDOW_HARMONICS,
    PLAUSIBLE,
    finite_float,
    title_problem,
)
from kinroots.io.species_tables import _check_species
from kinroots.io.study_tables import check_study_tables
from kinroots.physics.harmonic_poles import (
    largest_relevant_harmonic,
    relevant_harmonic_count,
)
from kinroots.physics.plasma import (
    AMU,
    C_LIGHT,
    E_CHARGE,
    FREQUENCY_KINDS,
    LENGTH_KINDS,
    M_ELECTRON,
    M_PROTON,
    Normalization,
    NormalizationError,
    Plasma,
    Species,
    default_unit_species,
)

__all__ = [
    "DEFAULTS",
    "REQUIRED",
    "Case",
    "CaseError",
    "LaunchSpec",
    "ScanSpec",
    "SolverOptions",
    "case_from_dict",
    "case_from_plasma",
    "default_case_path",
    "load_case",
    "parse_case",
    "plain_data",
]

#: Keys that must be present (key paths; ``species[]`` means every species table).
REQUIRED: tuple[str, ...] = (
    "title",
    "species",
    "species[].name",
    "species[].charge",
    "species[].mass",
    "species[].density",
    "species[].temperature  (or temperature_par and temperature_perp, or components)",
    "species[].kappa  (when distribution = \"kappa\")",
    "species[].components[].weight  (when components are given)",
    "wave.model",
    "scan.k  (a table {start, stop, points}, one number, or an increasing array)",
)

#: Optional keys and their defaults: the one place where defaults are decided.
DEFAULTS: dict[str, Any] = {
    "magnetic_field.B": 0.0,
    "species[].drift": 0.0,
    "wave.angle": 0.0,
    "scan.k.spacing": "linear",
    "units.frequency": "plasma:<first electron species, else first species>",
    "units.length": "debye:<same species>",
    "solver.tolerance": 1e-10,
    "solver.harmonic_tolerance": 1e-14,
    "solver.resurvey_every": 10,
    "species[].collision_frequency": 0.0,
    "species[].distribution": "maxwellian",
    "species[].components[].drift": 0.0,
    "launch.k_real": "[0.01, 2.0] (normalized k, see [units])",
    "launch.k_imag": "[-0.01, 0.5] (normalized k)",
    "launch.frequency.spacing": "linear",
    # [sweep] and [threshold] (optional tables; see kinroots.io.parameters)
    "sweep.x.spacing": "linear",
    "sweep.y": "<none: one-parameter sweep>",
    "sweep.growth_levels": [],
    "sweep.angles": "<[wave.angle]>",
    "threshold.across": "<the [sweep] axis that is not threshold.parameter>",
    "threshold.angles": "<sweep.angles, else [wave.angle]>",
}

#: Relative tolerance of the quasi-neutrality and zero-current checks (warnings).
NEUTRALITY_RTOL: float = 1e-6
#: Thermal or drift speeds above this fraction of c earn a warning (non-relativistic).
RELATIVISTIC_WARNING: float = 0.1

_TOP_KEYS = (
    "title", "magnetic_field", "species", "wave", "scan", "units", "search", "solver", "launch",
    "sweep", "threshold",
)
_TABLE_KEYS: dict[str, tuple[str, ...]] = {
    "magnetic_field": ("B",),
    "wave": ("model", "angle"),
    "scan": ("k",),
    "scan.k": ("start", "stop", "points", "spacing"),
    "units": ("frequency", "length"),
    "search": ("real", "imag"),
    "solver": ("tolerance", "harmonic_tolerance", "resurvey_every"),
    "launch": ("frequency", "k_real", "k_imag"),
    "launch.frequency": ("start", "stop", "points", "spacing"),
}
_MODELS = ("electrostatic", "electromagnetic")
_SPACINGS = ("linear", "log")
#: ``ScanSpec.spacing`` of a scan given as one number or an array of k values.
LISTED = "listed"
#: Title given by :func:`case_from_dict` to a mapping without one.
UNTITLED = "case built in Python"



class CaseError(Exception):
    """A case file that cannot be used.

    Attributes
    ----------
    errors : list of str
        Every problem found, one self-contained message each.
    """

    def __init__(self, errors: list[str]) -> None:
        self.errors = list(errors)
        super().__init__("\n".join(self.errors))


@dataclass(frozen=True)
class ScanSpec:
    """The wavenumber scan as written: normalized k from start to stop.

    ``spacing`` is ``"linear"`` or ``"log"`` for a ``{start, stop, points}`` table and
    :data:`LISTED` for one number or an array of values (``Case.k_values`` holds them).
    """

    start: float
    stop: float
    points: int
    spacing: str = "linear"


@dataclass(frozen=True)
class SolverOptions:
    """Numerical options of the ``[solver]`` table.

    Attributes
    ----------
    tolerance : float
        Relative tolerance on a root ω.
    harmonic_tolerance : float
        Relative size below which cyclotron-harmonic terms are dropped.
    resurvey_every : int
        Scan points per batch of boundary zero counts while tracing (0: 10); the window
        is counted at every point (see :mod:`kinroots.study.solve`).
    """

    tolerance: float = 1e-10
    harmonic_tolerance: float = 1e-14
    resurvey_every: int = 10


@dataclass(frozen=True)
class LaunchSpec:
    """The ``[launch]`` table: real driving frequencies [Hz] and a complex-k search box.

    Attributes
    ----------
    frequencies_hz : tuple of float
        Driving frequencies f [Hz], increasing.
    k_real, k_imag : (float, float)
        Search box of the spatial problem in normalized k (Re k > 0).
    """

    frequencies_hz: tuple[float, ...]
    k_real: tuple[float, float] = (0.01, 2.0)
    k_imag: tuple[float, float] = (-0.01, 0.5)


@dataclass(frozen=True, eq=False)
class Case:
    """A validated case.  Numbers in ``k_values``, search windows: normalized units."""

    title: str
    plasma: Plasma
    model: str
    angle_deg: float
    k_values: np.ndarray
    scan: ScanSpec
    units: Normalization
    #: ``[search]`` window edges; ``None`` where the case leaves them to kinroots (see
    #: :func:`kinroots.study.problem.window`, which every computation uses).
    search_real: tuple[float, float] | None
    search_imag: tuple[float, float] | None
    solver: SolverOptions
    source: Path | None
    raw: dict[str, Any] = field(repr=False)
    warnings: tuple[str, ...] = ()
    #: ``[sweep]`` table (kinroots.io.parameters.SweepSpec) or None.
    sweep: Any = None
    #: ``[threshold]`` table (kinroots.io.parameters.ThresholdSpec) or None.
    threshold: Any = None
    launch: LaunchSpec | None = None

    @property
    def magnetized(self) -> bool:
        """True when B ≠ 0."""
        return self.plasma.magnetized

    @property
    def angle_rad(self) -> float:
        """Angle between k and z [rad]."""
        return math.radians(self.angle_deg)

    def _summary_lines(self) -> list[str]:
        u, sc = self.units, self.scan
        names = ", ".join(s.name for s in self.plasma.species)
        scan = (f"{sc.points} k from {sc.start:g} to {sc.stop:g}"
                + ("" if sc.spacing == LISTED else f" ({sc.spacing})"))
        return [
            f"Case {self.title!r}" + (f" from {self.source}" if self.source else ""),
            f"  species {names}; B = {self.plasma.B:g} T; {self.model}, angle "
            f"{self.angle_deg:g} deg",
            f"  units: omega in {u.frequency_label_ascii} = {u.omega_unit:.6g} rad/s, "
            f"k in 1/{u.length_label_ascii} ({u.length_unit:.6g} m)",
            f"  scan: {scan}; window Re omega {_edges(self.search_real)}, "
            f"Im omega {_edges(self.search_imag)}",
        ]

    def __repr__(self) -> str:
        return "\n".join(self._summary_lines())

    def _repr_html_(self) -> str:
        import html

        head, *rest = self._summary_lines()
        items = "".join(f"<li>{html.escape(line.strip())}</li>" for line in rest)
        return f"<b>{html.escape(head)}</b><ul>{items}</ul>"


def _edges(edges: tuple[float, float] | None) -> str:
    return str(list(edges)) if edges is not None else "chosen from the plasma when solved"


# --------------------------------------------------------------------------------------
# Loading
# --------------------------------------------------------------------------------------


def default_case_path() -> Path:
    """Path of the embedded default case, ``kinroots/data/default.toml``."""
    return Path(str(resources.files("kinroots").joinpath("data", "default.toml")))


def load_case(path: str | Path) -> Case:
    """Read, parse and validate a case file.

    Raises
    ------
    CaseError
        The file is missing, unreadable, not UTF-8, not TOML, or not a valid case.
    """
    p = Path(path)
    name = str(p)
    try:
        info = os.stat(p)
        if stat.S_ISDIR(info.st_mode):
            raise IsADirectoryError
        if not stat.S_ISREG(info.st_mode):
            raise CaseError([f"{name}: not a regular file (a device, pipe or socket); "
                             "expected a TOML case file"])
        if info.st_size > MAX_CASE_BYTES:
            raise CaseError([f"{name}: {info.st_size} bytes; expected a TOML case file of "
                             f"at most {MAX_CASE_BYTES} bytes"])
        with open(p, "rb") as fh:
            data = fh.read(MAX_CASE_BYTES + 1)
    except FileNotFoundError:
        raise CaseError([f"{name}: file not found"]) from None
    except IsADirectoryError:
        raise CaseError([f"{name}: is a directory, expected a TOML case file"]) from None
    except PermissionError:
        raise CaseError([f"{name}: cannot read the file (permission denied)"]) from None
    except OSError as exc:
        raise CaseError([f"{name}: cannot read the file ({exc.strerror or exc})"]) from None
    return _with_source(parse_case_bytes(data, name), p)


def parse_case_bytes(data: bytes, name: str) -> Case:
    """Decode, parse and validate the bytes of a case file (e.g. read from stdin).

    ``name`` stands for the file in messages.  The case's ``source`` stays None.

    Raises
    ------
    CaseError
        Too large, not UTF-8, not TOML, or not a valid case.
    """
    if len(data) > MAX_CASE_BYTES:
        raise CaseError([f"{name}: more than {MAX_CASE_BYTES} bytes; expected a TOML "
                         "case file below that size"])
    try:
        text = data.decode("utf-8")
    except UnicodeDecodeError as exc:
        raise CaseError(
            [f"{name}: not UTF-8 text (bad byte at offset {exc.start}); expected a TOML file"]
        ) from None
    try:
        parsed = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise CaseError([f"{name}: not valid TOML: {exc}"]) from None
    except ValueError as exc:  # e.g. an integer beyond Python's int-string limit
        raise CaseError([f"{name}: not usable TOML: {exc}; expected numbers of ordinary "
                         "size"]) from None
    except RecursionError:
        raise CaseError([f"{name}: arrays or tables nested too deeply; expected at most "
                         f"{MAX_DEPTH} levels"]) from None
    return parse_case(parsed, name)


def _with_source(case: Case, path: Path) -> Case:
    return replace(case, source=path)


def plain_data(value: Any) -> Any:
    """``value`` with numpy scalars and arrays, tuples and mappings made plain Python.

    numpy integers become ``int``, floating values ``float``, ``numpy.bool_`` ``bool``,
    arrays and tuples lists, any mapping a ``dict``: what ``tomllib`` would have given
    for the same document, so that a case built in code validates (and hashes, pickles
    and rebuilds in a worker process) like the file it stands for.  Anything else is
    returned unchanged, to be judged by the validation.
    """
    if isinstance(value, Mapping):
        return {k: plain_data(v) for k, v in value.items()}
    if isinstance(value, np.ndarray):
        return plain_data(value.tolist())
    if isinstance(value, list | tuple):
        return [plain_data(v) for v in value]
    if isinstance(value, np.generic):
        return value.item()
    return value


def case_from_dict(mapping: Mapping[str, Any], *, source: str = "case") -> Case:
    """Validate a case given as a mapping with the keys of a case file.

    Parameters
    ----------
    mapping : mapping
        The tables of a case file as nested mappings (``{"species": [...], "wave":
        {...}, "scan": {"k": ...}, "search": {...}}``).  ``title`` is optional (default
        :data:`UNTITLED`).  ``scan.k`` may be a ``{start, stop, points}`` table, one
        number or an increasing array.  numpy scalars and arrays are accepted wherever a
        number or an array is (see :func:`plain_data`).  Without ``search`` (or one of
        its keys) the window is chosen from the plasma when the case is solved
        (:func:`kinroots.study.problem.window_choice`).
    source : str
        Name used in error messages.

    Raises
    ------
    CaseError
        With every problem found (key path, value, expectation).
    """
    if not isinstance(mapping, Mapping):
        raise CaseError([f"{source}: got {type(mapping).__name__}, expected a mapping of "
                         "case keys (a dict)"])
    data = plain_data(mapping)
    data.setdefault("title", UNTITLED)
    return parse_case(data, source)


def _temperature_keys(t_par: float, t_perp: float) -> dict[str, float]:
    if t_par == t_perp:
        return {"temperature": t_par}
    return {"temperature_par": t_par, "temperature_perp": t_perp}


def _species_table(s: Species) -> dict[str, Any]:
    """The ``[[species]]`` table of a `Species` (mass in u unless it is m_e or m_p)."""
    names = {M_ELECTRON: "electron", M_PROTON: "proton"}
    table: dict[str, Any] = {
        "name": s.name, "charge": s.charge_number,
        "mass": names.get(s.mass, s.mass / AMU), "density": s.density,
    }
    if s.components:  # the species' moments follow from its components
        table["components"] = [
            {"weight": c.weight, **_temperature_keys(c.temperature_par, c.temperature_perp),
             "drift": c.drift}
            for c in s.components
        ]
    else:
        table.update(_temperature_keys(s.temperature_par, s.temperature_perp))
        if s.drift:
            table["drift"] = s.drift
    if s.distribution != "maxwellian":
        table["distribution"] = s.distribution
    if s.kappa is not None:
        table["kappa"] = s.kappa
    if s.collision_frequency:
        table["collision_frequency"] = s.collision_frequency
    return table


def case_from_plasma(
    plasma: Plasma,
    *,
    search: Mapping[str, Any] | None = None,
    k: Any = None,
    model: str = "electrostatic",
    angle: float = 0.0,
    units: Mapping[str, str] | None = None,
    solver: Mapping[str, Any] | None = None,
    title: str | None = None,
) -> Case:
    """A case from a `Plasma` built in code.

    Parameters
    ----------
    plasma : Plasma
        Species (SI, temperatures in eV) and B [T].
    search : mapping, optional
        ``{"real": [min, max], "imag": [min, max]}``: the window in normalized ω; without
        it (or a key of it) the window is chosen from the plasma when the case is solved.
    k : float, array or mapping, optional
        ``scan.k``: one number, an increasing array or ``{start, stop, points}``
        (normalized).  Without it the scan is the single value k = 1; ``roots`` and
        ``dispersion`` take their own k, ``solve`` traces across the scan.
    model : str
        ``"electrostatic"`` or ``"electromagnetic"``.
    angle : float
        Angle between k and B (z) [degrees].
    units : mapping, optional
        ``{"frequency": ..., "length": ...}`` as in the ``[units]`` table.
    solver : mapping, optional
        The ``[solver]`` table.
    title : str, optional

    Notes
    -----
    The plasma is written as the ``[[species]]`` tables of a case file (masses equal to
    the electron or proton mass as ``"electron"``/``"proton"``, other masses in atomic
    mass units) and validated like a file, so every check and message is the file's;
    the case rebuilds identically in worker processes from ``Case.raw``.
    """
    data: dict[str, Any] = {
        "title": title if title is not None else UNTITLED,
        "magnetic_field": {"B": plasma.B},
        "species": [_species_table(s) for s in plasma.species],
        "wave": {"model": model, "angle": angle},
        "scan": {"k": 1.0 if k is None else k},
    }
    if search is not None:
        data["search"] = dict(search)
    if units is not None:
        data["units"] = dict(units)
    if solver is not None:
        data["solver"] = dict(solver)
    return case_from_dict(data, source=title or "plasma built in Python")


# --------------------------------------------------------------------------------------
# Validation
# --------------------------------------------------------------------------------------




def _check_unit_spec(
    chk: Checker, value: Any, path: str, kinds: tuple[str, ...], names: list[str] | None
) -> bool:
    expected = " or ".join(f'"{k}:<species>"' for k in kinds)
    if not isinstance(value, str):
        chk.bad(path, value, expected)
        return False
    kind, sep, name = value.partition(":")
    if not sep or kind not in kinds:
        close = difflib.get_close_matches(kind, kinds, n=1, cutoff=0.5)
        hint = f" (did you mean '{close[0]}:{name}'?)" if close and sep else ""
        chk.bad(path, value, expected + hint)
        return False
    if names is None:  # no readable species: reported elsewhere
        return False
    if name not in names:
        close = difflib.get_close_matches(name, names, n=1, cutoff=0.5)
        hint = (
            f"did you mean {close[0]!r}?"
            if close
            else "species: " + ", ".join(repr(n) for n in names)
        )
        chk.error(path, f"got {_show(value)}: unknown species {name!r} ({hint})")
        return False
    return True


def parse_case(data: dict[str, Any], source: str) -> Case:
    """Validate a parsed TOML document and build the `Case`.

    Parameters
    ----------
    data : dict
        The document as returned by ``tomllib``.
    source : str
        Name used in messages (normally the file name).

    Raises
    ------
    CaseError
        With every problem found.
    """
    chk = Checker(source)
    data = plain_data(data)
    if not isinstance(data, dict):
        raise CaseError([f"{source}: expected a TOML document (a table of keys)"])
    if _depth(data) > MAX_DEPTH:
        raise CaseError([f"{source}: arrays or tables nested more than {MAX_DEPTH} levels "
                         "deep; expected a case file (at most a few levels)"])
    chk.unknown_keys(data, _TOP_KEYS, "")

    title = data.get("title")
    if "title" not in data:
        chk.missing("title", "a non-empty string")
    elif not isinstance(title, str) or not title.strip():
        chk.bad("title", title, "a non-empty string")
    elif title_problem(title):
        chk.bad("title", title, f"a printable one-line text ({title_problem(title)})")

    mf = chk.table(data, "magnetic_field", "magnetic_field", required=False) or {}
    chk.unknown_keys(mf, _TABLE_KEYS["magnetic_field"], "magnetic_field")
    B = chk.ranged(mf, "B", "magnetic_field.B", LIMITS["magnetic_field.B"], default=0.0,
                   required=False, note="0: unmagnetized")

    species = _check_species(chk, data)

    wave = chk.table(data, "wave", "wave", required=True) or {}
    chk.unknown_keys(wave, _TABLE_KEYS["wave"], "wave")
    model = chk.choice(wave, "model", "wave.model", _MODELS) if "wave" in data else None
    angle = chk.number(
        wave,
        "angle",
        "wave.angle",
        "a number of degrees in [0, 180]",
        default=0.0,
        required=False,
        check=lambda x: 0 <= x <= 180,
    )

    scan = _check_scan(chk, data)

    # [search] is optional: a missing search.real or search.imag is chosen from the plasma
    # when the case is solved (kinroots.study.problem.window_choice)
    search = chk.table(data, "search", "search", required=False) or {}
    chk.unknown_keys(search, _TABLE_KEYS["search"], "search")
    wlim = LIMITS["search"]
    real = chk.window(search, "real", "search.real", wlim) if "real" in search else None
    imag = chk.window(search, "imag", "search.imag", wlim) if "imag" in search else None

    solver = _check_solver(chk, data)
    launch = _check_launch(chk, data)
    for i, s in enumerate(species, start=1):
        if s is None or not s.collision_frequency > 0:
            continue
        magnetized = B is not None and B != 0.0
        if model == "electromagnetic":
            chk.error(
                f"species[{i}].collision_frequency",
                f"got {s.collision_frequency!r}, but collisions (Krook model) are available "
                "only for the electrostatic model; expected 0 here, or "
                'wave.model = "electrostatic"',
            )
        elif magnetized and s.temperature_par != s.temperature_perp:
            chk.error(
                f"species[{i}].collision_frequency",
                f"got {s.collision_frequency!r}, but with magnetic_field.B != 0 the Krook "
                "model needs an isotropic species (its relaxation target is the isotropic "
                f"Maxwellian); temperature_par = {s.temperature_par!r} and temperature_perp "
                f"= {s.temperature_perp!r} differ; expected 0 here, or one 'temperature'",
            )
        elif other := next((j for j, o in enumerate(species, start=1) if o is not None
                            and (o.distribution == "kappa" or o.components)), None):
            o = species[other - 1]
            assert o is not None
            what = "components" if o.components else 'distribution = "kappa"'
            chk.error(
                f"species[{i}].collision_frequency",
                f"got {s.collision_frequency!r}, but species[{other}] ({o.name!r}) has "
                f"{what}: with collisional species the dispersion function is formed for "
                "Maxwellian species only; expected 0 here, or Maxwellian species throughout",
            )
        elif magnetized and angle is not None and float(angle) == 90.0:
            chk.error(
                f"species[{i}].collision_frequency",
                f"got {s.collision_frequency!r}, but with magnetic_field.B != 0 and "
                "wave.angle = 90 (k_par = 0) the collisional dispersion function has poles "
                "at the shifted harmonics n*Omega - i*nu that the root finder cannot "
                "exclude; expected 0 here, or wave.angle != 90",
            )

    for i, s in enumerate(species, start=1):
        if s is not None and max(s.thermal_speed_par, s.thermal_speed_perp) >= C_LIGHT:
            t_max = 0.5 * s.mass * C_LIGHT**2 / E_CHARGE
            chk.error(f"species[{i}].temperature",
                      f"got T = {max(s.temperature_par, s.temperature_perp):g} eV: thermal "
                      "speed sqrt(2T/m) at or above c, outside the non-relativistic model; "
                      f"expected T < m c^2 / 2 = {t_max:.4g} eV")
        if (s is not None and s.distribution == "kappa" and B is not None and B != 0.0
                and angle is not None and float(angle) not in (0.0, 180.0)):
            chk.error(
                f"species[{i}].distribution",
                f"got \"kappa\" with magnetic_field.B != 0 and wave.angle = {angle!r}; "
                "kappa species in a magnetized plasma are modelled for parallel propagation "
                "only; expected wave.angle = 0 or 180, or B = 0",
            )

    # units: need the species names (validated or not) and B
    units_tab = chk.table(data, "units", "units", required=False) or {}
    chk.unknown_keys(units_tab, _TABLE_KEYS["units"], "units")
    names = (
        [
            e["name"]
            for e in data.get("species", [])
            if isinstance(e, dict) and isinstance(e.get("name"), str)
        ]
        if isinstance(data.get("species"), list)
        else []
    )
    for key, kinds in (("frequency", FREQUENCY_KINDS), ("length", LENGTH_KINDS)):
        if key in units_tab and _check_unit_spec(
            chk, units_tab[key], f"units.{key}", kinds, names or None
        ):
            kind = units_tab[key].partition(":")[0]
            if kind in ("cyclotron", "gyroradius") and B == 0.0:
                chk.error(
                    f"units.{key}",
                    f"got {_show(units_tab[key])}, which needs a magnetic field, but "
                    "magnetic_field.B = 0; expected "
                    + (
                        '"plasma:<species>"'
                        if key == "frequency"
                        else '"debye:<species>" or "inertial:<species>"'
                    ),
                )

    # [sweep] / [threshold]: kinroots.io.study_tables

    sweep_spec, threshold_spec = check_study_tables(chk, data, names)

    if chk.errors:
        raise CaseError(chk.errors)

    assert B is not None and model is not None and angle is not None
    assert scan is not None
    scan_spec, k_values = scan
    plasma = Plasma(tuple(s for s in species if s is not None), B)
    default_name = _default_unit_name(plasma)
    fspec = units_tab.get("frequency", f"plasma:{default_name}")
    lspec = units_tab.get("length", f"debye:{default_name}")
    try:
        units = Normalization(fspec, lspec, plasma)
    except NormalizationError as exc:  # only reachable for degenerate species data
        raise CaseError([f"{source}: units: {exc}"]) from None

    angles = {angle}
    for spec in (sweep_spec, threshold_spec):
        angles.update(getattr(spec, "angles", None) or ())
    if real is not None and imag is not None:  # a chosen window avoids the poles itself
        _check_harmonic_poles(plasma, units, real, imag, angles, float(np.max(k_values)),
                              solver.tolerance, source)
    k_values.setflags(write=False)

    return Case(
        title=str(title).strip(),
        plasma=plasma,
        model=model,
        angle_deg=angle,
        k_values=k_values,
        scan=scan_spec,
        units=units,
        search_real=real,
        search_imag=imag,
        solver=solver,
        source=None,
        raw=data,
        warnings=tuple(_physics_warnings(plasma) + _plausibility_warnings(plasma)),
        launch=launch,
        sweep=sweep_spec,
        threshold=threshold_spec,
    )


def _check_harmonic_poles(plasma: Plasma, units: Normalization, real: tuple[float, float],
                          imag: tuple[float, float], angles: set[float], k_max: float,
                          rtol: float, source: str) -> None:
    """At k∥ = 0 (angle 90°, B ≠ 0) the cyclotron harmonics n Ω_s whose pole matters (its
    residue bound above ``rtol``, :mod:`kinroots.physics.harmonic_poles`) are excluded by
    the survey.  Refuse a window holding more than `MAX_WINDOW_HARMONICS` of them at the
    largest k of the scan (the bound grows with k, so no k of the scan excludes more), or
    whose edge passes through one (to the resolution ``rtol``).  Counted without listing
    the harmonics: time and memory do not depend on the ion mass."""
    if not plasma.magnetized or 90.0 not in angles:
        return
    w_u = units.omega_unit
    k_perp = k_max / units.length_unit
    lo, hi = real[0] * w_u, real[1] * w_u
    total = 0
    for i, s in enumerate(plasma.species, start=1):
        count = relevant_harmonic_count(s, lo, hi, k_perp=k_perp, B=plasma.B, rtol=rtol)
        total += count
        if total > MAX_WINDOW_HARMONICS:
            raise CaseError([
                f"{source}: search.real: got {list(real)!r}, which holds {total} cyclotron "
                f"harmonics at angle 90 degrees (k_par = 0) that are poles of D with a "
                f"residue above solver.tolerance ({count} of species[{i}] {s.name!r} at "
                f"the largest k of the scan); expected at most {MAX_WINDOW_HARMONICS}: "
                "narrow the window, or check that species' density, temperature and mass "
                "and magnetic_field.B"])
        om_c = abs(s.cyclotron_frequency(plasma.B))
        n_top = largest_relevant_harmonic(s, k_perp=k_perp, B=plasma.B, rtol=rtol)
        if n_top == 0 or not om_c > 0:
            continue
        where = f"the cyclotron harmonic n = {{n}} of species[{i}] {s.name!r}"
        if imag[0] <= 0.0 <= imag[1]:
            for key, edge in (("search.real", real[0]), ("search.real", real[1])):
                n = round(edge * w_u / om_c)
                if 1 <= abs(n) <= n_top and abs(edge * w_u - n * om_c) <= rtol * abs(n) * om_c:
                    raise CaseError([
                        f"{source}: {key}: got {list(real)!r}, whose edge {edge!r} passes "
                        f"through {where.format(n=n)} (n*Omega = {n * om_c / w_u!r} "
                        "in the frequency unit), a pole of D at angle 90 degrees (k_par = 0); "
                        "expected window edges off the excluded poles: move that edge"])
        if 0.0 in imag and count > 0:
            raise CaseError([
                f"{source}: search.imag: got {list(imag)!r}, whose edge Im omega = 0 runs "
                f"along the real axis through {count} cyclotron harmonic(s) of species[{i}] "
                f"{s.name!r} inside search.real, poles of D at angle 90 degrees (k_par = 0); "
                "expected an edge off the real axis (e.g. a window straddling it)"])


def _default_unit_name(plasma: Plasma) -> str:
    return default_unit_species(plasma).name


def _check_scan(chk: Checker, data: Mapping[str, Any]
                ) -> tuple[ScanSpec, np.ndarray] | None:
    """``scan.k``: a ``{start, stop, points, spacing}`` table, one number or an array."""
    scan = chk.table(data, "scan", "scan", required=True)
    if scan is None:
        return None
    chk.unknown_keys(scan, _TABLE_KEYS["scan"], "scan")
    expected = ("a table {start, stop, points}, a number > 0 or an increasing array of "
                "numbers > 0 (normalized k)")
    if "k" not in scan:
        chk.missing("scan.k", expected)
        return None
    value = scan["k"]
    if isinstance(value, list | int | float) and not isinstance(value, bool):
        values = value if isinstance(value, list) else [value]
        good = bool(values) and all(
            not isinstance(v, bool) and isinstance(v, int | float) and math.isfinite(v) and v > 0
            for v in values
        )
        if not good:
            chk.bad("scan.k", value, expected)
            return None
        if any(b <= a for a, b in zip(values, values[1:], strict=False)):
            chk.bad("scan.k", value, "k values in increasing order")
            return None
        ks = np.array([float(v) for v in values])
        return ScanSpec(float(ks[0]), float(ks[-1]), len(ks), LISTED), ks
    if not isinstance(value, dict):
        chk.bad("scan.k", value, expected)
        return None
    k = value
    chk.unknown_keys(k, _TABLE_KEYS["scan.k"], "scan.k")
    start = chk.ranged(k, "start", "scan.k.start", LIMITS["scan.k"])
    stop = chk.ranged(k, "stop", "scan.k.stop", LIMITS["scan.k"])
    points = chk.integer(k, "points", "scan.k.points", "an integer >= 1", minimum=1,
                         maximum=MAX_SCAN_POINTS)
    spacing = chk.choice(
        k, "spacing", "scan.k.spacing", _SPACINGS, default="linear", required=False
    )
    if start is not None and stop is not None and not start < stop:
        chk.error("scan.k", f"got start = {start!r}, stop = {stop!r}, expected start < stop")
        return None
    if start is None or stop is None or points is None or spacing is None:
        return None
    return ScanSpec(start, stop, points, spacing), spaced_grid(start, stop, points, spacing)


def _check_launch(chk: Checker, data: Mapping[str, Any]) -> LaunchSpec | None:
    """The optional ``[launch]`` table (driving frequencies in Hz, complex-k box)."""
    tab = chk.table(data, "launch", "launch", required=False)
    if tab is None:
        return None
    chk.unknown_keys(tab, _TABLE_KEYS["launch"], "launch")
    expected = (
        "a table { start = ..., stop = ..., points = ... } in Hz, or an array of "
        "frequencies > 0 in Hz"
    )
    freqs: list[float] | None = None
    if "frequency" not in tab:
        chk.missing("launch.frequency", expected)
    elif isinstance(tab["frequency"], list):
        values = tab["frequency"]
        good = values and len(values) <= MAX_LAUNCH_POINTS and all(
            not isinstance(v, bool) and isinstance(v, int | float)
            and LIMITS["launch.frequency"](finite_float(v) or 0.0)
            for v in values
        )
        if not good:
            chk.bad("launch.frequency", values, expected)
        elif any(b <= a for a, b in zip(values, values[1:], strict=False)):
            chk.bad("launch.frequency", values, "frequencies in increasing order")
        else:
            freqs = [float(v) for v in values]
    elif isinstance(tab["frequency"], dict):
        f = tab["frequency"]
        p = "launch.frequency"
        chk.unknown_keys(f, _TABLE_KEYS["launch.frequency"], p)
        start = chk.ranged(f, "start", f"{p}.start", LIMITS["launch.frequency"])
        stop = chk.ranged(f, "stop", f"{p}.stop", LIMITS["launch.frequency"])
        points = chk.integer(f, "points", f"{p}.points", "an integer >= 1", minimum=1,
                             maximum=MAX_LAUNCH_POINTS)
        spacing = chk.choice(f, "spacing", f"{p}.spacing", _SPACINGS, default="linear",
                             required=False)
        if start is not None and stop is not None and points is not None and spacing:
            if points > 1 and not start < stop:
                chk.error(p, f"got start = {start!r}, stop = {stop!r}, expected start < stop")
            else:
                freqs = [float(x) for x in spaced_grid(start, stop, points, spacing)]
    else:
        chk.bad("launch.frequency", tab["frequency"], expected)
    boxes = []
    for key, default in (("k_real", (0.01, 2.0)), ("k_imag", (-0.01, 0.5))):
        boxes.append(chk.window(tab, key, f"launch.{key}", LIMITS["launch.k"])
                     if key in tab else default)
    if boxes[0] is not None and boxes[0][0] <= 0:
        chk.error("launch.k_real", f"got {list(boxes[0])!r}, expected 0 < min < max "
                  "(the spatial search box lies in Re k > 0)")
        return None
    if freqs is None or boxes[0] is None or boxes[1] is None:
        return None
    return LaunchSpec(tuple(freqs), boxes[0], boxes[1])


def _check_solver(chk: Checker, data: Mapping[str, Any]) -> SolverOptions:
    tab = chk.table(data, "solver", "solver", required=False) or {}
    chk.unknown_keys(tab, _TABLE_KEYS["solver"], "solver")
    d = SolverOptions()
    tol = chk.ranged(tab, "tolerance", "solver.tolerance", LIMITS["solver.tolerance"],
                     default=d.tolerance, required=False, note="relative, on omega")
    htol = chk.ranged(tab, "harmonic_tolerance", "solver.harmonic_tolerance",
                      LIMITS["solver.harmonic_tolerance"], default=d.harmonic_tolerance,
                      required=False)
    every = chk.integer(
        tab,
        "resurvey_every",
        "solver.resurvey_every",
        "an integer >= 0 (0: never re-survey)",
        minimum=0,
        maximum=MAX_SCAN_POINTS,
        default=d.resurvey_every,
        required=False,
    )
    return SolverOptions(
        tolerance=d.tolerance if tol is None else tol,
        harmonic_tolerance=d.harmonic_tolerance if htol is None else htol,
        resurvey_every=d.resurvey_every if every is None else every,
    )


def _depth(node: Any, level: int = 0) -> int:
    """Nesting depth of tables and arrays (stops counting past `MAX_DEPTH`)."""
    if level > MAX_DEPTH or not isinstance(node, dict | list):
        return level
    children = node.values() if isinstance(node, dict) else node
    return max((_depth(c, level + 1) for c in children), default=level + 1)


def _plausibility_warnings(plasma: Plasma) -> list[str]:
    """Values inside the hard limits but outside `PLAUSIBLE` (physically unusual)."""
    out: list[str] = []
    if not PLAUSIBLE["magnetic_field.B"](plasma.B):
        out.append(f"magnetic_field.B = {plasma.B:g} T is outside the usual range "
                   f"{PLAUSIBLE['magnetic_field.B'].expected()}; check the unit (tesla)")
    for s in plasma.species:
        amu = s.mass / AMU
        for key, value, unit in (("mass", amu, "u"), ("density", s.density, "m^-3"),
                                 ("temperature", s.temperature_par, "eV"),
                                 ("temperature", s.temperature_perp, "eV")):
            r = PLAUSIBLE[f"species.{key}"]
            if not r(value):
                out.append(f"species {s.name!r}: {key} {value:g} {unit} is outside the usual "
                           f"range {r.expected()}; check the unit")
                break
    return out


def _physics_warnings(plasma: Plasma) -> list[str]:
    """Quasi-neutrality, zero net current and non-relativistic speeds (returned as data)."""
    out: list[str] = []
    charge = sum(s.charge_number * s.density for s in plasma.species)
    scale = sum(abs(s.charge_number) * s.density for s in plasma.species)
    if abs(charge) > NEUTRALITY_RTOL * scale:
        out.append(
            "not quasi-neutral: Σ Z_s n_s = "
            f"{charge:.6g} m^-3, {abs(charge) / scale:.3g} of Σ |Z_s| n_s "
            f"(tolerance {NEUTRALITY_RTOL:g})"
        )
    current = sum(s.charge_number * s.density * s.drift for s in plasma.species)
    cscale = sum(abs(s.charge_number) * s.density * abs(s.drift) for s in plasma.species)
    if cscale > 0 and abs(current) > NEUTRALITY_RTOL * cscale:
        out.append(
            "net current along z: Σ q_s n_s V_s = "
            f"{current * E_CHARGE:.6g} A/m^2, {abs(current) / cscale:.3g} of "
            f"Σ |q_s| n_s |V_s| (tolerance {NEUTRALITY_RTOL:g})"
        )
    for s in plasma.species:
        fastest = max(s.thermal_speed_par, s.thermal_speed_perp, abs(s.drift))
        if fastest > RELATIVISTIC_WARNING * C_LIGHT:
            out.append(
                f"species {s.name!r}: speed {fastest / C_LIGHT:.3g} c (thermal or drift); "
                "the model is non-relativistic"
            )
    return out
