"""The main job: ``solve`` (trace every branch across k) and ``roots`` (all roots at one k)."""

from __future__ import annotations

from pathlib import Path
from typing import TYPE_CHECKING, Annotated, Any

import typer
from rich.markup import escape

from kinroots.cli._common import (
    EXIT_BAD_INPUT,
    EXIT_INTERRUPTED,
    CaseArg,
    CtrlC,
    DefaultOpt,
    FigureFormat,
    FigureFormatOpt,
    NoPlotOpt,
    OutOpt,
    announce_window,
    check_output_dir,
    err,
    figure_path,
    load_case_or_exit,
    stderr_console,
    stdout_console,
    written,
)

if TYPE_CHECKING:
    from kinroots.io.case import Case


def _describe_root(row: dict[str, Any] | None, case: Case) -> str:
    if row is None:
        return "none"
    from kinroots.study.rows import GROWTH_RESOLUTION

    lbl = case.units.frequency_label
    w = complex(row["omega_real"], row["omega_imag"])
    floor = GROWTH_RESOLUTION * case.solver.tolerance * abs(w)
    if abs(w.real) <= floor:  # purely growing or damped: ω_r is rounding noise
        return (
            f"branch {row['branch']} at k = {row['k']:.4g}: ω = {w.imag:.6g}i {lbl}, "
            f"|ω_r| < {floor:.1g} {lbl} (purely {'growing' if w.imag > 0 else 'damped'}; "
            f"γ = {row['gamma_per_s']:.4g} 1/s)"
        )
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


def solve(
    case: CaseArg = None,
    output: OutOpt = Path("kinroots-out"),
    default: DefaultOpt = False,
    figure_format: FigureFormatOpt = FigureFormat.png,
    no_plot: NoPlotOpt = False,
) -> None:
    """Find every root in the search window at the first k and trace each branch across
    the scan; write branches.csv, summary.json and branches.png to the output folder.

    Exit code 0 when every point converged, 1 when some points failed (they are flagged
    in the table: converged = false, value cells empty), 2 on bad input.

    Example: kinroots solve cases/hydrogen_cold_ions.toml -o out/hydrogen
    """
    from rich.progress import BarColumn, Progress, TextColumn, TimeElapsedColumn

    from kinroots.cli._common import table_units
    from kinroots.io.tables import OutputSet, root_table_columns, write_csv, write_json, write_units
    from kinroots.study.rows import GROWTH_RESOLUTION, branch_rows
    from kinroots.study.solve import solution_summary
    from kinroots.study.solve import solve as solve_case

    loaded = load_case_or_exit(case, default)
    check_output_dir(output)
    console = stderr_console()
    results = stdout_console()  # results on stdout, diagnostics on stderr
    announce_window(loaded, console)
    with CtrlC() as stop, Progress(
        TextColumn("[bold]tracing[/bold] {task.description}"), BarColumn(),
        TextColumn("{task.completed}/{task.total} k"), TimeElapsedColumn(),
        console=console, transient=True,
    ) as bar:
        task = bar.add_task(escape(loaded.title), total=len(loaded.k_values))
        sol = solve_case(loaded, progress=lambda done, total: bar.update(task, completed=done),
                         should_stop=stop)
    rows = branch_rows(sol)
    summary = solution_summary(sol, rows)
    out = OutputSet(output, "solve")
    write_csv(out.stage("branches.csv"), rows)
    write_units(out.stage("branches.units.csv"), table_units(loaded, root_table_columns(rows)))
    write_json(out.stage("summary.json"), summary)
    fig_path = figure_path(output, "branches", figure_format, no_plot)
    if fig_path is not None:
        from kinroots.plots.branches import curves_from_rows, plot_branches

        units = loaded.units
        plot_branches(curves_from_rows(rows), k_label=units.length_label,
                      omega_label=units.frequency_label, title=loaded.title,
                      growth_floor=GROWTH_RESOLUTION * loaded.solver.tolerance,
                      k_unit_per_m=float(units.k_to_si(1.0)),
                      omega_unit_rad_per_s=float(units.omega_to_si(1.0)),
                      path=out.stage(fig_path.name))
    out.commit()
    results.print(f"{len(sol.branches)} branch(es) traced over {len(loaded.k_values)} k "
                  f"points; {sol.evaluations} dispersion evaluations")
    results.print(f"fastest growing: {_describe_root(summary['fastest_growing'], loaded)}")
    results.print(f"least damped:    {_describe_root(summary['least_damped'], loaded)}")
    for note in sol.notes:
        console.print(f"note: {note}")
    if not rows:
        results.print(summary["notes"][-1])
    results.print(written(output / "branches.csv", output / "summary.json", fig_path))
    if sol.interrupted:
        console.print("interrupted: the tables hold the scan points done before Ctrl-C "
                      "(summary.json: interrupted = true)", style="red")
        raise typer.Exit(EXIT_INTERRUPTED)
    if sol.failed_points or sol.unverified_points:
        where = ("flagged in the table (converged = false) and in summary.json" if rows else
                 "no root was found at any k, so branches.csv holds only its header; "
                 "summary.json (point_checks, notes) and the notes above say why")
        console.print(f"{sol.failed_points} point(s) failed, {sol.unverified_points} of "
                      f"{len(loaded.k_values)} k not verified by a zero count: {where}",
                      style="red")
        raise typer.Exit(1)


