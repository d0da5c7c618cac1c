"""``python -m kinroots`` runs the command line."""

from kinroots.cli import app

app()
