"""Evenly spaced grids written as the user would write them.

``numpy.linspace(0.02, 2.0, 12)[1]`` is ``0.19999999999999998`` and
``numpy.linspace(0.5e6, 6e6, 12)[0]`` can come out as ``499999.9999999999``: the grid
points carry the rounding of ``start + i * step``. Each interior point is rounded here to
13 significant digits (the shortest decimal within about 5e-14 of the exact grid point),
so tables, netCDF coordinates and figures show ``0.2`` and ``500000.0``; the ends are the
user's ``start`` and ``stop`` exactly. The computed points are these rounded values, so
every written value is the value that was solved at.
"""

from __future__ import annotations

import numpy as np

#: Significant digits kept of each interior grid point (common practice: 13 digits lie
#: far above the 2-4 ulp rounding of linspace and geomspace and far below any tolerance).
GRID_DIGITS = 13


def spaced_grid(start: float, stop: float, points: int, spacing: str = "linear") -> np.ndarray:
    """``points`` values from ``start`` to ``stop`` (both included), linear or log spaced.

    Parameters
    ----------
    start, stop : float
        First and last value (kept exactly).
    points : int
        Number of values (1 gives ``[start]``).
    spacing : {"linear", "log"}
        Equal differences (``numpy.linspace``) or equal ratios (``numpy.geomspace``).

    Returns
    -------
    numpy.ndarray
        The values, interior ones rounded to :data:`GRID_DIGITS` significant digits.
    """
    if points <= 1:
        return np.array([float(start)])
    raw = (np.geomspace if spacing == "log" else np.linspace)(start, stop, points)
    v = np.array([float(f"{x:.{GRID_DIGITS}g}") for x in raw])
    v[0], v[-1] = float(start), float(stop)
    return v
