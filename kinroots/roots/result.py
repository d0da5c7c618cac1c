"""Result objects of the root layer and the evaluation counter.

Nothing here knows about plasmas.  A user function has the signature
``f(z: ndarray[complex]) -> tuple[ndarray, ndarray]`` returning ``(f(z), f'(z))`` with
the shape of ``z``; the root layer always calls it with a one-dimensional complex array
and counts every point it evaluates.
"""

from __future__ import annotations

import enum
from collections.abc import Callable
from dataclasses import dataclass, field

import numpy as np

__all__ = [
    "AnalyticFunction",
    "Box",
    "CountedFunction",
    "RootResult",
    "Status",
    "SurveyResult",
    "failed_root",
]

#: ``f(z) -> (f(z), f'(z))``, vectorized over a complex array.
AnalyticFunction = Callable[[np.ndarray], tuple[np.ndarray, np.ndarray]]
#: Rectangle ``(re_min, re_max, im_min, im_max)``.
Box = tuple[float, float, float, float]


class Status(enum.Enum):
    """Outcome of a root computation (``RootResult.status``)."""

    CONVERGED = "converged"
    MAX_ITER = "max_iter"  # iteration limit reached before the stopping test held
    STALLED = "stalled"  # damping could not reduce |f|, or f' vanished
    DIVERGED = "diverged"  # the iterate ran away (|z| beyond any sensible scale)
    NONFINITE = "nonfinite"  # f or f' not finite at the iterate
    LEFT_REGION = "left_region"  # the iterate left the region it was confined to
    NOT_ATTEMPTED = "not_attempted"  # the survey could not isolate a zero to start from


@dataclass(frozen=True)
class RootResult:
    """One root (or one failed attempt at a root); never a bare number.

    Attributes
    ----------
    value : complex
        Last iterate.  Meaningful as a root only when ``converged`` is true.
    converged : bool
        True only if the stopping test ``|Δz| ≤ atol + rtol·|z|`` held for the Newton
        correction computed *at* ``value`` (so ``residual/|f'(value)|`` is small too).
    status : Status
        Named outcome.
    reason : str
        Human-readable explanation when not converged ("" when converged).
    residual : float
        ``|f(value)|`` (``nan`` if never evaluated).
    step : float
        Size of the last Newton correction, relative ``|Δz|/|z|`` when ``|z| > 1``,
        absolute otherwise.
    iterations : int
        Newton corrections computed.
    evaluations : int
        Points at which ``f`` was evaluated for this root (polishing and verification).
    verified : bool
        A contour around ``value`` enclosing no other known zero was found to wind
        ``multiplicity`` times (argument principle).
    multiplicity : int
        Multiplicity used by the modified Newton step, confirmed when ``verified``.
    method : str
        How the root was obtained, e.g. ``"newton"``, ``"moments+newton"``.
    refined : complex or None
        ``value`` minus the last Newton correction: not evaluated (so not reported as
        the root), but for a simple zero quadratically closer to it; continuation uses it
        to extrapolate.
    noise_error : float
        Absolute uncertainty of ``value`` from rounding noise in f, measured around it by
        the survey (:func:`kinroots.roots.survey.hermite_noise_error`); 0 where f is smooth on the
        scale of the tolerance.  When it exceeds the stopping test's tolerance the root is
        no more accurate than this (``reason`` says so).
    """

    value: complex
    converged: bool
    status: Status
    reason: str = ""
    residual: float = float("nan")
    step: float = float("nan")
    iterations: int = 0
    evaluations: int = 0
    verified: bool = False
    multiplicity: int = 1
    method: str = "newton"
    refined: complex | None = None
    noise_error: float = 0.0


def failed_root(value: complex, status: Status, reason: str, *, method: str) -> RootResult:
    """A ``RootResult`` for an attempt that produced no usable iterate."""
    return RootResult(
        value=complex(value), converged=False, status=status, reason=reason, method=method
    )


@dataclass
class SurveyResult:
    """All zeros found in a rectangle.

    Attributes
    ----------
    roots : list of RootResult
        Distinct roots, converged ones first, sorted by real then imaginary part.
        Failed attempts (cells whose zero could not be polished) are included with
        ``converged = False`` and a reason.
    count : int or None
        Zeros in ``box`` counted with multiplicity by the argument principle, after
        removing the contributions of the excluded points; ``None`` if the boundary
        could not be resolved.
    evaluations : int
        Points at which ``f`` was evaluated in total.
    cells : int
        Rectangles whose boundary winding number was computed.
    box : tuple of float
        The rectangle actually used, ``(re_min, re_max, im_min, im_max)``, after any
        outward shift of an edge that passed through (or extremely near) a zero.
    notes : list of str
        Shifts, unresolved contours, budget exhaustion, inconsistencies.
    complete : bool
        The converged roots' multiplicities add up to ``count``.
    """

    roots: list[RootResult]
    count: int | None
    evaluations: int
    cells: int
    box: Box
    notes: list[str] = field(default_factory=list)
    complete: bool = False

    @property
    def values(self) -> np.ndarray:
        """Values of the converged roots (complex array)."""
        return np.array([r.value for r in self.roots if r.converged], dtype=complex)

    @property
    def count_text(self) -> str:
        """The count in words for messages: the number, or why there is none."""
        if self.count is None:
            return "not counted (the window's boundary could not be resolved)"
        return f"{self.count} zero(s) counted"


class CountedFunction:
    """Wrap a user function, force 1-D complex input and count evaluated points.

    Parameters
    ----------
    func : callable
        ``func(z) -> (f, fprime)``, vectorized.  May itself be a ``CountedFunction``;
        each wrapper counts independently.
    """

    def __init__(self, func: AnalyticFunction) -> None:
        self.func = func
        self.evaluations = 0

    def __call__(self, z: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        z = np.atleast_1d(np.asarray(z, dtype=complex))
        self.evaluations += z.size
        if z.size == 0:
            return np.zeros(0, complex), np.zeros(0, complex)
        fv, dv = self.func(z)
        fv = np.broadcast_to(np.asarray(fv, dtype=complex), z.shape)
        dv = np.broadcast_to(np.asarray(dv, dtype=complex), z.shape)
        return fv, dv

    def one(self, z: complex) -> tuple[complex, complex]:
        """Evaluate at a single point."""
        fv, dv = self(np.array([z], dtype=complex))
        return complex(fv[0]), complex(dv[0])
