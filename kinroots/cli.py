"""Command line: typer parses, rich displays; the library does the work."""

from __future__ import annotations

import typer

from kinroots import __version__

app = typer.Typer(
    name="kinroots",
    help="Roots of the linear Vlasov dispersion relation of multi-species plasmas.",
    no_args_is_help=True,
    add_completion=False,
)


@app.command()
def version() -> None:
    """Print the kinroots version.

    Example: kinroots version
    """
    typer.echo(__version__)
