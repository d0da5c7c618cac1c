"""`kinroots report DIR` (issue 17, item 1): report.md, a self-contained report.html and
LaTeX tables read back from real (tiny) output folders of every command.

Checks: the reported numbers are the CSV values rounded at the digits the rule gives;
the HTML parsed with html.parser has a table and no external resource or script; each
LaTeX tabular is balanced with one row per selected point; a folder that is not a
kinroots output is exit 2 with nothing written.
"""

from __future__ import annotations

import csv
import math
import re
from html.parser import HTMLParser
from pathlib import Path

import pytest
from typer.testing import CliRunner

from kinroots.cli import app
from kinroots.report.numbers import (
    as_latex,
    digits_for,
    format_significant,
    latex_text,
    relative_uncertainty,
    user_number,
)

ROOT = Path(__file__).resolve().parent.parent
runner = CliRunner()


def _run(*args: str) -> None:
    res = runner.invoke(app, ["-q", *args])
    assert res.exit_code == 0, res.output


def _sweep_text() -> str:
    text = (ROOT / "cases" / "sweep_proton_anisotropy.toml").read_text()
    for old, new in (("k = { start = 0.1, stop = 1.2, points = 8 }",
                      "k = { start = 0.2, stop = 0.8, points = 3 }"),
                     ('start = 0.5, stop = 3.0, points = 6, spacing = "log"',
                      'start = 1.0, stop = 2.0, points = 2, spacing = "log"'),
                     ("start = 1.2, stop = 2.4, points = 6",
                      "start = 1.3, stop = 2.2, points = 2")):
        assert old in text
        text = text.replace(old, new)
    return text


@pytest.fixture(scope="module")
def outputs(tmp_path_factory: pytest.TempPathFactory) -> dict[str, Path]:
    """One tiny output folder per command (a few seconds in all but the sweep)."""
    base = tmp_path_factory.mktemp("outputs")
    argon = (ROOT / "cases" / "argon_ion_acoustic.toml").read_text()
    argon = argon.replace("points = 100", "points = 12")
    (base / "argon.toml").write_text(argon)
    lab = (ROOT / "cases" / "lab_launched_ion_acoustic.toml").read_text()
    lab = lab.replace("points = 12 }", "points = 4 }")
    (base / "lab.toml").write_text(lab)
    (base / "sweep.toml").write_text(_sweep_text())
    out = {k: base / k for k in ("solve", "roots", "launch", "scatter", "sweep")}
    _run("solve", str(base / "argon.toml"), "-o", str(out["solve"]), "--no-plot")
    _run("roots", str(base / "argon.toml"), "-o", str(out["roots"]), "--at", "0.5",
         "--no-plot")
    _run("launch", str(base / "lab.toml"), "-o", str(out["launch"]), "--no-plot")
    _run("scatter", str(base / "lab.toml"), "-o", str(out["scatter"]), "--points", "101",
         "--no-plot")
    _run("sweep", str(base / "sweep.toml"), "-o", str(out["sweep"]), "--workers", "1",
         "--no-plot")
    _run("threshold", str(base / "sweep.toml"), "-o", str(out["sweep"]), "--workers", "1",
         "--no-plot")
    return out


def _csv(path: Path) -> list[dict[str, str]]:
    with open(path, newline="") as fh:
        return list(csv.DictReader(fh))


def _md_table(md: str, title: str, names: bool = False) -> list[list[str]]:
    """Body cells of the Markdown table under the heading ``## title``; without the
    wave-name column (second column, header "wave" or "name") unless ``names``."""
    part = md.split(f"## {title}", 1)[1]
    lines = [ln for ln in part.splitlines() if ln.startswith("|")]

    def cells(ln: str) -> list[str]:
        return [c.strip().replace("\\|", "|") for c in re.split(r"(?<!\\)\|", ln)[1:-1]]

    drop = not names and len(cells(lines[0])) > 1 and cells(lines[0])[1] in ("wave", "name")
    body = []
    for ln in lines[2:]:
        row = cells(ln)
        body.append(row[:1] + row[2:] if drop else row)
        if not part.split(ln, 1)[1].startswith("\n|"):
            break
    return body


