"""Commands ``kinroots sweep`` and ``kinroots threshold`` (registered by kinroots.cli).

Both commit every finished point to ``DIR/points.sqlite`` as it completes; running the
same command again resumes (finished points are skipped); a changed case is refused
(exit 2).  Tables and figures are written atomically once every point is done.
"""

from __future__ import annotations

import math
from pathlib import Path
from typing import TYPE_CHECKING, Annotated, Any

import typer
from rich.markup import escape

from kinroots.cli._common import (
    EXIT_BAD_INPUT,
    CaseArg,
    DefaultOpt,
    FigureFormat,
    FigureFormatOpt,
    NoPlotOpt,
    announce_window,
    check_output_dir,
    figure_path,
    info,
    load_case_or_exit,
    stderr_console,
    stdout_console,
    table_units,
    written,
)

if TYPE_CHECKING:
    from kinroots.io.case import Case

__all__ = ["register"]

OutOpt = Annotated[Path, typer.Option("--output", "-o", help="Folder for tables, figures "
                                      "and the points database (created).", file_okay=False)]
WorkersOpt = Annotated[int, typer.Option("--workers", min=0, help="Local worker processes "
                                         "(0: one per core; 1: this process only).")]
SchedulerOpt = Annotated[str | None, typer.Option(
    "--scheduler", help="Address of a running Dask distributed scheduler "
    "(e.g. tcp://10.0.0.5:8786); the points run there instead of locally.")]


def _err(message: str) -> None:
    typer.echo(message, err=True)


def _prepare(case: Path | None, default: bool, output: Path, table: str) -> Case:
    loaded = load_case_or_exit(case, default)
    src = str(loaded.source) if loaded.source else "case"
    if getattr(loaded, table) is None:
        _err(f"error: {src}: {table}: missing; expected a [{table}] table "
             f"(see kinroots {table} --help)")
        raise typer.Exit(EXIT_BAD_INPUT)
    from kinroots.study.sweep import check_ranges

    errors = check_ranges(loaded)
    if errors:
        for e in errors:
            _err(f"error: {e}")
        raise typer.Exit(EXIT_BAD_INPUT)
    check_output_dir(output)
    announce_window(loaded, stderr_console())
    return loaded


def _run(loaded: Case, kind: str, total: int, output: Path, workers: int,
         scheduler: str | None) -> list[dict[str, Any]]:
    """Open the store, solve the missing points with a progress bar, return all rows."""
    from rich.progress import BarColumn, Progress, TextColumn, TimeElapsedColumn

    from kinroots.io.store import STORE_NAME, PointStore, StoreError
    from kinroots.study.sweep import case_hash, run_points

    src = str(loaded.source) if loaded.source else "case"
    try:
        store = PointStore(output / STORE_NAME, case_hash(loaded), src)
    except StoreError as exc:
        _err(f"error: {exc}")
        raise typer.Exit(EXIT_BAD_INPUT) from None
    console = stderr_console()
    with store:
        done = store.done(kind)
        todo = [i for i in range(total) if i not in done]
        if done:
            console.print(f"resuming: {len(done)} of {total} points already in "
                          f"{output / STORE_NAME}")
        where = scheduler or f"{workers or 'all'} local worker(s)"
        with Progress(TextColumn(f"[bold]{kind}[/bold] {{task.description}}"), BarColumn(),
                      TextColumn("{task.completed}/{task.total} points"),
                      TimeElapsedColumn(), console=console, transient=False) as bar:
            task = bar.add_task(escape(where), total=total, completed=len(done))

            def commit(index: int, row: dict[str, Any]) -> None:
                store.commit(kind, index, row)
                bar.advance(task)

            try:
                run_points(loaded, kind, todo, commit, workers=workers or None,
                           scheduler=scheduler)
            except (ConnectionError, ModuleNotFoundError) as exc:
                _err(f"error: option --scheduler: {exc}")
                raise typer.Exit(EXIT_BAD_INPUT) from None
        return store.rows(kind)


