"""What every command shares: the typer app, common options, case loading and exit codes.

Every command that reads a case goes through `load_case_or_exit`, which picks the
embedded default case when no file is given, prints every validation error (one per line,
on stderr) and exits with code 2 on bad input, and prints the case's warnings on stderr.
Data go to stdout; messages to stderr.
"""

from __future__ import annotations

import enum
import functools
from collections.abc import Callable, Mapping, Sequence
from pathlib import Path
from typing import TYPE_CHECKING, Annotated, Any, NoReturn

import click
import typer
from rich.console import Console

if TYPE_CHECKING:  # the case layer (and numpy) load only when a command reads a case
    from kinroots.io.case import Case

#: Exit code for bad input (docs/design.md, "Exit codes").
EXIT_BAD_INPUT = 2
#: Exit code for an internal error (a bug): one line on stderr, the traceback in a file.
EXIT_INTERNAL = 3
#: Exit code after Ctrl-C (128 + SIGINT, as shells report it).
EXIT_INTERRUPTED = 130

app = typer.Typer(
    name="kinroots",
    help="Roots of the linear Vlasov dispersion relation of multi-species plasmas.",
    no_args_is_help=True,
    # Plain click help: every word of the docstrings is shown (rich markup would take
    # "[sweep]" for a style tag and drop it) and paragraphs are re-wrapped to the terminal.
    rich_markup_mode=None,
    add_completion=True,
)


class _Verbosity:
    """Process-wide verbosity of the command line: 0 quiet, 1 normal, 2 verbose."""

    level: int = 1


VERBOSITY = _Verbosity()


def _show_version(value: bool) -> None:
    if value:
        from kinroots import __version__

        typer.echo(f"kinroots {__version__}")
        raise typer.Exit()


@app.callback()
def main(
    version: Annotated[bool, typer.Option(
        "--version", callback=_show_version, is_eager=True,
        help="Print the kinroots version and exit.")] = False,
    quiet: Annotated[bool, typer.Option(
        "--quiet", "-q", help="Only errors and warnings on stderr (no progress, no notes).")]
        = False,
    verbose: Annotated[bool, typer.Option(
        "--verbose", "-v", help="More detail on stderr (the case summary).")]
        = False,
) -> None:
    """Roots of the linear Vlasov dispersion relation of multi-species plasmas.

    Results go to files (and a summary to stdout); progress, notes, warnings and
    errors go to stderr.
    """
    if quiet and verbose:
        err("error: options -q/--quiet and -v/--verbose: both given; expected at most one")
        raise typer.Exit(EXIT_BAD_INPUT)
    VERBOSITY.level = 0 if quiet else 2 if verbose else 1


CaseArg = Annotated[
    Path | None,
    typer.Argument(
        help="Case file (TOML); '-' reads it from stdin. Omit it to use the embedded "
        "default case.",
        show_default=False,
        dir_okay=True,
        exists=False,
    ),
]
DefaultOpt = Annotated[
    bool,
    typer.Option("--default", help="Use the embedded default case (instead of CASE)."),
]


def err(message: str) -> None:
    """An error or warning on stderr (shown even with --quiet)."""
    typer.echo(message, err=True)


def info(message: str) -> None:
    """A diagnostic note on stderr, silenced by --quiet."""
    if VERBOSITY.level > 0:
        typer.echo(message, err=True)


def detail(message: str) -> None:
    """A verbose-only note on stderr (-v)."""
    if VERBOSITY.level > 1:
        typer.echo(message, err=True)


def _save_traceback(exc: BaseException) -> Path | None:
    """Write the traceback of ``exc`` (with argv and version) to a file; its path."""
    import datetime
    import os
    import sys
    import tempfile
    import traceback

    from kinroots import __version__

    stamp = datetime.datetime.now(datetime.UTC).strftime("%Y%m%dT%H%M%SZ")
    text = (f"kinroots {__version__}, python {sys.version.split()[0]}\n"
            f"argv: {sys.argv!r}\n\n"
            + "".join(traceback.format_exception(type(exc), exc, exc.__traceback__)))
    try:
        fd, name = tempfile.mkstemp(prefix=f"kinroots-error-{stamp}-", suffix=".txt")
        with os.fdopen(fd, "w", encoding="utf-8") as fh:
            fh.write(text)
    except OSError:
        return None
    return Path(name)


