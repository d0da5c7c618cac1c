"""Every example case in cases/: it validates, solves with no failed point, and says what it is.

``tests/test_cli_solve.py`` checks that each case writes its files; this module checks the
stronger promise made for the shipped examples: ``kinroots solve`` exits 0, summary.json
reports no failed point and every survey complete (the argument-principle count matched
the roots found), and every table row converged.  A few cases also carry a physics check
on the branch they are built to show, each naming its source.
"""

from __future__ import annotations

import csv
import json
import math
from pathlib import Path

import pytest
from typer.testing import CliRunner

from kinroots.cli import app
from kinroots.io.case import load_case

runner = CliRunner()
CASES_DIR = Path(__file__).resolve().parent.parent / "cases"
CASES = sorted(CASES_DIR.glob("*.toml"))


def _rows(path: Path) -> list[dict[str, str]]:
    with open(path, newline="") as fh:
        return list(csv.DictReader(fh))


def _solve(path: Path, out: Path) -> tuple[dict, list[dict[str, str]]]:
    res = runner.invoke(app, ["solve", str(path), "-o", str(out)])
    assert res.exit_code == 0, res.output
    summary = json.loads((out / "summary.json").read_text())
    return summary, _rows(out / "branches.csv")


def test_cases_cover_the_four_models():
    kinds = set()
    for p in CASES:
        c = load_case(p)
        kinds.add((c.model, c.magnetized))
    assert kinds == {
        (m, b) for m in ("electrostatic", "electromagnetic") for b in (False, True)
    }, kinds
    assert len(CASES) >= 8


@pytest.mark.parametrize("path", CASES, ids=[p.stem for p in CASES])
def test_case_checks_and_has_leading_comment(path):
    res = runner.invoke(app, ["check", str(path)])
    assert res.exit_code == 0, res.output
    head = []
    for line in path.read_text(encoding="utf-8").splitlines():
        if not line.startswith("#"):
            break
        head.append(line)
    text = "\n".join(head)
    assert len(head) >= 5, f"{path.name}: leading comment block missing or too short"
    assert "What it models" in text, path.name


@pytest.mark.slow
@pytest.mark.parametrize("path", CASES, ids=[p.stem for p in CASES])
def test_case_solves_with_no_failed_point_and_complete_surveys(tmp_path, path):
    summary, rows = _solve(path, tmp_path)
    assert summary["failed_points"] == 0, summary["notes"]
    assert summary["surveys"], "no survey recorded"
    bad = [s for s in summary["surveys"] if not s["complete"] or s["count"] != s["found"]]
    assert not bad, bad
    assert summary["branches"], "the window holds no root at all"
    assert all(b["failed_points"] == 0 and b["end_reason"] != "failed"
               for b in summary["branches"]), summary["branches"]
    assert rows and all(r["converged"] == "true" for r in rows)
    # issue 18: every k counted (argument principle on the window's boundary) and the
    # table holds exactly that many rows there; no root appears twice at one k
    checks = summary["point_checks"]
    assert len(checks) == len(load_case(path).k_values)
    assert summary["unverified_points"] == 0, [c for c in checks if not c["verified"]]
    per_k: dict[str, list[complex]] = {}
    for r in rows:
        per_k.setdefault(r["k"], []).append(complex(float(r["omega_real"]),
                                                    float(r["omega_imag"])))
    for c in checks:
        assert len(per_k.get(repr(c["k"]), [])) == c["count"] == c["rows"], c
    for k, zs in per_k.items():
        for i, z in enumerate(zs):
            assert all(abs(z - w) > 1e-8 * abs(z) for w in zs[:i]), (k, zs)


# Physics the cases are built to show (each beside its source).
@pytest.mark.slow
def test_weibel_case_grows_only_below_the_cutoff(tmp_path):
    # Weibel cutoff k² c²/ω_pe² = T_hot/T_cold − 1 (E. S. Weibel, Phys. Rev. Lett. 2, 83
    # (1959); cutoff form from memory): with T_hot/T_cold = 4, k d_e = sqrt(3).  Mobile ions
    # shift it by a fraction of a percent; the growing branch must stop just short of it.
    summary, rows = _solve(CASES_DIR / "weibel_hot_electrons.toml", tmp_path)
    ks = [float(r["k"]) for r in rows if float(r["omega_imag"]) > 0]
    assert max(ks) < math.sqrt(3.0) < max(ks) + 0.15
    assert all(abs(float(r["omega_real"])) < 1e-8 for r in rows)  # purely growing
    # named by the rule of rows.wave_name: ω_r is rounding noise everywhere, δE ⊥ k, linear
    assert {r["wave_name"] for r in rows} == {"purely growing, transverse, linear"}
    assert summary["fastest_growing"]["omega_imag"] > 0.01


@pytest.mark.slow
def test_whistler_case_grows_only_below_the_resonant_frequency(tmp_path):
    # Kennel & Petschek, J. Geophys. Res. 71, 1 (1966): electron anisotropy A = T⊥/T∥ − 1
    # destabilizes parallel whistlers only for ω < |Ω_ce| A/(A + 1) = 0.5 |Ω_ce| here.
    summary, rows = _solve(CASES_DIR / "whistler_anisotropy_solar_wind.toml", tmp_path)
    growing = [r for r in rows if float(r["omega_imag"]) > 1e-6]
    damped = [r for r in rows if float(r["omega_imag"]) < -1e-6]
    assert growing and damped
    assert max(float(r["omega_real"]) for r in growing) < 0.5
    assert min(float(r["omega_real"]) for r in damped if float(r["k"]) > 0.5) > 0.49


@pytest.mark.slow
def test_oblique_electron_case_starts_at_the_cold_plasma_roots(tmp_path):
    # Cold magnetized plasma, electrostatic limit (T. H. Stix, Waves in Plasmas (1992),
    # ch. 4, from memory): ω² = ½[ω_UH² ± sqrt(ω_UH⁴ − 4 ω_pe² Ω² cos²θ)]; warm electrons
    # shift the roots at k ρ_e = 0.05 by a few 1e-3.
    _, rows = _solve(CASES_DIR / "magnetized_oblique_electron_waves.toml", tmp_path)
    first = sorted(float(r["omega_real"]) for r in rows if float(r["k"]) == 0.05)
    wpe2, wc2, c2 = 4.0, 1.0, 0.5
    uh2 = wpe2 + wc2
    root = math.sqrt(uh2**2 - 4 * wpe2 * wc2 * c2)
    cold = [math.sqrt((uh2 - root) / 2), math.sqrt((uh2 + root) / 2)]
    assert first == pytest.approx(cold, abs=5e-3)