def sweep_command(
    case: CaseArg = None,
    output: OutOpt = Path("kinroots-sweep"),
    workers: WorkersOpt = 0,
    scheduler: SchedulerOpt = None,
    default: DefaultOpt = False,
    figure_format: FigureFormatOpt = FigureFormat.png,
    no_plot: NoPlotOpt = False,
) -> None:
    """Solve every grid point of the case's [sweep] table (maximum growth over k and angle,
    least-damped root); write sweep.csv, sweep.nc, sweep.json and sweep.png (growth map
    with contours at growth_levels).

    Finished points go to DIR/points.sqlite as they complete: run the same command again
    to resume. Exit code 0 when every point converged, 1 when some failed (flagged,
    value cells empty), 2 on bad input or a case changed since the points were stored.

    Example: kinroots sweep cases/sweep_proton_anisotropy.toml -o out/sweep
             --workers 2
    """
    from kinroots.io.netcdf import dataset_bytes, sweep_dataset
    from kinroots.io.tables import OutputSet, atomic_write_bytes, write_csv, write_json, write_units
    from kinroots.study.sweep import csv_table

    loaded = _prepare(case, default, output, "sweep")
    spec = loaded.sweep
    total = math.prod(spec.shape)
    rows = _run(loaded, "sweep", total, output, workers, scheduler)
    out = OutputSet(output, "sweep")
    sweep_rows, sweep_cols = csv_table(loaded, rows, "sweep")
    write_csv(out.stage("sweep.csv"), sweep_rows, sweep_cols)
    write_units(out.stage("sweep.units.csv"), table_units(loaded, sweep_cols, {
        a.path.safe_name: a.path.unit for a in spec.axes}))
    atomic_write_bytes(out.stage("sweep.nc"), dataset_bytes(sweep_dataset(
        loaded, rows, history=f"kinroots sweep {loaded.source or 'default case'}")))
    fig_path = figure_path(output, "sweep", figure_format, no_plot)
    if fig_path is not None:
        _draw_map(loaded, rows, out.stage(fig_path.name),
                  _finished(loaded, output, "threshold"))
    failed = [r for r in rows if not r.get("converged")]
    write_json(out.stage("sweep.json"), _summary(loaded, "sweep", rows, failed))
    out.commit()
    console = stderr_console()
    results = stdout_console()  # results on stdout, diagnostics on stderr
    best = max((r for r in rows if r.get("converged") and r.get("growth_max") is not None
                and math.isfinite(r["growth_max"])), key=lambda r: r["growth_max"],
               default=None)
    if best is not None:
        results.print(f"largest growth: γ = {best['growth_max']:.6g} "
                      f"{loaded.units.frequency_label} ({best['growth_per_s']:.4g} 1/s) at "
                      f"{spec.x.path.text} = {best['x']:.6g}"
                      + (f", {spec.y.path.text} = {best['y']:.6g}" if spec.y else "")
                      + f", k = {best['growth_k']:.4g}, angle {best['growth_angle']:.4g}°")
    _warn_edges(console, rows, "points")
    results.print(written(output / "sweep.csv", output / "sweep.nc", output / "sweep.json",
                          fig_path))
    if failed:
        console.print(f"{len(failed)} point(s) failed: flagged in sweep.csv", style="red")
        raise typer.Exit(1)


def _warn_edges(console: Any, rows: list[dict[str, Any]], where: str) -> None:
    """Say which points' maxima the grid or the window decided, and what to extend."""
    flagged = [r for r in rows if r.get("warnings")]
    if not flagged:
        return
    console.print(f"warning: at {len(flagged)} of {len(rows)} {where} the "
                  "maximizing root lies at an end of the k or angle range or at the edge "
                  "of the search window (k_at_edge, angle_at_edge, root_at_window_edge), "
                  "so a faster mode may lie outside what was searched:")
    for r in flagged[:5]:
        at = ", ".join(f"{c} = {r[c]:.6g}" for c in ("x", "y", "across")
                       if isinstance(r.get(c), float) and math.isfinite(r[c]))
        console.print(f"  {at}: {r['warnings']}")
    if len(flagged) > 5:
        console.print(f"  ... and {len(flagged) - 5} more (column 'warnings')")


def _finished(loaded: Case, output: Path, kind: str) -> list[dict[str, Any]] | None:
    """The stored rows of the other study of this case in ``output`` when all its points
    are done (so a re-run sweep keeps the threshold curve on its map), else None."""
    from kinroots.io.store import STORE_NAME, PointStore, StoreError
    from kinroots.study.sweep import case_hash

    spec = loaded.threshold if kind == "threshold" else loaded.sweep
    if spec is None or not (output / STORE_NAME).exists():
        return None
    total = spec.across.points if kind == "threshold" else math.prod(spec.shape)
    try:
        with PointStore(output / STORE_NAME, case_hash(loaded)) as store:
            rows = store.rows(kind)
    except StoreError as exc:
        info(f"kinroots: {kind} rows not read from {output / STORE_NAME}: {exc}")
        return None
    return rows if len(rows) == total else None


def _draw_map(loaded: Case, rows: list[dict[str, Any]], path: Path,
              threshold_rows: list[dict[str, Any]] | None = None) -> None:
    from kinroots.plots.maps import sweep_map

    sweep_map(loaded, rows, threshold_rows, path=path)


