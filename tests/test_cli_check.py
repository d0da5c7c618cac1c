"""`kinroots check` and `kinroots plasma` through typer's CliRunner.

Contract (docs/design.md, "User-facing contract"): exit 0 done, 2 bad input with one clear
message per problem and never a traceback; data on stdout, messages on stderr.
"""

from __future__ import annotations

import json
import math
import tempfile
from pathlib import Path
from typing import Any

import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from test_casefile import BASE, ERROR_CASES, mutated  # sibling test module (rootdir import)
from typer.testing import CliRunner

from kinroots.cli import app
from kinroots.io.case import default_case_path

CASES_DIR = Path(__file__).resolve().parent.parent / "cases"
CASE_FILES = sorted(CASES_DIR.glob("*.toml"))
runner = CliRunner()


def toml_value(v: Any) -> str:
    """Minimal TOML writer for test documents (inline tables and arrays)."""
    if isinstance(v, bool):
        return "true" if v else "false"
    if isinstance(v, int):
        return str(v)
    if isinstance(v, float):
        return (
            "nan"
            if math.isnan(v)
            else ("inf" if v == math.inf else "-inf" if v == -math.inf else repr(v))
        )
    if isinstance(v, str):
        return json.dumps(v)
    if isinstance(v, list):
        return "[" + ", ".join(toml_value(x) for x in v) + "]"
    if isinstance(v, dict):
        return (
            "{" + ", ".join(f"{json.dumps(str(k))} = {toml_value(x)}" for k, x in v.items()) + "}"
        )
    raise TypeError(type(v))


def toml_document(data: dict[str, Any]) -> str:
    return "\n".join(f"{json.dumps(str(k))} = {toml_value(v)}" for k, v in data.items()) + "\n"


def run(*args: str) -> Any:
    result = runner.invoke(app, list(args))
    text = result.stdout + result.stderr
    assert "Traceback" not in text, text
    assert result.exception is None or isinstance(result.exception, SystemExit), text
    return result


def test_toml_writer_round_trips() -> None:
    import tomllib

    assert tomllib.loads(toml_document(BASE)) == BASE


@pytest.mark.parametrize(
    "changes, needles", [c[1:] for c in ERROR_CASES], ids=[c[0] for c in ERROR_CASES]
)
def test_check_reports_each_error_class(
    tmp_path: Path, changes: dict[str, Any], needles: tuple[str, ...]
) -> None:
    path = tmp_path / "bad.toml"
    path.write_text(toml_document(mutated(**changes)), encoding="utf-8")
    result = run("check", str(path))
    assert result.exit_code == 2
    assert result.stdout == ""
    errors = [ln for ln in result.stderr.splitlines() if ln.startswith("error: ")]
    assert len(errors) == 1, result.stderr
    assert str(path) in errors[0]
    for needle in needles:
        assert needle in errors[0], (needle, errors[0])


@pytest.mark.parametrize(
    "content, needle",
    [
        (b"\xff\xfe\x00garbage", "UTF-8"),
        (b'title = "x"\n[wave\n', "line 2"),
        (b"", "title: missing"),
    ],
    ids=["bytes", "malformed", "empty"],
)
def test_check_file_level_errors(tmp_path: Path, content: bytes, needle: str) -> None:
    path = tmp_path / "f.toml"
    path.write_bytes(content)
    result = run("check", str(path))
    assert result.exit_code == 2 and needle in result.stderr


def test_check_missing_file_and_directory(tmp_path: Path) -> None:
    r = run("check", str(tmp_path / "none.toml"))
    assert r.exit_code == 2 and "file not found" in r.stderr
    r = run("check", str(tmp_path))
    assert r.exit_code == 2 and "directory" in r.stderr
    r = run("plasma", str(tmp_path))
    assert r.exit_code == 2 and r.stdout == ""


def test_check_warnings_go_to_stderr(tmp_path: Path) -> None:
    path = tmp_path / "w.toml"
    path.write_text(toml_document(mutated(species__1__density=2e18)), encoding="utf-8")
    r = run("check", str(path))
    assert r.exit_code == 0
    assert r.stdout.splitlines()[0] == "ok"
    assert "quasi-neutral" in r.stderr and "quasi-neutral" not in r.stdout


def test_default_case_used_when_omitted() -> None:
    for args in (["check"], ["check", "--default"]):
        r = run(*args)
        assert r.exit_code == 0 and "default case" in r.stderr
        assert r.stdout.splitlines()[0] == "ok"
    r = run("check", "--default", str(default_case_path()))
    assert r.exit_code == 2