def _agrees(cell: str, value: float) -> bool:
    """``cell`` is ``value`` rounded to the digits written in the cell."""
    mantissa = cell.split("e")[0].lstrip("-")
    digits = len(mantissa.replace(".", "").lstrip("0")) or 1
    shown = float(cell)
    if value == 0:
        return shown == 0
    return abs(shown - value) <= 0.5 * 10 ** (math.floor(math.log10(abs(value)))
                                               - digits + 1) * 1.0001


@pytest.mark.parametrize("points", [3, 5])
def test_solve_report_matches_csv(outputs: dict[str, Path], points: int) -> None:
    folder = outputs["solve"]
    res = runner.invoke(app, ["report", str(folder), "--points", str(points)])
    assert res.exit_code == 0, res.output
    md = (folder / "report.md").read_text()
    rows = _md_table(md, "solve: roots")
    csv_rows = {(r["branch"], float(r["k"])): r for r in _csv(folder / "branches.csv")}
    ks = sorted({float(k) for _, k in csv_rows})
    assert len({float(r[1]) for r in rows}) == points
    assert float(rows[0][1]) == ks[0] and float(rows[-1][1]) == ks[-1]
    rtol = 1e-10  # solver.tolerance of the argon case (the default)
    for cells in rows:
        src = csv_rows[(cells[0], float(cells[1]))]
        assert cells[8] == ("verified" if src["verified"] == "true" else "not verified")
        wr, wi = float(src["omega_real"]), float(src["omega_imag"])
        for cell, value in ((cells[2], wr), (cells[3], wi), (cells[5], float(src["freq_hz"])),
                            (cells[6], float(src["gamma_per_s"]))):
            assert _agrees(cell, value), (cell, value)
        eps = relative_uncertainty(rtol, float(src["residual"]))
        d_i = digits_for(eps, abs(complex(wr, wi)), wi)
        assert cells[3] == format_significant(wi, d_i)
    # the wave's name and the relative residual (|D| over D's largest term), from the CSV
    named = _md_table(md, "solve: roots", names=True)
    header = md.split("## solve: roots", 1)[1].split("|\n", 1)[0]
    assert "| wave |" in header and "relative residual" in header
    for cells in named:
        src = csv_rows[(cells[0], float(cells[2]))]
        assert cells[1] == src["wave_name"]
        assert _agrees(cells[8], float(src["relative_residual"]))
    tex = (folder / "report_solve.tex").read_text()
    _check_tabular(tex, len(rows), 10)


def _check_tabular(tex: str, n_rows: int, n_cols: int) -> None:
    assert tex.count("\\begin{tabular}") == tex.count("\\end{tabular}") == 1
    body = tex.split("\\begin{tabular}", 1)[1].split("\\end{tabular}")[0]
    assert body.count("{") == body.count("}")
    lines = [ln for ln in body.splitlines() if ln.endswith("\\\\")]
    assert len(lines) == n_rows + 1  # header + one per point
    for ln in lines:
        assert ln.count("$") % 2 == 0, ln
        assert len(re.split(r"(?<!\\)&", ln)) == n_cols, ln
    spec = re.search(r"\\begin\{tabular\}\{([lrc]+)\}", tex)
    assert spec is not None and len(spec.group(1)) == n_cols


class _Scan(HTMLParser):
    def __init__(self) -> None:
        super().__init__()
        self.tags: list[str] = []
        self.external: list[str] = []

    def handle_starttag(self, tag: str, attrs: list[tuple[str, str | None]]) -> None:
        self.tags.append(tag)
        for name, value in attrs:
            # Inside the page: fragment references (#id) and embedded data: URIs.
            if name in ("src", "href", "xlink:href", "data", "action") and value and \
                    not value.startswith(("#", "data:")):
                self.external.append(f"{tag} {name}={value}")
            if name == "style" and value and re.search(r"url\((?!#)", value):
                self.external.append(f"{tag} style={value}")