def _nothing_at(s: Any, k: float) -> str:
    """The note of a ``roots`` run whose table is empty."""
    if s.complete and s.count == 0:
        return (f"no root in the search window at k = {k:g}: the zero count on its "
                "boundary is 0, so the window holds none; a wider one (search.real, "
                "search.imag) may")
    return (f"no root found in the search window at k = {k:g}: the survey was "
            "incomplete (the notes say why)")


def roots(
    case: CaseArg = None,
    at: Annotated[float | None, typer.Option("--at", help="Normalized wavenumber k (units "
                                             "of the case's [units] length); without it, "
                                             "the first k of the case's scan.")] = None,
    output: OutOpt = Path("kinroots-out"),
    default: DefaultOpt = False,
    figure_format: FigureFormatOpt = FigureFormat.png,
    no_plot: NoPlotOpt = False,
) -> None:
    """Every root in the search window at one wavenumber; write roots.csv, summary.json
    and map.png (log|D| over the window, roots marked).

    Exit code 0 when the survey is complete, 1 when some root could not be isolated or
    polished (flagged in the table), 2 on bad input.

    Example: kinroots roots cases/argon_ion_acoustic.toml --at 0.5 -o out/argon
    """
    import math

    from kinroots.cli._common import table_units
    from kinroots.io.tables import OutputSet, root_table_columns, write_csv, write_json, write_units
    from kinroots.study.problem import function_at, survey, window
    from kinroots.study.rows import metadata, survey_rows

    loaded = load_case_or_exit(case, default)
    if at is None:
        at = float(loaded.k_values[0])
        err(f"kinroots: no --at given; using the first scan point k = {at:g}")
    from kinroots.io.limits import LIMITS

    if not (math.isfinite(at) and LIMITS["scan.k"](at)):
        err(f"error: option --at: {at!r}: expected a wavenumber, "
            f"{LIMITS['scan.k'].expected()}")
        raise typer.Exit(EXIT_BAD_INPUT)
    check_output_dir(output)
    console = stderr_console()
    results = stdout_console()  # results on stdout, diagnostics on stderr
    announce_window(loaded, console)
    with console.status(f"surveying the window at k = {at:g}"):
        s = survey(loaded, at)
    rows = survey_rows(loaded, at, s)
    f = function_at(loaded, at)
    summary = metadata(loaded, rows=rows, extra={
        "model": loaded.model,
        "k": at,
        "dispersion_scaling": f.dispersion.scaling,
        "window": list(window(loaded)),
        "window_used": list(s.box),
        "count": s.count,
        "complete": s.complete,
        "evaluations": s.evaluations,
        "notes": list(s.notes) + ([] if rows else [_nothing_at(s, at)]),
        "harmonics": f.dispersion.harmonics,
    })
    out = OutputSet(output, "roots")
    write_csv(out.stage("roots.csv"), rows)
    write_units(out.stage("roots.units.csv"), table_units(loaded, root_table_columns(rows)))
    write_json(out.stage("summary.json"), summary)
    fig_path = figure_path(output, "map", figure_format, no_plot)
    if fig_path is not None:
        from kinroots.plots.branches import plot_root_map

        ok = [r for r in rows if r.get("converged")]
        plot_root_map(f.value, window(loaded),
                      [complex(r["omega_real"], r["omega_imag"]) for r in ok],
                      verified=[bool(r["verified"]) for r in ok],
                      used=s.box, excluded=f.excluded(s.box),
                      omega_label=loaded.units.frequency_label,
                      title=f"{loaded.title}: k = {at:g} /{loaded.units.length_label}",
                      path=out.stage(fig_path.name))
    out.commit()
    for r in rows:
        if r.get("converged"):
            results.print(_describe_root(r, loaded))
    if not rows:
        results.print(summary["notes"][-1])
    results.print(f"{len(s.values)} root(s) in the window ({s.count_text} by the argument "
                  "principle); "
                  f"{s.evaluations} evaluations; "
                  + written(output / "roots.csv", output / "summary.json", fig_path))
    if not s.complete:
        console.print("survey incomplete: " + "; ".join(s.notes), style="red")
        raise typer.Exit(1)




def register(app: typer.Typer) -> None:
    """Add ``solve`` and ``roots`` to ``app``."""
    app.command("solve")(solve)
    app.command("roots")(roots)
