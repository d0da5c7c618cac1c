"""Command line: typer parses, rich displays; the library does the work.

Every command that reads a case goes through `load_case_or_exit`, which picks the
embedded default case when no file is given, prints every validation error (one per line,
on stderr) and exits with code 2 on bad input, and prints the case's warnings on stderr.
Data go to stdout; messages to stderr.
"""

from __future__ import annotations

import json
from pathlib import Path
from typing import Annotated, Any

import typer
from rich.console import Console
from rich.table import Table

from kinroots import __version__
from kinroots.casefile import Case, CaseError, default_case_path, load_case
from kinroots.plasma import PLASMA_QUANTITIES, SPECIES_QUANTITIES, derived_quantities

#: Exit code for bad input (see DESIGN.md, "User-facing contract").
EXIT_BAD_INPUT = 2

app = typer.Typer(
    name="kinroots",
    help="Roots of the linear Vlasov dispersion relation of multi-species plasmas.",
    no_args_is_help=True,
    add_completion=False,
)

CaseArg = Annotated[
    Path | None,
    typer.Argument(
        help="Case file (TOML). Omit it to use the embedded default case.",
        show_default=False,
        dir_okay=True,
        exists=False,
    ),
]
DefaultOpt = Annotated[
    bool,
    typer.Option("--default", help="Use the embedded default case (instead of CASE)."),
]


def _err(message: str) -> None:
    typer.echo(message, err=True)


def load_case_or_exit(case: Path | None, use_default: bool = False) -> Case:
    """Load ``case`` (or the embedded default), print its warnings; exit 2 on bad input.

    Parameters
    ----------
    case : Path or None
        Case file; ``None`` selects the embedded default case (said on stderr).
    use_default : bool
        ``--default`` given: must not be combined with a case file.
    """
    if use_default and case is not None:
        _err(f"kinroots: give either a case file or --default, not both (got {case})")
        raise typer.Exit(EXIT_BAD_INPUT)
    if case is None:
        case = default_case_path()
        _err(f"kinroots: no case file given; using the embedded default case ({case})")
    try:
        loaded = load_case(case)
    except CaseError as exc:
        for line in exc.errors:
            _err(f"error: {line}")
        n = len(exc.errors)
        _err(f"kinroots: {n} problem{'s' if n != 1 else ''} in {case}; nothing done")
        raise typer.Exit(EXIT_BAD_INPUT) from None
    for line in loaded.warnings:
        _err(f"warning: {case}: {line}")
    return loaded


def case_summary(case: Case) -> str:
    """One line: title, species, model, B, angle and the k scan."""
    ks = case.scan
    n = len(case.plasma.species)
    return (
        f'"{case.title}": {n} species, {case.model}, B = {case.plasma.B:g} T, '
        f"angle {case.angle_deg:g}°, k = {ks.start:g} to {ks.stop:g} "
        f"/{case.units.length_label} ({ks.points} points, {ks.spacing})"
    )


@app.command()
def version() -> None:
    """Print the kinroots version.

    Example: kinroots version
    """
    typer.echo(__version__)


@app.command()
def check(case: CaseArg = None, default: DefaultOpt = False) -> None:
    """Validate a case file; print "ok" and a one-line summary, or every problem found.

    Exit code 0 when the case is usable (warnings go to stderr), 2 otherwise.

    Example: kinroots check cases/argon_ion_acoustic.toml
    """
    loaded = load_case_or_exit(case, default)
    typer.echo("ok")
    typer.echo(case_summary(loaded))


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
        unit = si_unit
        shown = _fmt(value)
        if kind == "frequency" and value is not None:
            shown += f" ({abs(value) / (2 * 3.141592653589793):.4g} Hz)"
        table.add_row(symbol, shown, unit, _fmt(normalized[key]), unit_of[kind])
    return table