@pytest.mark.parametrize("kind", ["solve", "roots", "launch", "scatter", "sweep"])
def test_html_is_self_contained(outputs: dict[str, Path], kind: str) -> None:
    folder = outputs[kind]
    res = runner.invoke(app, ["report", str(folder), "--points", "3"])
    assert res.exit_code == 0, res.output
    page = (folder / "report.html").read_text()
    scan = _Scan()
    scan.feed(page)
    assert "table" in scan.tags and "svg" in scan.tags
    assert "script" not in scan.tags and "link" not in scan.tags and "img" not in scan.tags
    assert scan.external == []
    assert "<!DOCTYPE svg" not in page and "@media print" in page
    assert (folder / "report.md").read_text().startswith("# kinroots report")
    svg = next(folder.glob("report_*.svg")).read_bytes()
    assert b"<svg" in svg[:400]


def test_launch_and_threshold_tables(outputs: dict[str, Path]) -> None:
    folder = outputs["launch"]
    _run("report", str(folder), "--all")
    rows = _md_table((folder / "report.md").read_text(), "launch: waves")
    src = _csv(folder / "launch.csv")
    assert len(rows) == len(src) == 4
    for cells, r in zip(rows, sorted(src, key=lambda r: float(r["freq_hz"])), strict=True):
        assert float(cells[1]) == pytest.approx(float(r["freq_hz"]), rel=1e-11)
        assert "99999" not in cells[1]  # written as a user would: 500000, not 499999.99..
        assert _agrees(cells[4], float(r["wavelength_m"]))
        assert _agrees(cells[5], float(r["damping_length_m"]))
    _check_tabular((folder / "report_launch.tex").read_text(), 4, 8)
    sweep = outputs["sweep"]
    _run("report", str(sweep), "--all")
    md = (sweep / "report.md").read_text()
    thr = _md_table(md, "threshold: marginal values")
    src = _csv(sweep / "threshold.csv")
    assert len(thr) == len(src)
    for cells, r in zip(thr, src, strict=True):
        if r["converged"] == "true":
            assert _agrees(cells[1], float(r["threshold"]))
        else:
            assert cells[1] == "failed"
    assert "β∥ of species p" in md  # parameters named, not "species.p.beta_par"
    _check_tabular((sweep / "report_sweep.tex").read_text(), 4, 7)


def test_at_picks_nearest_values(outputs: dict[str, Path]) -> None:
    folder = outputs["solve"]
    res = runner.invoke(app, ["report", str(folder), "--at", "0.5", "--at", "2"])
    assert res.exit_code == 0, res.output
    md = (folder / "report.md").read_text()
    ks = sorted({float(c[1]) for c in _md_table(md, "solve: roots")})
    assert ks[-1] == 2.0 and len(ks) == 2
    assert "--at 0.5: nearest k in the table is" in md
    before = (folder / "report.md").read_text()
    for bad in ("nan", "inf"):
        res = runner.invoke(app, ["report", str(folder), "--at", bad])
        assert res.exit_code == 2 and "expected a finite number" in res.stderr
    assert (folder / "report.md").read_text() == before  # nothing rewritten


def test_failed_points_are_never_numbers(outputs: dict[str, Path], tmp_path: Path) -> None:
    """A row flagged converged = false (value cells empty, as the writer leaves them)."""
    folder = tmp_path / "solve"
    folder.mkdir()
    for name in ("branches.csv", "summary.json"):
        (folder / name).write_bytes((outputs["solve"] / name).read_bytes())
    rows = _csv(folder / "branches.csv")
    rows[0].update(converged="false", omega_real="", omega_imag="", freq_hz="",
                   gamma_per_s="", residual="", status="max_iterations", reason="no step")
    with open(folder / "branches.csv", "w", newline="") as fh:
        w = csv.DictWriter(fh, fieldnames=list(rows[0]))
        w.writeheader()
        w.writerows(rows)
    _run("report", str(folder), "--points", "2")
    first = _md_table((folder / "report.md").read_text(), "solve: roots")[0]
    assert first[2] == first[3] == "failed" and first[8] == "failed: no step"


def test_foreign_folder_exit_2_nothing_written(tmp_path: Path) -> None:
    (tmp_path / "data.csv").write_text("a,b\n1,2\n")
    res = runner.invoke(app, ["report", str(tmp_path)])
    assert res.exit_code == 2
    assert "not a kinroots output folder" in res.stderr and "Traceback" not in res.output
    assert sorted(p.name for p in tmp_path.iterdir()) == ["data.csv"]
    res = runner.invoke(app, ["report", str(tmp_path / "missing")])
    assert res.exit_code == 2 and "no such folder" in res.stderr
    (tmp_path / "summary.json").write_text("{not json")
    (tmp_path / "branches.csv").write_text("branch,k,omega_real\n")
    res = runner.invoke(app, ["report", str(tmp_path)])
    assert res.exit_code == 2 and "cannot be read as JSON" in res.stderr