@pytest.mark.parametrize(
    "path",
    [*CASE_FILES, default_case_path()],
    ids=[p.name for p in [*CASE_FILES, default_case_path()]],
)
def test_shipped_cases(path: Path) -> None:
    r = run("check", str(path))
    assert r.exit_code == 0, r.stderr
    lines = r.stdout.splitlines()
    assert lines[0] == "ok" and len(lines) == 3
    # the window tried at the first and last k: its zeros counted, nothing to warn about
    assert lines[2].startswith("window Re ω [") and "not counted" not in lines[2], lines[2]
    assert "zeros by the boundary winding" in lines[2]
    # shipped cases are neutral and current-free, their windows surveyable: no warnings
    assert r.stderr == ""
    table = run("plasma", str(path))
    assert table.exit_code == 0 and "λ_D" in table.stdout
    js = run("plasma", str(path), "--json")
    assert js.exit_code == 0
    data = json.loads(js.stdout)  # nothing else on stdout
    assert data["source"] == str(path)
    assert len(data["species"]) >= 2
    magnetized = data["magnetic_field_T"] > 0
    assert (data["plasma"]["si"]["alfven_speed"] is not None) == magnetized
    assert data["units"]["omega_unit_rad_per_s"] > 0


def test_at_least_four_example_cases() -> None:
    assert len(CASE_FILES) >= 4
    for path in CASE_FILES:
        assert path.read_text(encoding="utf-8").startswith("#"), path  # leading comment


def test_help_shows_examples() -> None:
    for cmd in ("check", "plasma"):
        r = runner.invoke(app, [cmd, "--help"])
        assert r.exit_code == 0 and "Example: kinroots" in r.stdout


# fuzz: mangled case files never give a traceback ---------------------------------------

toml_scalars = st.one_of(
    st.booleans(),
    st.integers(min_value=-(2**63), max_value=2**63 - 1),
    st.floats(),
    st.text(max_size=12),
)
toml_values = st.recursive(
    toml_scalars,
    lambda inner: st.one_of(
        st.lists(inner, max_size=3), st.dictionaries(st.text(max_size=6), inner, max_size=3)
    ),
    max_leaves=6,
)


def _paths(node: Any, prefix: tuple = ()) -> list[tuple]:
    out = []
    if isinstance(node, dict):
        for k, v in node.items():
            out.append((*prefix, k))
            out.extend(_paths(v, (*prefix, k)))
    elif isinstance(node, list):
        for i, v in enumerate(node):
            out.append((*prefix, i))
            out.extend(_paths(v, (*prefix, i)))
    return out


@st.composite
def mangled_documents(draw: st.DrawFn) -> bytes:
    import copy

    if draw(st.integers(0, 9)) == 0:
        return draw(st.binary(max_size=200))
    data = copy.deepcopy(BASE)
    for _ in range(draw(st.integers(1, 4))):
        paths = _paths(data)
        if not paths:
            break
        path = draw(st.sampled_from(paths))
        parent: Any = data
        for part in path[:-1]:
            parent = parent[part]
        action = draw(st.sampled_from(["delete", "replace", "extra"]))
        if action == "delete":
            del parent[path[-1]]
        elif action == "replace":
            parent[path[-1]] = draw(toml_values)
        elif isinstance(parent, dict):
            parent[draw(st.text(min_size=1, max_size=8))] = draw(toml_values)
    return toml_document(data).encode("utf-8", "surrogatepass")


