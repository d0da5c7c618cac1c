"""The "Python use" example of the README runs as written and gives what it says."""

from __future__ import annotations

import re
from pathlib import Path

README = Path(__file__).resolve().parent.parent / "README.md"


def _python_example() -> str:
    text = README.read_text(encoding="utf-8")
    section = text.split("## Python use", 1)[1]
    match = re.search(r"```python\n(.*?)```", section, re.S)
    assert match, "README: no ```python block under 'Python use'"
    return match.group(1)


def test_readme_python_example_runs(capsys):
    code = _python_example()
    assert len(code.strip().splitlines()) <= 16
    scope: dict = {}
    exec(compile(code, "README.md (Python use)", "exec"), scope)  # noqa: S102
    out = capsys.readouterr().out
    assert "RootSet" in out and "complete" in out
    table, data = scope["table"], scope["data"]
    assert list(table.columns[:4]) == ["branch", "k", "omega_real", "omega_imag"]
    assert table["converged"].all()
    # The Langmuir branch at every one of the 26 k; besides it, only roots that an
    # independent survey of the window finds at that k (a strongly damped ion-family
    # root crosses the window's corner near k λ_De = 0.23): rows per k = survey count.
    langmuir = table[table["branch"] == table["branch"].iloc[0]]
    assert len(langmuir) == 26 and langmuir["k"].min() == 0.1
    import kinroots

    case = scope["case"]
    for k, rows in table.groupby("k").size().items():
        found = kinroots.roots(case, float(k))
        assert found.complete and rows == len(found.roots), (k, rows, found)
    assert data["omega_real"].attrs["units"] == "omega_pe"
    # the susceptibilities are at the Langmuir root printed above: 1 + Σχ ≈ 0 there
    chi = scope["chi"]
    assert set(chi) == {"e", "H+"}
    assert abs(1 + sum(complex(x) for x in chi.values())) < 1e-3