def guarded(command: Callable[..., Any]) -> Callable[..., Any]:
    """Wrap a command so that no traceback reaches the user.

    Ctrl-C exits 130 with one line; any other exception is an internal error: one line
    naming it and the file holding the traceback, exit `EXIT_INTERNAL` (never 1, which
    means "done, some points flagged").
    """

    @functools.wraps(command)
    def run(*args: Any, **kwargs: Any) -> Any:
        try:
            return command(*args, **kwargs)
        except (typer.Exit, typer.Abort, click.exceptions.Exit, click.ClickException,
                click.exceptions.Abort):
            raise
        except KeyboardInterrupt:
            err("kinroots: interrupted (Ctrl-C)")
            raise typer.Exit(EXIT_INTERRUPTED) from None
        except Exception as exc:  # the last line of defence
            log = _save_traceback(exc)
            what = " ".join(f"{type(exc).__name__}: {exc}".split())
            if len(what) > 300:
                what = what[:297] + "..."
            where = f"traceback saved to {log}" if log else "traceback could not be saved"
            err(f"kinroots: internal error ({what}); this is a bug in kinroots, please "
                f"report it; {where}")
            raise typer.Exit(EXIT_INTERNAL) from None
        finally:
            _release_folders()

    return run


class CtrlC:
    """Within ``with CtrlC() as stop``: the first Ctrl-C only sets ``stop()`` to True (the
    work stops at its next checkpoint and keeps what is done); a second one interrupts at
    once (KeyboardInterrupt).  Outside the main thread it changes nothing."""

    def __init__(self) -> None:
        self.requested = False
        self._old: Any = None

    def __call__(self) -> bool:
        return self.requested

    def _handle(self, signum: int, frame: Any) -> None:
        if self.requested:
            raise KeyboardInterrupt
        self.requested = True
        err("kinroots: Ctrl-C: stopping after the current points and writing what is done "
            "(Ctrl-C again to stop at once, writing nothing)")

    def __enter__(self) -> CtrlC:
        import signal
        import threading

        if threading.current_thread() is threading.main_thread():
            self._old = signal.signal(signal.SIGINT, self._handle)
        return self

    def __exit__(self, *exc: object) -> None:
        import signal

        if self._old is not None:
            signal.signal(signal.SIGINT, self._old)


def stderr_console() -> Console:
    """Rich console on stderr that shows every string literally (no markup, no
    highlighting): titles, names and paths are user text.  Styles are passed with
    ``style=``; the progress columns escape their descriptions."""
    return Console(stderr=True, markup=False, highlight=False, quiet=VERBOSITY.level == 0)


def stdout_console() -> Console:
    """Rich console on stdout for a command's results (roots found, growth rates, files
    written), shown literally; diagnostics (progress, notes, warnings, errors) go to
    :func:`stderr_console`, so ``kinroots … > results.txt`` keeps the results and
    ``-q`` silences only the diagnostics.  Lines are not wrapped (a path broken across
    lines would be useless to a script reading the output)."""
    return Console(markup=False, highlight=False, soft_wrap=True)


def _refuse(errors: list[str], case: Path) -> NoReturn:
    for line in errors:
        err(f"error: {line}")
    n = len(errors)
    err(f"kinroots: {n} problem{'s' if n != 1 else ''} in {case}; nothing done")
    raise typer.Exit(EXIT_BAD_INPUT)


def load_case_or_exit(case: Path | None, use_default: bool = False) -> Case:
    """Load ``case`` (or the embedded default), print its warnings; exit 2 on bad input.

    Parameters
    ----------
    case : Path or None
        Case file; ``None`` selects the embedded default case (said on stderr).
    use_default : bool
        ``--default`` given: must not be combined with a case file.
    """
    from kinroots.io.case import CaseError, default_case_path, load_case

    if use_default and case is not None:
        err(f"kinroots: give either a case file or --default, not both (got {case})")
        raise typer.Exit(EXIT_BAD_INPUT)
    if case is None:
        case = default_case_path()
        info(f"kinroots: no case file given; using the embedded default case ({case})")
    try:
        if str(case) == "-":
            import sys

            from kinroots.io.case import parse_case_bytes
            from kinroots.io.limits import MAX_CASE_BYTES

            loaded = parse_case_bytes(sys.stdin.buffer.read(MAX_CASE_BYTES + 1), "<stdin>")
        else:
            loaded = load_case(case)
    except CaseError as exc:
        _refuse(exc.errors, case)
    warnings = list(loaded.warnings)
    if loaded.sweep is not None or loaded.threshold is not None:
        from kinroots.io.parameters import check_study_ranges

        errors, corner_warnings = check_study_ranges(loaded)
        if errors:
            _refuse(errors, case)
        warnings += corner_warnings
    for line in warnings:
        err(f"warning: {case}: {line}")
    detail(f"case: {case_summary(loaded)}")
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


