"""``python -m kinroots`` runs the command line (importing this module does not)."""

if __name__ == "__main__":
    from kinroots.cli import app

    app()
