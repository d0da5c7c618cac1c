"""``kinroots report DIR``: report.md, report.html and LaTeX tables from an output folder."""

from __future__ import annotations

import math
from pathlib import Path
from typing import Annotated

import typer

from kinroots.cli._common import EXIT_BAD_INPUT, err, info

__all__ = ["register"]


def report_command(
    folder: Annotated[Path, typer.Argument(
        help="Output folder of solve, roots, launch, scatter, sweep or threshold.",
        show_default=False, metavar="DIR")],
    points: Annotated[int, typer.Option(
        "--points", min=1, help="Rows at this many evenly spaced values of k (frequency, "
        "sweep value...), first and last included.")] = 10,
    at: Annotated[list[float] | None, typer.Option(
        "--at", metavar="<float>", help="Rows at the value nearest this one instead "
        "(repeat the option for several values).")] = None,
    all_rows: Annotated[bool, typer.Option(
        "--all", help="Every row of each table.")] = False,
) -> None:
    """Write report.md, report.html (one self-contained printable page, figures as SVG)
    and one LaTeX tabular per result (report_<command>.tex) into DIR, from the tables
    and metadata found there; nothing is recomputed.

    Each table gives the case's roots at the chosen points, normalized and in SI units,
    with residual and verification flag; digits follow from the residual and the root
    tolerance. Every file is written atomically. Exit code 0 done, 2 when DIR is not a
    kinroots output folder.

    Example: kinroots report out/hydrogen --points 5
    """
    from kinroots.report import ReportError, build_report, write_report

    if at and all_rows:
        err("error: options --at and --all: both given; expected at most one")
        raise typer.Exit(EXIT_BAD_INPUT)
    for value in at or ():
        if not math.isfinite(value):
            err(f"error: option --at: {value!r}: expected a finite number (a value of the "
                "tables' first column)")
            raise typer.Exit(EXIT_BAD_INPUT)
    try:
        report = build_report(folder, points=None if all_rows else points, at=at or ())
    except ReportError as exc:
        err(f"error: {exc}")
        raise typer.Exit(EXIT_BAD_INPUT) from None
    paths = write_report(report, folder)
    info("wrote " + ", ".join(str(p) for p in paths))
    for table in report.tables.values():
        typer.echo(f"{table.title}: {len(table.cells)} row(s)")


def register(app: typer.Typer) -> None:
    """Add ``report`` to ``app``."""
    app.command("report")(report_command)
