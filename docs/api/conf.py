"""Sphinx configuration of the kinroots API reference (``make docs``).

Built with warnings as errors (``-W``) in CI: a docstring that does not parse fails the
build.  Output goes to ``docs/api/_build`` (not in git).
"""

from __future__ import annotations

import os
import types

os.environ.setdefault("MPLBACKEND", "Agg")

project = "kinroots"
author = "the kinroots developers"
copyright = "2026, the kinroots developers"

extensions = [
    "sphinx.ext.autodoc",
    "sphinx.ext.mathjax",
    "numpydoc",
]

# numpydoc: render the sections, do not add an autosummary table per class (the members
# are documented in full below each class) and do not try to cross-link every type name.
numpydoc_show_class_members = False
numpydoc_xref_param_type = False
numpydoc_validation_checks: set[str] = set()

autodoc_default_options = {
    "members": True,
    "undoc-members": False,
    "show-inheritance": False,
}
autodoc_typehints = "none"
autodoc_member_order = "bysource"
# Type aliases and forward references in signatures are not resolved into links.
nitpicky = False
suppress_warnings = ["ref.python"]

html_theme = "alabaster"
html_title = "kinroots API reference"
exclude_patterns = ["_build"]


def _escape_bars(app, what, name, obj, options, lines: list[str]) -> None:
    """Show ``|x|`` (an absolute value in the physics docstrings) literally.

    reStructuredText reads ``|x|`` as a substitution reference.  Bars are escaped outside
    literal blocks (after a line ending in ``::``) and outside grid or simple tables.
    """
    literal_indent: int | None = None
    for i, line in enumerate(lines):
        stripped = line.lstrip()
        indent = len(line) - len(stripped)
        if literal_indent is not None:
            if stripped and indent <= literal_indent:
                literal_indent = None
            else:
                continue
        if stripped.startswith(("|", "+")) and stripped.endswith(("|", "+")):
            continue  # a table row
        if "|" in line:
            lines[i] = line.replace("|", r"\|")
        if stripped.endswith("::"):
            literal_indent = indent


def _skip_aliases(app, what, name, obj, skip, options):
    """Leave out type aliases such as ``Box = tuple[float, ...]`` (no signature to show)."""
    if isinstance(obj, types.GenericAlias):
        return True
    return None


def setup(app):  # the Sphinx extension hook
    app.connect("autodoc-process-docstring", _escape_bars, priority=400)
    app.connect("autodoc-skip-member", _skip_aliases)
