"""Maximum growth, grid points as pure functions, local pool vs Dask cluster."""

from __future__ import annotations

import copy
import math
from dataclasses import replace

import numpy as np
import pytest

from kinroots.io.case import load_case, parse_case
from kinroots.roots import polish
from kinroots.study.problem import function_at, window
from kinroots.study.sweep import max_growth, run_points, sweep_point

CASE = "cases/sweep_proton_anisotropy.toml"


def small_case(points_x: int = 2, points_y: int = 2, k_points: int = 4):
    raw = copy.deepcopy(load_case(CASE).raw)
    raw["scan"]["k"] = {"start": 0.2, "stop": 0.8, "points": k_points}
    raw["sweep"]["x"].update(points=points_x, start=1.0, stop=2.0)
    raw["sweep"]["y"].update(points=points_y, start=1.8, stop=2.2)
    return parse_case(raw, CASE)


def test_refined_maximum_beats_a_fine_brute_force_grid():
    # Independent check (common practice): γ(k) on a 201-point grid around the refined k,
    # each root polished by Newton from its neighbour, never exceeds the Brent maximum
    # by more than the grid's own resolution.
    case = small_case()
    case = replace(case, plasma=case.plasma)
    g = max_growth(case)
    assert g.growing and not g.k_at_edge
    coarse = max_growth(case, refine=False)
    assert g.growth >= coarse.growth
    ks = np.linspace(g.k - 0.1, g.k + 0.1, 201)
    z = g.omega
    best = -math.inf
    for k in ks:
        r = polish(function_at(case, k), z, rtol=1e-12, region=window(case))
        assert r.converged
        z = r.value
        best = max(best, z.imag)
    # γ is quadratic near the maximum: grid step 1e-3 → error ≲ 1e-6 γ''; allow 1e-7 rel.
    assert best <= g.growth * (1 + 1e-7)
    assert best >= g.growth * (1 - 1e-4)


def test_grid_point_is_pure():
    case = small_case()
    a = sweep_point(case, 1)
    b = sweep_point(case, 1)
    assert a == b and a["i"] == 0 and a["j"] == 1 and a["y"] == 2.2


@pytest.mark.slow
def test_local_pool_and_dask_cluster_give_identical_rows():
    from dask.distributed import LocalCluster

    case = small_case(points_x=2, points_y=1, k_points=3)
    local: dict[int, dict] = {}
    run_points(case, "sweep", [0, 1], lambda i, r: local.__setitem__(i, r), workers=2)
    remote: dict[int, dict] = {}
    with LocalCluster(host="127.0.0.1", n_workers=2, threads_per_worker=1,
                      processes=True, dashboard_address=None) as cluster:
        run_points(case, "sweep", [0, 1], lambda i, r: remote.__setitem__(i, r),
                   scheduler=cluster.scheduler_address)
    assert set(local) == {0, 1}
    assert local == remote  # exact equality, every float bit for bit