def test_edited_table_exit_2_naming_line_and_column(outputs: dict[str, Path],
                                                    tmp_path: Path) -> None:
    # a hand-edited cell reached the plot as an internal error (float('abc'))
    folder = tmp_path / "solve"
    folder.mkdir()
    for name in ("branches.csv", "summary.json"):
        (folder / name).write_bytes((outputs["solve"] / name).read_bytes())
    rows = _csv(folder / "branches.csv")
    for edit, words in (({"k": "abc"}, "line 3, column k: got 'abc'"),
                        ({"omega_real": ""}, "line 3: converged is true but")):
        with open(folder / "branches.csv", "w", newline="") as fh:
            w = csv.DictWriter(fh, fieldnames=list(rows[0]))
            w.writeheader()
            w.writerows([rows[0], dict(rows[1], **edit)] + rows[2:])
        res = runner.invoke(app, ["report", str(folder)])
        assert res.exit_code == 2 and words in res.stderr, res.output
        assert "Traceback" not in res.output and not (folder / "report.md").exists()


def test_digits_rule() -> None:
    """The rule of kinroots.report.numbers on hand-checked cases."""
    assert relative_uncertainty(1e-10, 3e-13) == 1e-10
    assert relative_uncertainty(1e-10, 2e-7) == 2e-7
    assert digits_for(1e-10, 1.0, 1.0) == 10
    assert digits_for(1e-10, 1.0, 1e-3) == 7  # γ a thousand times below |ω| loses 3
    assert digits_for(2e-7, 1.0, 1.0) == 6
    assert digits_for(1e-10, 1.0, 1e-12) == 1  # sign only
    assert format_significant(0.0202998817, 4) == "0.02030"  # trailing zero kept
    assert format_significant(9.9996, 3) == "10.0"
    assert format_significant(-4.6376362e-05, 5) == "-4.6376e-05"
    assert format_significant(6048775.5, 3) == "6.05e+06"
    assert user_number(0.12000000000000001) == "0.12"
    assert user_number(499999.9999999999) == "500000"
    assert as_latex("-4.6376e-05") == r"$-4.6376\times10^{-5}$"
    assert latex_text("γ/ω_pe [1/s]") == r"$\gamma$/$\omega_{\mathrm{pe}}$ [1/s]"
    assert latex_text("50% of a_$") == r"50\% of a\_\$"


def test_rounding_noise_is_unresolved_not_a_number(tmp_path: Path) -> None:
    """Issue 18: the default case's Langmuir wave at k λ_De = 0.1 has a true damping of
    about −1.5e-9 s⁻¹ (mpmath, issue 18), 1e-20 ω_pe: far below what a root known to
    1e-10 resolves, so the report writes "unresolved", not the rounding noise of the CSV.
    A table written before the below_resolution column gets the same rule."""
    folder = tmp_path / "d"
    _run("solve", "-o", str(folder), "--no-plot")
    src = _csv(folder / "branches.csv")[0]
    assert float(src["k"]) == pytest.approx(0.1) and src["below_resolution"] == "imag"
    _run("report", str(folder), "--at", "0.1")
    md = (folder / "report.md").read_text()
    first = _md_table(md, "solve: roots")[0]
    assert first[3] == first[6] == "unresolved"
    assert _agrees(first[2], float(src["omega_real"]))
    assert "unresolved: that component of ω is below" in md
    rows = _csv(folder / "branches.csv")  # the same table without the column
    for r in rows:
        r.pop("below_resolution")
    with open(folder / "branches.csv", "w", newline="") as fh:
        w = csv.DictWriter(fh, fieldnames=list(rows[0]))
        w.writeheader()
        w.writerows(rows)
    _run("report", str(folder), "--at", "0.1")
    assert _md_table((folder / "report.md").read_text(), "solve: roots")[0][3] == "unresolved"
