"""Commands about the case itself: ``version``, ``check`` and ``plasma``."""

from __future__ import annotations

import json
from pathlib import Path
from typing import TYPE_CHECKING, Annotated, Any

import typer
from rich.console import Console
from rich.table import Table

import kinroots
from kinroots.cli._common import (
    CaseArg,
    DefaultOpt,
    announce_window,
    case_summary,
    err,
    info,
    load_case_or_exit,
    stderr_console,
)

if TYPE_CHECKING:
    from kinroots.io.case import Case


def version() -> None:
    """Print the kinroots version.

    Example: kinroots version
    """
    typer.echo(kinroots.__version__)


def check(case: CaseArg = None, default: DefaultOpt = False) -> None:
    """Validate a case file; print "ok" and a one-line summary, or every problem found;
    then try the window: D on its edges at the scan's first and last k.

    The try counts the window's zeros from the phase of D along its edges and warns (on
    stderr; the exit code stays 0) when the survey would be costly or impossible: D not
    finite on an edge, a pole on or next to an edge, many zeros or a fast phase turn.
    A [launch] table's k box is tried at its first and last frequency too.

    Exit code 0 when the case is usable (warnings go to stderr), 2 otherwise.

    Example: kinroots check cases/argon_ion_acoustic.toml
    """
    loaded = load_case_or_exit(case, default)
    typer.echo("ok")
    typer.echo(case_summary(loaded))
    _try_window(loaded, case)


def _try_window(loaded: Case, case: Path | None) -> None:
    """Evaluate D on the window's edges at the scan's first and last k (and the launch k
    box at the first and last frequency): one line on stdout, warnings on stderr."""
    import time

    from kinroots.study.probe import WindowProbe, probe_launch, probe_window

    name = "the default case" if case is None else str(case)
    announce_window(loaded, stderr_console())  # a window chosen from the plasma: said
    start = time.perf_counter()
    probes: list[tuple[str, WindowProbe]] = [("window", probe_window(loaded))]
    spatial = probe_launch(loaded)
    if spatial is not None:
        probes.append(("launch k box", spatial))
    seconds = time.perf_counter() - start
    parts = []
    for what, p in probes:
        counts = ", ".join(f"{n if n is not None else 'not counted'} at {where}"
                           for where, n in p.counts.items())
        symbol = "ω" if p.variable == "omega" else "k"
        parts.append(f"{what} {_box_text(p.box, symbol)}: zeros by the boundary winding "
                     f"{counts}")
    evaluations = sum(p.evaluations for _, p in probes)
    typer.echo("; ".join(parts) + f" ({evaluations} evaluations, {seconds:.2g} s)")
    for what, p in probes:
        for f in p.findings:
            line = f"{what} at {', '.join(f.where)}: {f.text}"
            if f.level == "warning":
                err(f"warning: {name}: {line}")
            else:
                info(f"note: {line}")


def _box_text(box: tuple[float, float, float, float], symbol: str) -> str:
    return (f"Re {symbol} [{box[0]:.6g}, {box[1]:.6g}] × Im {symbol} "
            f"[{box[2]:.6g}, {box[3]:.6g}]")


def _fmt(value: float | None) -> str:
    return "—" if value is None else f"{value:.6g}"


def _quantity_table(
    title: str,
    si: dict[str, float | None],
    normalized: dict[str, float | None],
    layout: dict[str, tuple[str, str, str]],
    case: Case,
) -> Table:
    unit_of = {
        "frequency": case.units.frequency_label,
        "length": case.units.length_label,
        "speed": case.units.speed_label,
        "none": "",
    }
    table = Table(title=title, title_justify="left")
    table.add_column("quantity")
    table.add_column("SI", justify="right")
    table.add_column("unit")
    table.add_column("normalized", justify="right")
    table.add_column("unit")
    for key, (kind, symbol, si_unit) in layout.items():
        value = si[key]
        if value is None and key == "kappa_debye_length":
            continue  # not a kappa species
        unit = si_unit
        shown = _fmt(value)
        if kind == "frequency" and value is not None:
            shown += f" ({abs(value) / (2 * 3.141592653589793):.4g} Hz)"
        table.add_row(symbol, shown, unit, _fmt(normalized[key]), unit_of[kind])
    return table


def plasma(
    case: CaseArg = None,
    as_json: Annotated[
        bool, typer.Option("--json", help="Print JSON with stable keys instead of tables.")
    ] = False,
    default: DefaultOpt = False,
) -> None:
    """Characteristic frequencies, lengths, speeds and betas of a case's plasma.

    Quantities that need a magnetic field are shown as "—" (null in JSON) when B = 0.

    Example: kinroots plasma cases/space_protons_alphas.toml --json
    """
    from kinroots.physics.plasma import (
        PLASMA_QUANTITIES,
        SPECIES_QUANTITIES,
        derived_quantities,
    )

    loaded = load_case_or_exit(case, default)
    data = derived_quantities(loaded.plasma, loaded.units)
    if as_json:
        out: dict[str, Any] = {
            "kinroots_version": kinroots.__version__,
            "title": loaded.title,
            "source": None if loaded.source is None else str(loaded.source),
            **data,
        }
        typer.echo(json.dumps(out, indent=2, ensure_ascii=False, allow_nan=False))
        return
    console = Console(highlight=False, markup=False)  # names and titles are user text
    u = loaded.units
    console.print(loaded.title, markup=False)
    console.print(
        f"B = {loaded.plasma.B:g} T; normalized units: frequency {u.frequency_label} = "
        f"{u.omega_unit:.6g} rad/s, length {u.length_label} = {u.length_unit:.6g} m, "
        f"speed {u.speed_label} = {u.speed_unit:.6g} m/s",
        markup=False,
    )
    for entry in data["species"]:
        title = (
            f"species {entry['name']}: Z = {entry['charge_number']:g}, "
            f"m = {entry['mass_kg']:.6g} kg, n = {entry['density_per_m3']:.6g} m^-3, "
            f"T∥ = {entry['temperature_par_eV']:g} eV, T⊥ = {entry['temperature_perp_eV']:g} eV, "
            f"drift = {entry['drift_m_per_s']:g} m/s"
        )
        if entry["distribution"] == "kappa":
            title += f", kappa = {entry['kappa']:g}"
        if entry["components"]:
            title += f" ({len(entry['components'])} components; T and drift are moments)"
        console.print(
            _quantity_table(
                title,
                entry["si"],
                entry["normalized"],
                SPECIES_QUANTITIES,
                loaded,
            )
        )
    p = data["plasma"]
    console.print(
        _quantity_table("whole plasma", p["si"], p["normalized"], PLASMA_QUANTITIES, loaded)
    )




def register(app: typer.Typer) -> None:
    """Add ``version``, ``check`` and ``plasma`` to ``app``."""
    app.command("version")(version)
    app.command("check")(check)
    app.command("plasma")(plasma)
