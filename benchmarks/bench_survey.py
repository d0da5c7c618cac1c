"""Survey cost: dispersion evaluations per survey, before and after issue 14, in one run.

For every example case (first, middle and last k of its scan, its own window), for
wider windows that hold many damped roots, and for the shared known-zero problems
(tests/_problems.py), the survey runs twice: with the baseline switch
(``kinroots.roots.survey._BASELINE``: the old cluster circle growing to twice its cell,
one circle per cluster root, one-point Newton, the nine-point noise check; and
``kinroots.roots.contour._EVEN_SPLIT`` off: failing boundary segments bisected) and as
it is now.  Printed: evaluations
(deterministic), wall time, and whether every root of the baseline is found again
("lost" counts those that are not; it must be 0) with the same count.

``--breakdown``: for the wide windows only, the evaluations of the survey as it is now
by step (outer boundary, cut lines, Newton, noise checks, circles).
"""

from __future__ import annotations

import collections
import importlib
import pathlib
import sys
import time

import numpy as np

ROOT = pathlib.Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT / "tests"))
from _problems import PROBLEMS  # noqa: E402

survey_module = importlib.import_module("kinroots.roots.survey")  # kinroots.roots: the API function
contour_module = importlib.import_module("kinroots.roots.contour")
from kinroots.io.case import load_case  # noqa: E402
from kinroots.roots import find_roots  # noqa: E402
from kinroots.roots.result import CountedFunction  # noqa: E402
from kinroots.study.problem import survey  # noqa: E402

#: Wide windows (normalized) on example cases, at one k each: many damped roots.
WIDE = [
    ("space_protons_alphas", (0.01, 3.0, -0.3, 0.5), 0.1),
    ("sweep_proton_anisotropy", (0.01, 3.0, -0.5, 0.8), 0.1),
    ("whistler_anisotropy_solar_wind", (0.01, 0.99, -0.2, 0.3), 1.4),
    ("ion_bernstein_perpendicular", (1.02, 4.98, -0.2, 0.2), 2.1),
    ("weibel_hot_electrons", (-0.5, 0.5, 0.001, 0.5), 0.9),
]


def _jobs():
    for path in sorted((ROOT / "cases").glob("*.toml")):
        case = load_case(path)
        ks = case.k_values
        for k in (ks[0], ks[len(ks) // 2], ks[-1]):
            yield f"{path.stem[:26]} k={float(k):.3g}", lambda c=case, k=float(k): survey(c, k)
    for name, box, k in WIDE:
        case = load_case(ROOT / "cases" / f"{name}.toml")
        yield f"{name[:20]} wide k={k:g}", lambda c=case, k=k, b=box: survey(c, k, box=b)
    for pid, p in PROBLEMS.items():
        yield pid, lambda p=p: find_roots(p.f, p.box, excluded=p.excluded)


def _run(job, baseline: bool):
    survey_module._BASELINE = baseline
    contour_module._EVEN_SPLIT = not baseline
    try:
        t0 = time.perf_counter()
        res = job()
        return res, time.perf_counter() - t0
    finally:
        survey_module._BASELINE = False
        contour_module._EVEN_SPLIT = True


#: Where ``--breakdown`` files each evaluation: the survey step it happens in (innermost).
_STEPS = (("_outer", "outer boundary"), ("_split", "cut lines"), ("_on_circle", "circles"),
          ("_ex_contribution", "excluded points"), ("_polish", "Newton"),
          ("_verified", "multiplicity circles"))


def breakdown() -> None:
    """Evaluations of the wide windows by survey step (the step's methods wrapped)."""
    steps = ["other"]
    counts: collections.Counter[str] = collections.Counter()
    counted = CountedFunction.__call__

    def call(self, z):
        before = self.evaluations
        out = counted(self, z)
        counts[steps[-1]] += self.evaluations - before
        return out

    def within(fn, label):
        def wrapped(*args, **kwargs):
            steps.append(label)
            try:
                return fn(*args, **kwargs)
            finally:
                steps.pop()
        return wrapped

    CountedFunction.__call__ = call
    for attr, label in _STEPS:
        setattr(survey_module._Survey, attr, within(getattr(survey_module._Survey, attr), label))
    for attr, label in (("newton_starts", "Newton"), ("hermite_noise_error", "noise checks")):
        setattr(survey_module, attr, within(getattr(survey_module, attr), label))
    for name, box, k in WIDE:
        counts.clear()
        res = survey(load_case(ROOT / "cases" / f"{name}.toml"), k, box=box)
        parts = ", ".join(f"{label} {n}" for label, n in counts.most_common() if n)
        print(f"{name[:30]:30s} {res.count!s:>4s} zeros {res.evaluations:6d}: {parts}")


def main() -> None:
    if "--breakdown" in sys.argv[1:]:
        breakdown()
        return
    print(f"{'survey':36s} {'roots':>5s} {'evals before':>12s} {'after':>6s} {'ratio':>6s} "
          f"{'time ratio':>10s} {'lost':>4s}")
    tot_b = tot_a = lost_all = 0
    for name, job in _jobs():
        rb, tb = _run(job, True)
        ra, ta = _run(job, False)
        good_b = [r.value for r in rb.roots if r.converged]
        good_a = np.array([r.value for r in ra.roots if r.converged], dtype=complex)
        box = rb.box
        scale = 1e-6 * float(np.hypot(box[1] - box[0], box[3] - box[2]))
        lost = sum(1 for z in good_b
                   if good_a.size == 0 or np.min(np.abs(good_a - z)) > scale)
        lost += int(rb.count != ra.count or (rb.complete and not ra.complete))
        tot_b += rb.evaluations
        tot_a += ra.evaluations
        lost_all += lost
        print(f"{name:36s} {len(good_b):5d} {rb.evaluations:12d} {ra.evaluations:6d} "
              f"{rb.evaluations / max(ra.evaluations, 1):6.2f} {tb / max(ta, 1e-9):10.2f} "
              f"{lost:4d}")
    print(f"{'total':36s} {'':5s} {tot_b:12d} {tot_a:6d} {tot_b / tot_a:6.2f} {'':10s} "
          f"{lost_all:4d}")
    print("(ratios before/after within this run; wall times move with machine load)")


if __name__ == "__main__":
    main()
