"""Same roots before and after a change of the survey: every example case at its first k.

``.venv/bin/python benchmarks/bench_survey_roots.py [REV]`` (default ``main``) extracts
REV with ``git archive`` into a temporary folder, surveys every ``cases/*.toml`` of this
checkout at the first k of its scan, in its own window, and the wide windows of
``bench_survey.py``, once with REV's kinroots and once
with this checkout's (each in a fresh interpreter), and prints per case the zero count, the
converged roots, the evaluations and the largest distance between matched roots
(relative to max(1, |ω|)).  A case passes when both counts and both sets of converged roots
agree (same number, every root within 1e-9), and the script exits 1 if any does not.
"""

from __future__ import annotations

import json
import os
import pathlib
import subprocess
import sys
import tempfile

import bench_survey  # this folder is on sys.path when run as a script

ROOT = pathlib.Path(__file__).resolve().parents[1]
TOL = 1e-9
#: The wide windows of ``bench_survey.py`` (many damped roots), surveyed as well.
WIDE = [(name, box, k) for name, box, k in bench_survey.WIDE]

_CHILD = r"""
import json, pathlib, sys
import kinroots
from kinroots.io.case import load_case
from kinroots.study.problem import survey
tree = pathlib.Path(sys.argv[1]).resolve()
assert pathlib.Path(kinroots.__file__).resolve().is_relative_to(tree), kinroots.__file__
out = {}
for path in sorted(pathlib.Path(sys.argv[2]).glob("*.toml")):
    case = load_case(path)
    res = survey(case, float(case.k_values[0]))
    out[path.stem] = res
for name, box, k in json.loads(sys.argv[3]):
    out[f"{name[:22]} wide"] = survey(load_case(pathlib.Path(sys.argv[2]) / f"{name}.toml"),
                                      k, box=tuple(box))
print(json.dumps({key: {
    "count": res.count, "complete": res.complete, "evaluations": res.evaluations,
    "roots": [[r.value.real, r.value.imag] for r in res.roots if r.converged],
} for key, res in out.items()}))
"""


def run(tree: pathlib.Path) -> dict:
    """Survey results of every case with the kinroots in ``tree``."""
    env = dict(os.environ, PYTHONPATH=str(tree))
    done = subprocess.run([sys.executable, "-c", _CHILD, str(tree), str(ROOT / "cases"),
                           json.dumps(WIDE)],
                          env=env, capture_output=True, text=True, check=False, cwd=tree)
    if done.returncode:
        sys.exit(f"survey with {tree} failed:\n{done.stderr}")
    return json.loads(done.stdout.splitlines()[-1])


def distance(a: list, b: list) -> float:
    """Largest relative distance of a root of ``a`` to the nearest of ``b`` and back."""
    za = [complex(*v) for v in a]
    zb = [complex(*v) for v in b]
    if not za or not zb:
        return 0.0 if len(za) == len(zb) else float("inf")
    d1 = max(min(abs(x - y) for y in zb) / max(1.0, abs(x)) for x in za)
    d2 = max(min(abs(x - y) for y in za) / max(1.0, abs(x)) for x in zb)
    return max(d1, d2)


def main() -> None:
    rev = sys.argv[1] if len(sys.argv) > 1 else "main"
    with tempfile.TemporaryDirectory() as tmp:
        archive = subprocess.run(["git", "-C", str(ROOT), "archive", rev],
                                 capture_output=True, check=True).stdout
        subprocess.run(["tar", "-x", "-C", tmp], input=archive, check=True)
        before = run(pathlib.Path(tmp))
    after = run(ROOT)
    print(f"{'case (first k) / wide window':34s} {'count':>11s} {'roots':>9s} {'evaluations':>13s} "
          f"{'max distance':>12s}  same")
    bad = 0
    for name in sorted(after):
        b, a = before.get(name), after[name]
        if b is None:
            print(f"{name:34s} (not in {rev})")
            continue
        d = distance(b["roots"], a["roots"])
        same = (b["count"] == a["count"] and len(b["roots"]) == len(a["roots"])
                and b["complete"] == a["complete"] and d <= TOL)
        bad += not same
        print(f"{name[:34]:34s} {b['count']!s:>5s}/{a['count']!s:<5s} "
              f"{len(b['roots']):4d}/{len(a['roots']):<4d} {b['evaluations']:6d}/"
              f"{a['evaluations']:<6d} {d:12.1e}  {'yes' if same else 'NO'}")
    print(f"cases differing: {bad} (before = {rev}, after = this checkout)")
    sys.exit(1 if bad else 0)


if __name__ == "__main__":
    main()