def _summary(loaded: Case, kind: str, rows: list[dict[str, Any]],
             failed: list[dict[str, Any]]) -> dict[str, Any]:
    from kinroots import __version__
    from kinroots.physics.plasma import CONVENTIONS
    from kinroots.study.sweep import case_hash

    u = loaded.units
    out: dict[str, Any] = {
        "kinroots_version": __version__,
        "title": loaded.title,
        "source": str(loaded.source) if loaded.source else None,
        "case": loaded.raw,
        "case_hash": case_hash(loaded),
        "conventions": CONVENTIONS,
        "units": {"growth": f"{u.frequency_label_ascii} (of the case at each point)",
                  "k": f"1/{u.length_label_ascii}", "angle": "degree"},
        "method": (
            "survey of the search window at every k of [scan] and every angle; roots of "
            "neighbouring grid points linked into families by continuation; every local "
            "maximum of Im(omega) of every family climbed between grid points (trust "
            "region on quadratic models, batched Newton); the largest wins"
            + ("; threshold by brentq on gamma_max(p) - level, the maximizer at the nearest "
               "value solved being one more start, and verified: |gamma_max - level| <= 5 % "
               "of the level at the answer" if kind == "threshold" else "")
        ),
        "points": len(rows),
        "failed_points": len(failed),
        "failed": [{k: r.get(k) for k in ("i", "j", "reason")} for r in failed],
    }
    return out


def threshold_command(
    case: CaseArg = None,
    output: OutOpt = Path("kinroots-sweep"),
    workers: WorkersOpt = 0,
    scheduler: SchedulerOpt = None,
    default: DefaultOpt = False,
    figure_format: FigureFormatOpt = FigureFormat.png,
    no_plot: NoPlotOpt = False,
) -> None:
    """Marginal-stability curve of the case's [threshold] table: for each value of the
    'across' parameter, the value of 'parameter' in 'bracket' where the maximum growth
    rate equals 'growth' (Brent root bracketing); write threshold.csv, threshold.json and
    threshold.png, and draw the curve on sweep.png when the sweep of the same case is done
    in the same folder.

    Resumable like sweep. Exit code 0 when every value converged, 1 when some did not
    (no crossing in the bracket, flagged), 2 on bad input.

    Example: kinroots threshold cases/sweep_proton_anisotropy.toml -o out/sweep
    """
    from kinroots.io.tables import OutputSet, write_csv, write_json, write_units
    from kinroots.study.sweep import csv_table

    loaded = _prepare(case, default, output, "threshold")
    t = loaded.threshold
    rows = _run(loaded, "threshold", t.across.points, output, workers, scheduler)
    out = OutputSet(output, "threshold")
    t_rows, t_cols = csv_table(loaded, rows, "threshold")
    write_csv(out.stage("threshold.csv"), t_rows, t_cols)
    write_units(out.stage("threshold.units.csv"), table_units(loaded, t_cols, {
        t.across.path.safe_name: t.across.path.unit, "threshold": t.path.unit,
        "bracket_low": t.path.unit, "bracket_high": t.path.unit}))
    failed = [r for r in rows if not r.get("converged")]
    write_json(out.stage("threshold.json"), _summary(loaded, "threshold", rows, failed))
    ok = [r for r in rows if r.get("converged")]
    fig_path = figure_path(output, "threshold", figure_format, no_plot)
    console = stderr_console()
    results = stdout_console()  # results on stdout, diagnostics on stderr
    if fig_path is not None:
        from kinroots.plots.maps import threshold_curve

        threshold_curve(loaded, rows, path=out.stage(fig_path.name))
    out.commit()
    if fig_path is not None:
        srows = _finished(loaded, output, "sweep")
        if srows is not None:
            map_path = fig_path.with_name(f"sweep{fig_path.suffix}")
            _draw_map(loaded, srows, map_path, rows)
            console.print(f"threshold drawn on {map_path}")
    for r in ok:
        results.print(f"{t.across.path.text} = {r['across']:.6g}: {t.path.text} = "
                      f"{r['threshold']:.6g}")
    _warn_edges(console, rows, "values")
    results.print(written(output / "threshold.csv", output / "threshold.json", fig_path))
    if failed:
        console.print(f"{len(failed)} value(s) without a threshold: "
                      + "; ".join(str(r.get("reason")) for r in failed), style="red")
        raise typer.Exit(1)


def register(app: typer.Typer) -> None:
    """Add ``sweep`` and ``threshold`` to the kinroots command line."""
    app.command("sweep")(sweep_command)
    app.command("threshold")(threshold_command)
