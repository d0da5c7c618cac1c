"""Branch tracing across a real parameter (kinroots.roots.trace / Tracer).

Reference branches are closed forms by construction: each family is
f_p(z) = Π (z − z_k(p)) with analytic z_k(p) written below, or e^z − c(p) whose root is
log c(p) (principal branch, continuous here).
"""

from __future__ import annotations

import numpy as np
import pytest
from _problems import product_of_linear

from kinroots.roots import BranchEnd, Tracer, find_roots, match_new_roots, trace

P_STAR, EPS = 0.5, 1e-3


def _pair(p: float, kind: str) -> tuple[complex, complex]:
    """Two analytic branches that pass within about EPS of each other at P_STAR."""
    a = 0.3 + 0.2j + 0.5 * p + 0.8 * p * p
    if kind == "crossing":  # straight through each other, curved paths
        u = (p - P_STAR) * (1 + 0.5j) + 0.5j * EPS + 0.6 * (p - P_STAR) ** 2
    else:  # avoided crossing: each turns back (principal sqrt, Re of radicand > 0)
        u = np.sqrt(((p - P_STAR) * (1 + 0.5j)) ** 2 + (EPS / 2) ** 2)
    return a + u, a - u


@pytest.mark.parametrize("blocks", [False, True])
@pytest.mark.parametrize("kind", ["crossing", "avoided"])
def test_near_crossing_keeps_identities(kind: str, blocks: bool) -> None:
    sep = min(abs(np.subtract(*_pair(p, kind))) for p in np.linspace(0.49, 0.51, 2001))
    assert sep < 2e-3  # the pair does come that close
    fam = lambda p: product_of_linear(_pair(p, kind))  # noqa: E731
    # with speculative blocks (pairs), 201 values so that the blocks are long
    params = np.linspace(0.0, 1.0, 201 if blocks else 21)
    pairs = _pairs_of(fam) if blocks else None
    branches = trace(fam, params, list(_pair(0.0, kind)), box=(-2.0, 4.0, -2.0, 2.0),
                     pairs=pairs)
    assert pairs is None or pairs.calls > 0
    for b in branches:
        assert b.end_reason is BranchEnd.ACTIVE
        assert np.allclose(b.params, params)
        ref = np.array([_pair(p, kind)[b.id] for p in b.params])
        assert np.max(np.abs(b.values - ref)) < 1e-9


def test_branch_leaving_box_ends_at_right_parameter() -> None:
    # root p(1 + 0.2i) − 0.5 crosses Re z = 2 at p = 2.5 (Im there 0.5 < 1)
    fam = lambda p: product_of_linear([p * (1 + 0.2j) - 0.5, 5j])  # noqa: E731
    (b,) = trace(fam, np.linspace(0.0, 3.0, 16), [-0.5], box=(-1.0, 2.0, -1.0, 1.0))
    assert b.end_reason is BranchEnd.LEFT_REGION
    assert abs(b.end_param - 2.5) < 1e-6
    assert b.params[-1] <= 2.5


def test_smooth_branch_costs_few_evaluations() -> None:
    # root of e^z − (2 + p + 0.5i p²) is log(2 + p + 0.5i p²)
    fam = lambda p: (lambda z: (np.exp(z) - (2 + p + 0.5j * p * p), np.exp(z)))  # noqa: E731
    params = np.linspace(0.0, 2.0, 41)
    (b,) = trace(fam, params, [np.log(2)], box=(-1.0, 3.0, -3.0, 3.0))
    ref = np.log(2 + b.params + 0.5j * b.params**2)
    assert np.max(np.abs(b.values - ref)) < 1e-9
    per_point = [r.evaluations for _, r in b.points[1:]]
    assert np.median(per_point) <= 4
    assert b.evaluations / (len(b.path) - 1) <= 4


def test_merging_branches_reported() -> None:
    # z = a ± sqrt(c(p)), c = 0.25 − p: the two roots coincide at p = 0.25 exactly
    def roots(p: float) -> tuple[complex, complex]:
        s = np.sqrt(complex(0.25 - p))
        return 0.1 + s, 0.1 - s

    params = np.linspace(0.0, 0.5, 11)
    b0, b1 = trace(lambda p: product_of_linear(roots(p)), params, list(roots(0.0)),
                   box=(-2.0, 2.0, -2.0, 2.0), min_step=1e-6)
    ended = [b for b in (b0, b1) if b.end_reason is not BranchEnd.ACTIVE]
    assert ended, "coinciding roots must not be traced as two healthy branches"
    for b in ended:
        assert b.end_reason in (BranchEnd.MERGED, BranchEnd.FAILED)
        assert abs(b.end_param - 0.25) < 1e-2
        assert b.note
        if b.end_reason is BranchEnd.MERGED:
            assert b.merged_with == 1 - b.id