# ----------------------------------------------------------------- solve and roots

OutOpt = Annotated[
    Path,
    typer.Option("--output", "-o", help="Folder for the tables and the figure (created).",
                 file_okay=False),
]


def check_output_dir(out: Path) -> None:
    """Create the output folder and make sure a file can be written into it, before any
    computation; exit 2 with the reason otherwise (a file in the way, no permission)."""
    import tempfile

    if out.exists() and not out.is_dir():
        err(f"error: output {out}: exists and is not a folder; expected a folder path")
        raise typer.Exit(EXIT_BAD_INPUT)
    try:
        out.mkdir(parents=True, exist_ok=True)
        with tempfile.TemporaryFile(dir=out):
            pass
    except OSError as exc:
        err(f"error: output {out}: cannot write there ({exc.strerror or exc}); expected a "
            "folder that can be created and written")
        raise typer.Exit(EXIT_BAD_INPUT) from None
    _lock_folder(out)


#: Output folders locked by the running command (released when it ends, see `guarded`).
_HELD: list[int] = []


def _lock_folder(out: Path) -> None:
    """One command at a time per output folder: an exclusive lock on the folder itself
    (no file is created), held until the command ends; exit 2 if another run holds it."""
    import os

    try:
        import fcntl
    except ImportError:  # not POSIX: no lock
        return
    fd = os.open(out, os.O_RDONLY)
    try:
        fcntl.flock(fd, fcntl.LOCK_EX | fcntl.LOCK_NB)
    except OSError:
        os.close(fd)
        err(f"error: output {out}: another kinroots run is writing into this folder; "
            "expected one run per folder: wait for it to finish or use another folder")
        raise typer.Exit(EXIT_BAD_INPUT) from None
    _HELD.append(fd)


def _release_folders() -> None:
    import os

    while _HELD:
        os.close(_HELD.pop())




# ----------------------------------------------------------------- figures

class FigureFormat(enum.StrEnum):
    """File formats of figures (kinroots.plots.FIGURE_FORMATS)."""

    png = "png"
    svg = "svg"
    pdf = "pdf"


FigureFormatOpt = Annotated[
    FigureFormat,
    typer.Option("--figure-format", help="Format of the figure file."),
]
NoPlotOpt = Annotated[
    bool,
    typer.Option("--no-plot", help="Write the tables only, no figure (faster batch runs)."),
]


def figure_path(output: Path, stem: str, fmt: FigureFormat | str, no_plot: bool
                ) -> Path | None:
    """Where the figure ``stem`` goes (``output/stem.fmt``), or None with --no-plot."""
    return None if no_plot else output / f"{stem}.{FigureFormat(fmt).value}"


def written(*paths: Path | None) -> str:
    """'wrote a, b, c' for the files actually written (None skipped)."""
    return "wrote " + ", ".join(str(p) for p in paths if p is not None)


def table_units(case: Any, columns: Sequence[str],
                parameters: Mapping[str, str] | None = None) -> list[tuple[str, str]]:
    """(column, unit) of a table of ``case`` (see :func:`kinroots.io.tables.column_units`)."""
    from kinroots.io.tables import column_units

    u = case.units
    return column_units(columns, frequency=u.frequency_label_ascii,
                        length=u.length_label_ascii, parameters=parameters)


def announce_window(case: Case, console: Console) -> None:
    """Choose the search window now when the case gives none, and say which it is.

    The choice (:func:`kinroots.study.problem.window_choice`) surveys a few probe k; it
    is cached on the case, so the run that follows uses the same window.
    """
    if case.search_real is not None and case.search_imag is not None:
        return
    from kinroots.study.problem import window_choice

    with console.status("choosing the search window from the plasma"):
        c = window_choice(case)
    console.print(
        f"search window chosen from the plasma: Re omega {list(c.real)}, Im omega "
        f"{list(c.imag)} ({c.evaluations} evaluations; summary.json search_window). "
        f"Rule: {c.rule}", soft_wrap=True)
