"""Command line: typer parses, rich displays; the library does the work.

Every command that reads a case goes through :func:`kinroots.cli._common.load_case_or_exit`,
which picks the embedded default case when no file is given, prints every validation error
(one per line, on stderr) and exits with code 2 on bad input, and prints the case's
warnings on stderr.  Data go to stdout; messages to stderr.  Each module registers its
commands on the one typer app.
"""

from kinroots.cli import case_commands, lab, reporting, stability, waves
from kinroots.cli._common import app, guarded

for _module in (case_commands, waves, lab, stability, reporting):
    _module.register(app)
# No traceback reaches a user: internal errors exit 3 with the traceback in a file.
for _info in app.registered_commands:
    if _info.callback is None:
        continue
    _info.callback = guarded(_info.callback)
    # Examples are shown line by line as written (click's "\b" marker), not re-wrapped
    # like the paragraphs above them, so a command is never broken inside an option name.
    if _info.callback.__doc__:
        _info.callback.__doc__ = _info.callback.__doc__.replace(
            "\n\n    Example:", "\n\n    \b\n    Example:")

__all__ = ["app"]
