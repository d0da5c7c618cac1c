"""Root layer: zeros of any analytic function (no physics here).

A function is passed as ``f(z) -> (f(z), f'(z))``, vectorized over a 1-D complex array.
"""

from kinroots.roots.newton import polish, verify
from kinroots.roots.result import Box, CountedFunction, RootResult, Status, SurveyResult
from kinroots.roots.survey import find_roots
from kinroots.roots.trace import Branch, BranchEnd, Tracer, match_new_roots, trace

__all__ = [
    "Box",
    "Branch",
    "BranchEnd",
    "CountedFunction",
    "RootResult",
    "Status",
    "SurveyResult",
    "Tracer",
    "find_roots",
    "match_new_roots",
    "polish",
    "trace",
    "verify",
]
