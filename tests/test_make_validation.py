"""docs/make_validation.py on a temporary folder of fake validation modules.

The script is run as a subprocess (it imports the check modules by name, which must not
leak into this test process).  The fake folder holds a copy of the real
``tests/validation/_checks.py`` so that the registry contract is the one the real
validation modules use.
"""

from __future__ import annotations

import shutil
import subprocess
import sys
import textwrap
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parent.parent
SCRIPT = ROOT / "docs" / "make_validation.py"
REGISTRY = ROOT / "tests" / "validation" / "_checks.py"

GOOD = '''
from _checks import Check, validation

FAMILY = "Fake waves"


@validation(FAMILY)
def fake_checks():
    return [
        Check(FAMILY, "Re ω/ω_pe at k = 0.5", "fake plasma |B| = 0", "Made-up book (2000)",
              1.0, 1.0 + 1e-9, 1e-6, "printed digits", relative=True),
        Check(FAMILY, "γ/ω_pe at k = 0.5", "fake plasma", "Made-up book (2000)",
              -0.25, -0.2500001, 1e-5, "printed digits", relative=False),
    ]


def figure(path):
    with open(path, "wb") as fh:
        fh.write(b"\\x89PNG\\r\\n\\x1a\\n" + b"0" * SIZE)

SIZE = 100
'''


def _run(checks: Path, out: Path) -> subprocess.CompletedProcess[str]:
    return subprocess.run(
        [sys.executable, str(SCRIPT), "--checks-dir", str(checks), "--out", str(out)],
        capture_output=True, text=True, timeout=120,
    )


@pytest.fixture
def checks_dir(tmp_path: Path) -> Path:
    d = tmp_path / "checks"
    d.mkdir()
    shutil.copy(REGISTRY, d / "_checks.py")
    (d / "test_good.py").write_text(GOOD, encoding="utf-8")
    return d


def test_all_passing_writes_tables_and_figure(checks_dir, tmp_path):
    out = tmp_path / "docs" / "validation.md"
    res = _run(checks_dir, out)
    assert res.returncode == 0, res.stderr
    md = out.read_text(encoding="utf-8")
    assert "## Fake waves" in md
    header = ("| quantity | case | source | reference value | kinroots value | difference "
              "| tolerance (reason) | result |")
    assert header in md
    # pipes inside a cell are escaped so the table keeps its columns
    assert "fake plasma \\|B\\| = 0" in md
    rows = [ln for ln in md.splitlines() if ln.startswith("| Re ω") or ln.startswith("| γ")]
    assert len(rows) == 2 and all("pass" in r and "FAIL" not in r for r in rows)
    assert "| 1 | 1.000000001 |" in rows[0] and "1e-09 (rel.)" in rows[0]
    assert "(abs.)" in rows[1] and "printed digits" in rows[1]
    assert "![Fake waves (test_good)](figures/test_good.png)" in md
    assert (out.parent / "figures" / "test_good.png").read_bytes()[:4] == b"\x89PNG"
    assert not [p for p in out.parent.rglob(".*") if p.is_file()]  # no temporaries left
    assert "warning" not in res.stderr


def test_failures_and_broken_modules_are_reported_not_fatal(checks_dir, tmp_path):
    (checks_dir / "test_broken_import.py").write_text(
        "import no_such_module_anywhere  # noqa\n", encoding="utf-8")
    (checks_dir / "test_raises.py").write_text(textwrap.dedent('''
        from _checks import Check, validation

        @validation("Fake waves")
        def exploding_checks():
            raise ZeroDivisionError("denominator vanished")

        @validation("Other family")
        def wrong_result():
            return 3.0
        '''), encoding="utf-8")
    (checks_dir / "test_fails.py").write_text(textwrap.dedent('''
        from _checks import Check, validation

        @validation("Other family")
        def failing_checks():
            return [Check("Other family", "ω", "c", "s", 1.0, 2.0, 0.1, "r")]

        def figure(path):
            with open(path, "wb") as fh:
                fh.write(b"x" * 300_000)
        '''), encoding="utf-8")
    out = tmp_path / "validation.md"
    res = _run(checks_dir, out)
    assert res.returncode == 1, res.stderr
    md = out.read_text(encoding="utf-8")
    assert "`test_broken_import`: not run: ModuleNotFoundError" in md
    assert "not run: ZeroDivisionError: denominator vanished" in md
    assert "not run: TypeError: returned float, not a list of Check" in md
    assert "❌ FAIL" in md and "✅ pass" in md  # the good module still tabulated
    assert "FAILED: Other family" in res.stderr
    assert "300 kB" not in res.stderr and "293 kB (over 200 kB)" in res.stderr
    assert "## Modules not run" in md


def test_no_checks_is_not_success(tmp_path):
    d = tmp_path / "empty"
    d.mkdir()
    shutil.copy(REGISTRY, d / "_checks.py")
    res = _run(d, tmp_path / "v.md")
    assert res.returncode == 1
    assert (tmp_path / "v.md").exists()


def test_missing_checks_dir_is_bad_input(tmp_path):
    res = _run(tmp_path / "nowhere", tmp_path / "v.md")
    assert res.returncode == 2 and "nowhere" in res.stderr
    assert not (tmp_path / "v.md").exists()
