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


def save_figure(fig, path: Path, dpi: int = 120) -> None:  # type: ignore[no-untyped-def]
    buf = io.BytesIO()
    fig.savefig(buf, format="png", dpi=dpi)
    atomic_write_bytes(Path(path), buf.getvalue())


def colours(n: int) -> list:  # type: ignore[type-arg]
    import matplotlib

    cmap = matplotlib.colormaps["tab10" if n <= 10 else "tab20"]
    return [cmap(i % cmap.N) for i in range(max(n, 1))]
