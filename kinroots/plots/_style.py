"""Shared figure machinery: figures and axes, saving in a chosen format, labels, palette.

Every plot function of :mod:`kinroots.plots` draws on axes it is given (``ax=``) or on a
new Figure (Agg backend, no display needed), returns the Figure, and writes it only when
given a ``path``: the format follows the suffix (``.png``, ``.svg`` or ``.pdf``), so the
bytes always match the file name.

Text: user text (case titles, species names) goes through :func:`literal`, which escapes
matplotlib's mathtext ``$``; kinroots' own symbols with subscripts (ω_r, λ_De) go through
:func:`math_label`, which sets the subscript with mathtext.
"""

from __future__ import annotations

import io
import re
import textwrap
from pathlib import Path
from typing import Any

from kinroots.io.tables import atomic_write_bytes

__all__ = [
    "FIGURE_FORMATS",
    "OKABE_ITO",
    "axes_grid",
    "branch_style",
    "colours",
    "literal",
    "math_label",
    "new_figure",
    "plain_log_ticks",
    "save_figure",
    "set_title",
]

#: Formats a figure can be written in (file suffix = format name).
FIGURE_FORMATS: tuple[str, ...] = ("png", "svg", "pdf")

#: Colour-blind-safe qualitative palette (M. Okabe and K. Ito, "Color Universal Design
#: (CUD): how to make figures and presentations that are friendly to colorblind people",
#: 2008), black first.  Lines also differ in dash pattern
#: and marker (:func:`branch_style`) so that they stay apart in grey.
OKABE_ITO: tuple[str, ...] = (
    "#000000", "#E69F00", "#56B4E9", "#009E73", "#0072B2", "#D55E00", "#CC79A7", "#F0E442",
)
_DASHES: tuple[Any, ...] = ("-", "--", "-.", ":", (0, (5, 1, 1, 1, 1, 1)), (0, (8, 2)))
_MARKERS: tuple[str, ...] = ("o", "s", "^", "D", "v", "P", "X", "*")


def new_figure(**kwargs: Any) -> Any:
    """A matplotlib Figure on the Agg canvas (no GUI, safe in workers and servers)."""
    import matplotlib

    matplotlib.use("Agg", force=False)
    from matplotlib.figure import Figure

    return Figure(**kwargs)


def axes_grid(ax: Any, n: int, *, figsize: tuple[float, float], sharex: bool = False
              ) -> tuple[Any, list[Any]]:
    """The Figure and ``n`` axes to draw on: the caller's (``ax``: one Axes when ``n``
    is 1, else a sequence of ``n`` Axes) or a new constrained-layout Figure."""
    if ax is None:
        fig = new_figure(figsize=figsize, layout="constrained")
        made = fig.subplots(n, 1, sharex=sharex) if n > 1 else fig.subplots()
        axes = list(made) if n > 1 else [made]
        return fig, axes
    import numpy as np

    axes = list(np.ravel(np.array(ax, dtype=object)))
    if len(axes) != n:
        raise ValueError(f"ax: got {len(axes)} axes; expected {n}")
    return axes[0].get_figure(), axes


def literal(text: str) -> str:
    """``text`` shown as written: matplotlib's mathtext ``$`` escaped (user text)."""
    return str(text).replace("$", r"\$")


_SUBSCRIPTED = re.compile(r"(\S)_([A-Za-z0-9]+(?:\([A-Za-z0-9+\-]*\))?|\([A-Za-z0-9+\-]*\))")


def math_label(text: str) -> str:
    """A label with its subscripts set by mathtext: ``"ω_pe"`` → ``$ω_{\\mathrm{pe}}$``.

    Only subscripts made of letters, digits, ``+``, ``-`` and parentheses are set; every
    other character is shown literally (``$`` escaped), so species names are safe.
    """
    out: list[str] = []
    last = 0
    for m in _SUBSCRIPTED.finditer(text):
        out.append(literal(text[last:m.start()]))
        base = m.group(1)
        base = literal(base) if base in "$\\{}^%#&~" else base
        out.append(f"${base}_{{\\mathrm{{{m.group(2)}}}}}$")
        last = m.end()
    out.append(literal(text[last:]))
    return "".join(out)


def set_title(ax: Any, title: str, *, width: float | None = None, **kwargs: Any) -> None:
    """Title made of user text, shown literally and wrapped to the axes' width (titles
    longer than the figure were clipped)."""
    if not title:
        return
    if width is None:
        fig = ax.get_figure()
        inches = fig.get_figwidth() * ax.get_position().width if fig else 6.0
        fontsize = kwargs.get("fontsize", "medium")
        per_inch = 11.0 if fontsize in ("medium", "small") else 9.5
        width = max(30.0, inches * per_inch)
    ax.set_title(literal(textwrap.fill(title, int(width))), **kwargs)


def branch_style(i: int) -> dict[str, Any]:
    """Colour, dash pattern and marker of the i-th curve: distinct in colour (colour-blind
    safe), and in dashes and markers in grey."""
    return {"color": OKABE_ITO[i % len(OKABE_ITO)], "ls": _DASHES[i % len(_DASHES)],
            "marker": _MARKERS[i % len(_MARKERS)]}


def colours(n: int) -> list[str]:
    """``n`` colours of the Okabe–Ito palette (repeating beyond eight)."""
    return [OKABE_ITO[i % len(OKABE_ITO)] for i in range(max(n, 1))]


def figure_format(path: Path) -> str:
    """Format named by the suffix of ``path``; ValueError for an unknown one."""
    fmt = Path(path).suffix.lower().lstrip(".")
    if fmt not in FIGURE_FORMATS:
        raise ValueError(f"figure {path}: suffix {Path(path).suffix!r}; expected one of "
                         + ", ".join("." + f for f in FIGURE_FORMATS))
    return fmt


def figure_bytes(fig: Any, fmt: str, dpi: int = 150) -> bytes:
    """The figure rendered as ``fmt`` (png, svg or pdf) bytes."""
    if fmt not in FIGURE_FORMATS:
        raise ValueError(f"figure format {fmt!r}; expected one of {', '.join(FIGURE_FORMATS)}")
    buf = io.BytesIO()
    # No dates: the same figure gives the same bytes.
    metas: dict[str, dict[str, Any]] = {"png": {"Software": "kinroots"},
                             "svg": {"Creator": "kinroots", "Date": None},
                             "pdf": {"Creator": "kinroots", "CreationDate": None}}
    meta = metas[fmt]
    fig.savefig(buf, format=fmt, dpi=dpi, metadata=meta)
    return buf.getvalue()


def save_figure(fig: Any, path: Path, dpi: int = 150) -> Path:
    """Write ``fig`` atomically in the format of ``path``'s suffix; return ``path``."""
    path = Path(path)
    atomic_write_bytes(path, figure_bytes(fig, figure_format(path), dpi=dpi))
    return path


def plain_log_ticks(axis: Any, span: float = 0.0) -> None:
    """Tick labels of a log-scaled x or y axis written as plain numbers (0.5, 2000),
    minor ticks labelled too when the axis spans less than ``span`` decades."""
    from matplotlib.ticker import FuncFormatter

    plain = FuncFormatter(lambda v, _: f"{v:g}")
    axis.set_major_formatter(plain)
    if span:
        axis.set_minor_formatter(plain)