@settings(max_examples=80, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(content=mangled_documents())
def test_check_never_tracebacks(content: bytes) -> None:
    with tempfile.TemporaryDirectory() as tmp:
        path = Path(tmp) / "case.toml"
        path.write_bytes(content)
        result = run("check", str(path))
        assert result.exit_code in (0, 2)
        if result.exit_code == 2:
            assert result.stderr.strip() and all(
                ln.startswith(("error: ", "kinroots: ")) for ln in result.stderr.splitlines()
            )


# check tries the window -------------------------------------------------------------------


def _edited(tmp_path: Path, source: str, old: str, new: str) -> Path:
    text = (CASES_DIR / source).read_text(encoding="utf-8")
    assert old in text
    path = tmp_path / source
    path.write_text(text.replace(old, new), encoding="utf-8")
    return path


def test_check_warns_when_a_landau_term_overflows_on_the_bottom_edge(tmp_path: Path) -> None:
    """Argon ions at Ti = 0.03 eV, window down to Im ω = -0.5 ω_pi: at k λ_De = 0.02 the
    bottom edge runs ~177 ion resonance widths below the axis, where exp(-ζ²) exceeds
    double precision (no constant rescaling can help an overflowing term)."""
    import re

    from scipy.constants import e, epsilon_0, m_u

    path = _edited(tmp_path, "argon_ion_acoustic.toml", "imag = [-0.002, 0.1]",
                   "imag = [-0.5, 0.1]")
    r = run("check", str(path))
    assert r.exit_code == 0, r.stderr  # a warning, not an error
    assert r.stdout.splitlines()[0] == "ok"
    assert "not counted at k = 0.02" in r.stdout
    (line,) = [ln for ln in r.stderr.splitlines() if ln.startswith("warning: ")]
    assert str(path) in line and "at k = 0.02" in line
    for words in ("cannot be surveyed", "bottom", "Landau term exp(-ζ²) of species Ar+",
                  "resonance width", "below the real axis", "search.imag"):
        assert words in line, (words, line)
    assert "None" not in r.stdout + r.stderr and "Error" not in r.stderr
    # the size claimed for the term: |exp(-ζ²)| = exp(Im ζ² - Re ζ²) at the edge's point
    # on Re ω = 0.005 ω_pi, with ζ = ω/(k w_i) (k along z, no drift) from SI constants
    n, te, ti, m_i = 1e17, 3.0, 0.03, 39.948 * m_u
    w_pi = math.sqrt(n * e * e / (epsilon_0 * m_i))
    debye = math.sqrt(epsilon_0 * te * e / (n * e * e))
    k = 0.02 / debye
    w_i = math.sqrt(2.0 * ti * e / m_i)
    zeta = complex(0.005, -0.5) * w_pi / (k * w_i)
    decades = -(zeta * zeta).real / math.log(10.0)
    claimed = float(re.search(r"reaches about 1e(\d+)", line).group(1))
    assert claimed == pytest.approx(decades, abs=1.0)
    depth = float(re.search(r"runs (\d+) times", line).group(1))
    assert depth == pytest.approx(0.5 * w_pi / (k * w_i), abs=1.0)


def test_check_warns_when_the_survey_must_split_the_window(tmp_path: Path) -> None:
    """The same argon window to Im ω = -0.13 ω_pi: exp(-ζ²) of the ions about 1e916 on
    the bottom edge (46 widths deep), |D| spanning more than one constant scale can hold:
    the survey splits the window (costly), which check says before it is tried."""
    path = _edited(tmp_path, "argon_ion_acoustic.toml", "imag = [-0.002, 0.1]",
                   "imag = [-0.13, 0.1]")
    r = run("check", str(path))
    assert r.exit_code == 0, r.stderr
    (line,) = [ln for ln in r.stderr.splitlines() if ln.startswith("warning: ")]
    for words in ("at k = 0.02:", "more than double precision holds",
                  "Landau term exp(-ζ²) of species Ar+", "46 times its resonance width",
                  "sub-boxes", "costly"):
        assert words in line, (words, line)


def test_check_warns_of_a_pole_next_to_an_edge(tmp_path: Path) -> None:
    """Perpendicular ion Bernstein waves (k∥ = 0): the proton's first cyclotron harmonic
    is a pole of D, here 1e-5 Ω_p left of the window's left edge."""
    path = _edited(tmp_path, "ion_bernstein_perpendicular.toml", "real = [1.02, 2.98]",
                   "real = [1.00001, 2.98]")
    r = run("check", str(path))
    assert r.exit_code == 0, r.stderr
    (line,) = [ln for ln in r.stderr.splitlines() if ln.startswith("warning: ")]
    assert "at k = 0.1, k = 4:" in line  # one line for both k
    for words in ("cyclotron harmonic 1Ω of species H+", "pole of D at k∥ = 0",
                  "left edge", "move that edge away"):
        assert words in line, (words, line)
    # on the edge itself the case is refused (exit 2, the key named)
    path = _edited(tmp_path, "ion_bernstein_perpendicular.toml", "real = [1.02, 2.98]",
                   "real = [1.0, 2.98]")
    r = run("check", str(path))
    assert r.exit_code == 2 and "search.real" in r.stderr


def test_check_notes_a_window_the_constant_rescaling_handles(tmp_path: Path) -> None:
    """Weibel with hot protons, window to Im ω = -0.01 ω_pe: |D| about 1e490 on the bottom
    edge, each term finite: a note (no warning), and the zero count from the boundary
    winding equals the survey's own count (subdivision and Newton, another algorithm)."""
    from test_overflow_survey import WEIBEL  # sibling test module (rootdir import)

    from kinroots.io.case import load_case
    from kinroots.study.problem import survey

    path = tmp_path / "weibel.toml"
    path.write_text(WEIBEL, encoding="utf-8")
    r = run("check", str(path))
    assert r.exit_code == 0 and "warning" not in r.stderr, r.stderr
    assert "note: window at k = 0.5: |D| exceeds double precision on the bottom" in r.stderr
    assert "divides D by a constant power of two" in r.stderr
    s = survey(load_case(path), 0.5)
    assert s.complete and s.count is not None
    assert f"{s.count} at k = 0.5," in r.stdout.splitlines()[2]


def test_check_tries_the_window_chosen_from_the_plasma(tmp_path: Path) -> None:
    """Without [search] check says which window kinroots chooses (as solve would) and
    tries that one."""
    text = (CASES_DIR / "argon_ion_acoustic.toml").read_text(encoding="utf-8")
    head, _, tail = text.partition("[search]")
    path = tmp_path / "nosearch.toml"
    path.write_text(head, encoding="utf-8")
    assert "real" in tail and "[search]" not in head
    r = run("check", str(path))
    assert r.exit_code == 0, r.stderr
    assert "search window chosen from the plasma" in r.stderr and "warning" not in r.stderr
    line = r.stdout.splitlines()[2]
    assert line.startswith("window Re ω [") and "not counted" not in line
