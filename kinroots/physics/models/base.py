"""The one signature every susceptibility builder shares.

Frame: B along z, k = (k_perp, 0, k_par).  Unmagnetized models use the same frame with
the drift axis as z.  Time dependence exp(i k·x − i ω t).

* Electrostatic builders return the scalar χ_s(ω) and dχ_s/dω, shaped like ``omega``.
* Electromagnetic builders return the tensor χ_s(ω) and dχ_s/dω, shaped
  ``omega.shape + (3, 3)`` (index order x, y, z).  χ_s has a pole at ω = 0; the
  dispersion layer multiplies it out (see ``kinroots.physics.dispersion``).
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any, Protocol

import numpy as np

from kinroots.physics.plasma import Species


@dataclass(frozen=True)
class Susceptibility:
    """Result of a builder.

    Attributes
    ----------
    value : ndarray
        χ_s: scalar (electrostatic) or 3×3 tensor (electromagnetic), dimensionless.
    derivative : ndarray
        d(value)/dω.
    harmonics : int
        Largest cyclotron harmonic |n| kept (0 for unmagnetized models).
    """

    value: np.ndarray
    derivative: np.ndarray
    harmonics: int = 0


class Builder(Protocol):
    """Signature of a susceptibility builder (SI units throughout)."""

    def __call__(
        self,
        omega: np.ndarray,
        species: Species,
        /,
        *,
        k_par: Any,
        k_perp: Any,
        B: float,
        tol: float = 1e-14,
    ) -> Susceptibility: ...
