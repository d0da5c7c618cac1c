"""Shared figure machinery: a Figure on the Agg backend, saving by file suffix, colours."""

from __future__ import annotations

import io
from pathlib import Path

from kinroots.io.tables import atomic_write_bytes


def new_figure(**kwargs):  # type: ignore[no-untyped-def]
    import matplotlib

    matplotlib.use("Agg", force=False)
    from matplotlib.figure import Figure

    return Figure(**kwargs)


def literal_text(fig) -> None:  # type: ignore[no-untyped-def]
    """Show every text already on ``fig`` literally: each ``$`` becomes ``\\$``.

    Titles, legends and labels carry user text (case titles, species names); a ``$`` in
    them would start matplotlib mathtext and can fail to parse.  kinroots' own labels use
    Unicode, not mathtext.  Tick labels are made later, while drawing, and keep theirs.
    """
    from matplotlib.text import Text

    for t in fig.findobj(Text):
        text = t.get_text()
        if "$" in text:
            t.set_text(text.replace("$", r"\$"))


def save_figure(fig, path: Path, dpi: int = 120) -> None:  # type: ignore[no-untyped-def]
    literal_text(fig)
    buf = io.BytesIO()
    fig.savefig(buf, format="png", dpi=dpi)
    atomic_write_bytes(Path(path), buf.getvalue())


def colours(n: int) -> list:  # type: ignore[type-arg]
    import matplotlib

    cmap = matplotlib.colormaps["tab10" if n <= 10 else "tab20"]
    return [cmap(i % cmap.N) for i in range(max(n, 1))]