@app.command()
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
    loaded = load_case_or_exit(case, default)
    data = derived_quantities(loaded.plasma, loaded.units)
    if as_json:
        out: dict[str, Any] = {
            "kinroots_version": __version__,
            "title": loaded.title,
            "source": None if loaded.source is None else str(loaded.source),
            **data,
        }
        typer.echo(json.dumps(out, indent=2, ensure_ascii=False, allow_nan=False))
        return
    console = Console(highlight=False)
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
        console.print(
            _quantity_table(
                title.replace("[", "\\["),
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


# ----------------------------------------------------------------- solve and roots

OutOpt = Annotated[
    Path,
    typer.Option("--output", "-o", help="Folder for the tables and the figure (created).",
                 file_okay=False),
]


def _check_output_dir(out: Path) -> None:
    """Refuse an output path that exists and is not a folder (before any work)."""
    if out.exists() and not out.is_dir():
        _err(f"error: output {out}: exists and is not a folder; expected a folder path")
        raise typer.Exit(EXIT_BAD_INPUT)


def _describe_root(row: dict[str, Any] | None, case: Case) -> str:
    if row is None:
        return "none"
    from kinroots.scan import GROWTH_RESOLUTION

    lbl = case.units.frequency_label
    w = complex(row["omega_real"], row["omega_imag"])
    floor = GROWTH_RESOLUTION * case.solver.tolerance * abs(w)
    if abs(w.imag) <= floor:
        return (
            f"branch {row['branch']} at k = {row['k']:.4g}: ω = {w.real:.6g} {lbl}, "
            f"|γ| < {floor:.1g} {lbl} (below the root tolerance; f = {row['freq_hz']:.4g} Hz)"
        )
    return (
        f"branch {row['branch']} at k = {row['k']:.4g}: ω = {w.real:.6g} "
        f"{'+' if w.imag >= 0 else '−'} {abs(w.imag):.4g}i {lbl} "
        f"(f = {row['freq_hz']:.4g} Hz, γ = {row['gamma_per_s']:.4g} 1/s)"
    )


@app.command()
def solve(
    case: CaseArg = None,
    output: OutOpt = Path("kinroots-out"),
    default: DefaultOpt = False,
) -> None:
    """Find every root in the search window at the first k and trace each branch across
    the scan; write branches.csv, summary.json and branches.png to the output folder.

    Exit code 0 when every point converged, 1 when some points failed (they are flagged
    in the table: converged = false, value cells empty), 2 on bad input.

    Example: kinroots solve cases/hydrogen_cold_ions.toml -o out/hydrogen
    """
    from rich.progress import BarColumn, Progress, TextColumn, TimeElapsedColumn

    from kinroots import scan
    from kinroots.plot import BranchCurve, plot_branches
    from kinroots.tables import write_csv, write_json

    loaded = load_case_or_exit(case, default)
    _check_output_dir(output)
    console = Console(stderr=True)
    with Progress(
        TextColumn("[bold]tracing[/bold] {task.description}"), BarColumn(),
        TextColumn("{task.completed}/{task.total} k"), TimeElapsedColumn(),
        console=console, transient=True,
    ) as bar:
        task = bar.add_task(loaded.title, total=len(loaded.k_values))
        sol = scan.solve(loaded, progress=lambda done, total: bar.update(task, completed=done))
    rows = scan.branch_rows(sol)
    summary = scan.solution_summary(sol, rows)
    write_csv(output / "branches.csv", rows)
    write_json(output / "summary.json", summary)
    curves = []
    for b in sol.branches:
        pts = b.sorted_points()
        curves.append(BranchCurve(
            label=f"branch {b.id}",
            k=[k for k, _ in pts],
            omega=[r.value if r.converged else complex("nan") for _, r in pts],
        ))
    units = loaded.units
    plot_branches(output / "branches.png", curves, k_label=units.length_label,
                  omega_label=units.frequency_label, title=loaded.title,
                  growth_floor=scan.GROWTH_RESOLUTION * loaded.solver.tolerance)
    console.print(f"{len(sol.branches)} branch(es) traced over {len(loaded.k_values)} k "
                  f"points; {sol.evaluations} dispersion evaluations")
    console.print(f"fastest growing: {_describe_root(summary['fastest_growing'], loaded)}")
    console.print(f"least damped:    {_describe_root(summary['least_damped'], loaded)}")
    for note in sol.notes:
        console.print(f"note: {note}")
    console.print(f"wrote {output / 'branches.csv'}, {output / 'summary.json'}, "
                  f"{output / 'branches.png'}")
    if sol.failed_points:
        console.print(f"[red]{sol.failed_points} point(s) failed[/red]: flagged in the table "
                      "(converged = false) and in summary.json")
        raise typer.Exit(1)


@app.command()
def roots(
    case: CaseArg = None,
    at: Annotated[float, typer.Option("--at", help="Normalized wavenumber k (units of the "
                                      "case's [units] length).")] = float("nan"),
    output: OutOpt = Path("kinroots-out"),
    default: DefaultOpt = False,
) -> None:
    """Every root in the search window at one wavenumber; write roots.csv, summary.json
    and map.png (log|D| over the window, roots marked).

    Exit code 0 when the survey is complete, 1 when some root could not be isolated or
    polished (flagged in the table), 2 on bad input.

    Example: kinroots roots cases/argon_ion_acoustic.toml --at 0.5 -o out/argon
    """
    import math

    from kinroots import scan
    from kinroots.plot import plot_root_map
    from kinroots.tables import write_csv, write_json

    loaded = load_case_or_exit(case, default)
    if math.isnan(at):
        at = float(loaded.k_values[0])
        _err(f"kinroots: no --at given; using the first scan point k = {at:g}")
    if not (math.isfinite(at) and at > 0):
        _err(f"error: option --at: {at!r}: expected a finite wavenumber > 0")
        raise typer.Exit(EXIT_BAD_INPUT)
    _check_output_dir(output)
    console = Console(stderr=True)
    with console.status(f"surveying the window at k = {at:g}"):
        s = scan.survey(loaded, at)
    rows = [scan.root_row(loaded, i, at, r) for i, r in enumerate(s.roots)]
    if not s.complete:
        rows.append({"branch": "", "k": at, "converged": False, "verified": False,
                     "k_per_m": float(loaded.units.k_to_si(at)), "status": "incomplete",
                     "reason": f"counted {s.count} zeros, found {len(s.values)}: "
                               + "; ".join(s.notes)})
    f = scan.function_at(loaded, at)
    summary = scan.metadata(loaded, rows=rows, extra={
        "model": loaded.model,
        "k": at,
        "dispersion_scaling": f.dispersion.scaling,
        "window": list(scan.window(loaded)),
        "window_used": list(s.box),
        "count": s.count,
        "complete": s.complete,
        "evaluations": s.evaluations,
        "notes": list(s.notes),
        "harmonics": f.dispersion.harmonics,
    })
    write_csv(output / "roots.csv", rows)
    write_json(output / "summary.json", summary)
    plot_root_map(output / "map.png", f.value, scan.window(loaded), list(s.values),
                  omega_label=loaded.units.frequency_label,
                  title=f"{loaded.title}: k = {at:g} /{loaded.units.length_label}")
    for r in rows:
        if r.get("converged"):
            console.print(_describe_root(r, loaded))
    console.print(f"{len(s.values)} root(s) in the window (argument principle: {s.count}); "
                  f"{s.evaluations} evaluations; wrote {output / 'roots.csv'}, "
                  f"{output / 'summary.json'}, {output / 'map.png'}")
    if not s.complete:
        console.print("[red]survey incomplete[/red]: " + "; ".join(s.notes))
        raise typer.Exit(1)


def _register_extensions() -> None:
    """Commands defined in sibling modules (each has ``register(app)``)."""
    import importlib

    for name in ("kinroots.cli_sweep", "kinroots.cli_lab"):
        try:
            mod = importlib.import_module(name)
        except ModuleNotFoundError as exc:
            if exc.name == name:
                continue
            raise
        mod.register(app)


_register_extensions()