def test_failed_start_recorded() -> None:
    fam = lambda p: (lambda z: (z * z + 1 + p, 2 * z))  # noqa: E731  zeros ±i√(1+p)
    (b,) = trace(fam, [0.0, 1.0], [0.5], box=(-2.0, 2.0, -2.0, 2.0))
    assert b.end_reason is BranchEnd.FAILED
    assert not b.points[0][1].converged and b.note


def test_interleaved_survey_adds_new_branch() -> None:
    # roots 0.5 + p·0.3i and −0.5 − p (by construction); only the first is traced at first
    def roots(p: float) -> list[complex]:
        return [0.5 + 0.3j * p, -0.5 - p]

    fam = lambda p: product_of_linear(roots(p))  # noqa: E731
    box = (-2.0, 2.0, -1.0, 1.0)
    tr = Tracer(fam, box=box, param=0.0)
    tr.add_branch(0.5)
    for p in (0.1, 0.2, 0.3):
        tr.advance_to(p)
    survey = find_roots(fam(0.3), box)
    new = match_new_roots([b.points[-1][1].value for b in tr.active], survey.roots, 1e-6)
    assert len(new) == 1 and abs(new[0].value - (-0.8)) < 1e-12
    tr.add_branch(new[0], 0.3)
    for p in (0.4, 0.5):
        tr.advance_to(p)
    b0, b1 = tr.branches
    assert abs(b0.points[-1][1].value - roots(0.5)[0]) < 1e-10
    assert abs(b1.points[-1][1].value - roots(0.5)[1]) < 1e-10
    assert b1.points[0][0] == 0.3


# ---------------------------------------------------------------- speculative blocks
def _pairs_of(family):  # noqa: ANN001, ANN202 - test helper
    """The pair form of a family, element by element (what ``Tracer(pairs=...)`` takes),
    counting its calls so that a test can tell that blocks were used."""

    def pairs(p: np.ndarray, z: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        pairs.calls += 1
        out = [family(float(pj))(np.array([zj])) for pj, zj in zip(p, z, strict=True)]
        return (np.array([o[0][0] for o in out], dtype=complex),
                np.array([o[1][0] for o in out], dtype=complex))

    pairs.calls = 0
    return pairs


def test_blocks_match_single_steps_and_count_every_evaluation() -> None:
    fam = lambda p: (lambda z: (np.exp(z) - (2 + p + 0.5j * p * p), np.exp(z)))  # noqa: E731
    params = np.linspace(0.0, 2.0, 401)
    (single,) = trace(fam, params, [np.log(2)], box=(-1.0, 3.0, -3.0, 3.0))
    pairs = _pairs_of(fam)
    tr = Tracer(fam, box=(-1.0, 3.0, -3.0, 3.0), param=0.0, rtol=1e-10, pairs=pairs)
    (b,) = [tr.add_branch(np.log(2))]
    n_calls = []
    tr.advance_through(params[1:], on_target=n_calls.append)
    assert n_calls == list(range(1, 401))
    ref = np.log(2 + b.params + 0.5j * b.params**2)
    assert np.allclose(b.params, single.params)
    assert np.max(np.abs(b.values - ref)) < 1e-9
    assert np.max(np.abs(b.values - single.values)) < 1e-9
    # blocks were used: far fewer pair calls than points
    assert pairs.calls < 100
    # each point's own count, and the branch total includes rejected block work
    per_point = [r.evaluations for _, r in b.points[1:]]
    assert np.median(per_point) <= 4
    assert b.evaluations >= sum(per_point)
    assert all(r.converged and r.refined is not None for _, r in b.points)


def test_blocks_stop_where_a_branch_leaves_the_box() -> None:
    fam = lambda p: product_of_linear([p * (1 + 0.2j) - 0.5, 5j])  # noqa: E731
    (b,) = trace(fam, np.linspace(0.0, 3.0, 301), [-0.5], box=(-1.0, 2.0, -1.0, 1.0),
                 pairs=_pairs_of(fam))
    assert b.end_reason is BranchEnd.LEFT_REGION
    assert abs(b.end_param - 2.5) < 1e-6
    assert b.params[-1] <= 2.5


def test_blocks_report_merging_branches() -> None:
    def roots(p: float) -> tuple[complex, complex]:
        s = np.sqrt(complex(0.25 - p))
        return 0.1 + s, 0.1 - s

    fam = lambda p: product_of_linear(roots(p))  # noqa: E731
    b0, b1 = trace(fam, np.linspace(0.0, 0.5, 101), list(roots(0.0)),
                   box=(-2.0, 2.0, -2.0, 2.0), min_step=1e-6, pairs=_pairs_of(fam))
    ended = [b for b in (b0, b1) if b.end_reason is not BranchEnd.ACTIVE]
    assert ended
    for b in ended:
        assert b.end_reason in (BranchEnd.MERGED, BranchEnd.FAILED)
        assert abs(b.end_param - 0.25) < 1e-2

