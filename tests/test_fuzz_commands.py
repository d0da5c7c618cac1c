"""Mutation fuzz of every command (issue 19): the example cases, one value replaced.

Each example runs one command in-process (typer's runner) on one shipped case, made
small (two k points, a 1 x 2 sweep grid, two launch frequencies) and mutated at one key:
a hostile value (extremes, wrong types, markup, formula and control characters) or the
edge of the documented limit of that key (`kinroots.io.limits`), where whatever passes
``check`` must still compute.  Asserted for every run: exit code 0, 1 or 2 (never 3, an
internal error, or a crash); no traceback text; a run that exits 2 leaves no output
folder; each run ends within a time limit.

Under CI hypothesis is derandomized (tests/conftest.py).  ``make fuzz`` sets
``KINROOTS_FUZZ_EXAMPLES`` for a longer local exploration.
"""

from __future__ import annotations

import copy
import os
import signal
import tempfile
import tomllib
from pathlib import Path
from typing import Any

import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from test_cli_check import toml_document  # sibling test module (rootdir import)
from typer.testing import CliRunner

from kinroots.cli import app
from kinroots.io.limits import LIMITS

CASES = sorted((Path(__file__).resolve().parent.parent / "cases").glob("*.toml"))
EXAMPLES = int(os.environ.get("KINROOTS_FUZZ_EXAMPLES", "0"))
#: Seconds allowed per run (the machine may be loaded).
TIME_LIMIT = 180
runner = CliRunner()

HOSTILE: list[Any] = [
    1e-300, 1e300, -1.0, 0, 10**30, float("nan"), float("inf"), True, "", [], {},
    "$\\notacommand$", "[bold]x[/italic]", "π", "=1+1", "a\x07b", 10**9, [1e300, 1e301],
]
#: Case keys (last path element) whose documented limits are probed at both ends.
LIMIT_OF = {
    "B": "magnetic_field.B", "charge": "species.charge", "mass": "species.mass",
    "density": "species.density", "temperature": "species.temperature",
    "temperature_par": "species.temperature", "temperature_perp": "species.temperature",
    "collision_frequency": "species.collision_frequency", "tolerance": "solver.tolerance",
    "harmonic_tolerance": "solver.harmonic_tolerance",
}


def small(data: dict[str, Any]) -> dict[str, Any]:
    data = copy.deepcopy(data)
    data["scan"]["k"]["points"] = 2
    for axis in ("x", "y"):
        if axis in data.get("sweep", {}):
            data["sweep"][axis]["points"] = 1 if axis == "x" else 2
    if "across" in data.get("threshold", {}):
        data["threshold"]["across"]["points"] = 1
    if isinstance(data.get("launch", {}).get("frequency"), dict):
        data["launch"]["frequency"]["points"] = 2
    return data


BASES = [(p.name, small(tomllib.loads(p.read_text(encoding="utf-8")))) for p in CASES]


def leaves(node: Any, prefix: tuple = ()) -> list[tuple]:
    if isinstance(node, dict):
        return [leaf for k, v in node.items() for leaf in leaves(v, (*prefix, k))]
    if isinstance(node, list) and node and isinstance(node[0], dict):
        return [leaf for i, v in enumerate(node) for leaf in leaves(v, (*prefix, i))]
    return [prefix]


def values_for(path: tuple) -> list[Any]:
    out = list(HOSTILE)
    limit = LIMITS.get(LIMIT_OF.get(str(path[-1]), ""))
    if limit is not None:
        out += [limit.lo, limit.hi, limit.lo * 0.5, limit.hi * 2]
    return out


@st.composite
def mutated_cases(draw: st.DrawFn) -> tuple[str, dict[str, Any], str]:
    name, data = draw(st.sampled_from(BASES))
    data = copy.deepcopy(data)
    path = draw(st.sampled_from(leaves(data)))
    value = draw(st.sampled_from(values_for(path)))
    node: Any = data
    for part in path[:-1]:
        node = node[part]
    node[path[-1]] = value
    return name, data, f"{'.'.join(map(str, path))} = {value!r}"


def run_with_limit(args: list[str]) -> Any:
    def too_long(*_: Any) -> None:
        raise TimeoutError(f"kinroots {' '.join(args[:1])} ran over {TIME_LIMIT} s")

    old = signal.signal(signal.SIGALRM, too_long)
    signal.alarm(TIME_LIMIT)
    try:
        return runner.invoke(app, args, catch_exceptions=True)
    finally:
        signal.alarm(0)
        signal.signal(signal.SIGALRM, old)


def assert_survives(command: str, case: tuple[str, dict[str, Any], str]) -> None:
    name, data, what = case
    with tempfile.TemporaryDirectory() as tmp:
        path = Path(tmp) / "case.toml"
        path.write_text(toml_document(data), encoding="utf-8", errors="surrogatepass")
        out = Path(tmp) / "out"
        args = [command, str(path)]
        if command not in ("check", "plasma"):
            args += ["-o", str(out)]
        if command == "scatter":
            args += ["--laser-wavelength", "532e-9", "--angle", "20"]
        if command in ("sweep", "threshold"):
            args += ["--workers", "1"]
        result = run_with_limit(args)
        text = result.stdout + result.stderr
        where = f"{command} on {name} with {what}"
        assert not isinstance(result.exception, TimeoutError), where
        assert result.exit_code in (0, 1, 2), f"{where}: exit {result.exit_code}\n{text}"
        assert result.exception is None or isinstance(result.exception, SystemExit), where
        assert "Traceback" not in text, f"{where}\n{text}"
        if result.exit_code == 2:
            assert result.stderr.strip(), where
            assert not out.exists(), f"{where}: exit 2 left {sorted(out.iterdir())}"


@settings(max_examples=EXAMPLES or 150, deadline=None,
          suppress_health_check=[HealthCheck.too_slow])
@given(case=mutated_cases(), command=st.sampled_from(["check", "plasma"]))
def test_check_and_plasma_survive_mutations(case: tuple, command: str) -> None:
    assert_survives(command, case)


@pytest.mark.slow
@settings(max_examples=EXAMPLES or 60, deadline=None,
          suppress_health_check=[HealthCheck.too_slow])
@given(case=mutated_cases(),
       command=st.sampled_from(["solve", "roots", "launch", "scatter", "sweep", "threshold"]))
def test_computing_commands_survive_mutations(case: tuple, command: str) -> None:
    assert_survives(command, case)
