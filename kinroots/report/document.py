"""The report documents: report.md, report.html (self-contained, printable) and one
LaTeX ``tabular`` per result, with the figures redrawn from the tables as SVG.

:func:`build_report` makes every file in memory; :func:`write_report` then writes them
as one set, so a failure leaves no half-written report.
"""

from __future__ import annotations

import html
import math
import re
from collections.abc import Sequence
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import numpy as np

from kinroots.io.tables import OutputSet, atomic_write_bytes
from kinroots.report.folder import Output, Result, finite, read_folder
from kinroots.report.numbers import as_latex, latex_text, user_number
from kinroots.report.tables import Table, build_table

__all__ = ["Report", "build_report", "write_report"]


@dataclass
class Report:
    """The files of a report, name → bytes, and what they hold."""

    files: dict[str, bytes] = field(default_factory=dict)
    tables: dict[str, Table] = field(default_factory=dict)


# ----------------------------------------------------------------------- figures

def _figure(res: Result, out: Output) -> Any:
    """The result's figure, redrawn from its table (no dispersion evaluation); None
    when the case could not be rebuilt from the metadata."""
    case = res.case
    kind = res.kind.command
    if kind == "solve" and case is not None:
        from kinroots.plots.branches import curves_from_rows, plot_branches

        u = case.units
        floor = 10 * case.solver.tolerance
        return plot_branches(curves_from_rows(res.rows), k_label=u.length_label,
                             omega_label=u.frequency_label, title=case.title,
                             growth_floor=floor, k_unit_per_m=float(u.k_to_si(1.0)),
                             omega_unit_rad_per_s=float(u.omega_to_si(1.0)))
    if kind == "roots" and case is not None:
        from kinroots.plots.branches import plot_roots

        ok = [r for r in res.rows if r.get("converged") and finite(r.get("omega_real"))]
        box = res.meta.get("window_used") or res.meta.get("window")
        k = res.meta.get("k")
        return plot_roots([complex(r["omega_real"], r["omega_imag"]) for r in ok],
                          [bool(r.get("verified")) for r in ok],
                          tuple(box) if box else None, omega_label=case.units.frequency_label,
                          title=f"{case.title}: k = {user_number(k)} /{case.units.length_label}")
    if kind == "launch":
        from kinroots.plots.lab import launch_curves_from_rows, plot_launch

        return plot_launch(launch_curves_from_rows(res.rows),
                           title=case.title if case else str(res.meta.get("title", "")))
    if kind == "scatter":
        from kinroots.plots.lab import plot_spectrum

        shift = np.array([float(r["wavelength_shift_nm"]) for r in res.rows])
        power = np.array([float(r["relative_power_per_nm"]) for r in res.rows])
        omega = np.abs([float(r["omega_rad_per_s"]) for r in res.rows])
        central = omega <= 0.02 * omega.max() if omega.size else omega
        ion_nm = float(np.max(np.abs(shift[central]))) if np.any(central) else 0.0
        return plot_spectrum(shift, power, ion_window_nm=ion_nm,
                             alpha=res.meta.get("alpha_bragg"),
                             title=str(res.meta.get("title", "")))
    if kind == "sweep" and case is not None and case.sweep is not None:
        from kinroots.plots.maps import sweep_map

        other = out.get("threshold")
        return sweep_map(case, res.rows, other.rows if other is not None else None)
    if kind == "threshold" and case is not None and case.threshold is not None:
        from kinroots.plots.maps import threshold_curve

        return threshold_curve(case, res.rows)
    return None


def _svg(fig: Any) -> bytes:
    from kinroots.plots._style import figure_bytes

    return figure_bytes(fig, "svg")


_PROLOG = re.compile(rb"^\s*<\?xml[^>]*\?>\s*(<!DOCTYPE[^>]*>\s*)?", re.S)


def inline_svg(data: bytes) -> str:
    """SVG bytes as an element to put in HTML: XML prolog and DOCTYPE (which names an
    external DTD) removed; scales to the page width."""
    text = _PROLOG.sub(b"", data).decode("utf-8")
    text = re.sub(r'<svg([^>]*?) width="[^"]*" height="[^"]*"', r'<svg\1', text, count=1)
    return text.replace("<svg", '<svg role="img" class="figure"', 1)


# ----------------------------------------------------------------------- case summary

def _case_lines(res: Result) -> list[tuple[str, str]]:
    """(quantity, value) pairs describing the case of a result."""
    meta, case = res.meta, res.case
    out = [("title", str(meta.get("title", ""))),
           ("case file", str(meta.get("source") or "(not a file: stdin or embedded)")),
           ("kinroots version", str(meta.get("kinroots_version", "not recorded")))]
    if case is None:
        out.append(("case", f"not rebuilt: {res.case_problem}"))
        return out
    u = case.units
    out += [("model", f"{case.model}, angle between k and B {user_number(case.angle_deg)}°"),
            ("magnetic field B", f"{user_number(case.plasma.B)} T"),
            ("frequency unit", f"{u.frequency_label} = {u.omega_unit:.6g} rad/s "
                               f"({u.omega_unit / (2 * math.pi):.6g} Hz)"),
            ("length unit", f"{u.length_label} = {u.length_unit:.6g} m"),
            ("root tolerance (relative)", user_number(case.solver.tolerance))]
    return out


def _species_rows(res: Result) -> list[list[str]]:
    if res.case is None:
        return []
    rows = []
    for s in res.case.plasma.species:
        rows.append([s.name, user_number(s.charge_number), f"{s.mass:.6g}",
                     f"{s.density:.6g}", user_number(s.temperature_par),
                     user_number(s.temperature_perp), user_number(s.drift),
                     user_number(s.collision_frequency)])
    return rows


SPECIES_HEADER = ["species", "Z", "mass [kg]", "density [m⁻³]", "T∥ [eV]", "T⊥ [eV]",
                  "drift [m/s]", "ν [1/s]"]


def _conventions(meta: dict[str, Any]) -> list[str]:
    conv = meta.get("conventions")
    if isinstance(conv, dict):
        return [f"{k.replace('_', ' ')}: {v}" for k, v in conv.items()]
    return [str(conv)] if conv else []


# ----------------------------------------------------------------------- Markdown

def _md_cell(text: str) -> str:
    return str(text).replace("|", "\\|").replace("\n", " ")


def _md_table(header: Sequence[str], rows: Sequence[Sequence[str]], numeric: Sequence[bool]
              ) -> list[str]:
    lines = ["| " + " | ".join(_md_cell(h) for h in header) + " |",
             "|" + "|".join("---:" if n else ":---" for n in numeric) + "|"]
    lines += ["| " + " | ".join(_md_cell(c) for c in row) + " |" for row in rows]
    return lines


def _markdown(out: Output, parts: list[tuple[Result, Table, str | None]]) -> str:
    lines = [f"# kinroots report: {_md_cell(parts[0][0].meta.get('title', out.folder.name))}",
             "", f"Results read from `{out.folder}` (nothing recomputed): "
             + ", ".join(f"`{r.kind.table}` ({r.kind.command})" for r, _, _ in parts) + ".", ""]
    first = parts[0][0]
    lines += ["## Case", ""] + _md_table(["quantity", "value"], _case_lines(first),
                                         [False, False]) + [""]
    species = _species_rows(first)
    if species:
        lines += _md_table(SPECIES_HEADER, species, [False] + [True] * 7) + [""]
    conv = _conventions(first.meta)
    if conv:
        lines += ["Conventions:", ""] + [f"- {_md_cell(c)}" for c in conv] + [""]
    for res, table, fig_name in parts:
        lines += [f"## {_md_cell(table.title)}", ""]
        lines += _md_table([c.label for c in table.columns], table.cells,
                           [c.numeric for c in table.columns]) + [""]
        lines += [f"- {_md_cell(n)}" for n in table.notes] + [""]
        if fig_name:
            lines += [f"![{res.kind.command} figure]({fig_name})", ""]
        lines += [f"LaTeX table: `report_{res.kind.command}.tex`", ""]
    return "\n".join(lines)


# ----------------------------------------------------------------------- HTML

_CSS = """
body { font-family: "DejaVu Sans", Helvetica, Arial, sans-serif; max-width: 60em;
       margin: 2em auto; padding: 0 1em; color: #111; line-height: 1.4; }
h1 { font-size: 1.5em; } h2 { font-size: 1.2em; margin-top: 1.6em; }
table { border-collapse: collapse; margin: 0.6em 0; font-size: 0.9em; }
th, td { border: 1px solid #999; padding: 0.2em 0.5em; }
th { background: #eee; }
td.num { text-align: right; font-variant-numeric: tabular-nums; white-space: nowrap; }
td.failed { background: #fde2d2; }
svg.figure { width: 100%; height: auto; max-width: 48em; display: block; }
figure { margin: 1em 0; }
.notes { font-size: 0.85em; color: #333; }
@media print {
  body { max-width: none; margin: 0; font-size: 10pt; }
  section, figure, table { page-break-inside: avoid; break-inside: avoid; }
  h2 { page-break-after: avoid; break-after: avoid; }
}
"""


def _h(text: Any) -> str:
    return html.escape(str(text), quote=True)


def _html_table(header: Sequence[str], rows: Sequence[Sequence[str]],
                numeric: Sequence[bool]) -> str:
    out = ["<table>", "<thead><tr>" + "".join(f"<th>{_h(c)}</th>" for c in header)
           + "</tr></thead>", "<tbody>"]
    for row in rows:
        tds = []
        for cell, num in zip(row, numeric, strict=False):
            cls = "failed" if str(cell).startswith("failed") else "num" if num else ""
            tds.append(f'<td class="{cls}">{_h(cell)}</td>' if cls else f"<td>{_h(cell)}</td>")
        out.append("<tr>" + "".join(tds) + "</tr>")
    out.append("</tbody></table>")
    return "\n".join(out)


def _html(out: Output, parts: list[tuple[Result, Table, str | None]],
          svgs: dict[str, bytes]) -> str:
    first = parts[0][0]
    title = f"kinroots report: {first.meta.get('title', out.folder.name)}"
    body = [f"<h1>{_h(title)}</h1>",
            f"<p>Results read from <code>{_h(out.folder)}</code> (nothing recomputed): "
            + ", ".join(f"<code>{_h(r.kind.table)}</code> ({_h(r.kind.command)})"
                        for r, _, _ in parts) + ".</p>",
            "<section><h2>Case</h2>",
            _html_table(["quantity", "value"], _case_lines(first), [False, False])]
    species = _species_rows(first)
    if species:
        body.append(_html_table(SPECIES_HEADER, species, [False] + [True] * 7))
    conv = _conventions(first.meta)
    if conv:
        body.append("<p>Conventions:</p><ul>" + "".join(f"<li>{_h(c)}</li>" for c in conv)
                    + "</ul>")
    body.append("</section>")
    for res, table, fig_name in parts:
        body.append(f"<section><h2>{_h(table.title)}</h2>")
        body.append(_html_table([c.label for c in table.columns], table.cells,
                                [c.numeric for c in table.columns]))
        body.append('<ul class="notes">' + "".join(f"<li>{_h(n)}</li>" for n in table.notes)
                    + "</ul></section>")
        if fig_name:
            body.append(f"<figure>{inline_svg(svgs[fig_name])}<figcaption>"
                        f"{_h(res.kind.command)}: redrawn from {_h(res.kind.table)}"
                        "</figcaption></figure>")
    return ("<!DOCTYPE html>\n<html lang=\"en\">\n<head>\n<meta charset=\"utf-8\">\n"
            f"<title>{_h(title)}</title>\n<style>{_CSS}</style>\n</head>\n<body>\n"
            + "\n".join(body) + "\n</body>\n</html>\n")


# ----------------------------------------------------------------------- LaTeX

def latex_tabular(table: Table) -> str:
    """The table as a LaTeX ``tabular`` (no package needed): numbers in math mode,
    text escaped, one row per point, notes as comments."""
    spec = "".join("r" if c.numeric else "l" for c in table.columns)
    lines = [f"% kinroots report: {table.title}"]
    lines += [f"% {n}" for n in table.notes]
    lines += [f"\\begin{{tabular}}{{{spec}}}", "\\hline",
              " & ".join(latex_text(c.label) for c in table.columns) + " \\\\", "\\hline"]
    for row in table.cells:
        cells = [as_latex(c) if col.numeric else latex_text(c)
                 for c, col in zip(row, table.columns, strict=True)]
        lines.append(" & ".join(cells) + " \\\\")
    lines += ["\\hline", "\\end{tabular}", ""]
    return "\n".join(lines)


# ----------------------------------------------------------------------- assembling

def build_report(folder: Path, *, points: int | None = 10, at: Sequence[float] = ()
                 ) -> Report:
    """Every report file of ``folder``, in memory.

    Parameters
    ----------
    folder : Path
        A kinroots output folder.
    points : int or None
        Rows at this many evenly spaced values of each table's position column (k,
        frequency, sweep value...); None: every row.
    at : sequence of float
        Rows at the values nearest these instead.

    Raises
    ------
    kinroots.report.folder.ReportError
        Not a kinroots output folder.
    """
    out = read_folder(folder)
    report = Report()
    parts: list[tuple[Result, Table, str | None]] = []
    svgs: dict[str, bytes] = {}
    for res in out.results:
        table = build_table(res, points=points, at=at)
        fig = _figure(res, out)
        name = None
        if fig is not None:
            name = f"report_{res.kind.command}.svg"
            svgs[name] = _svg(fig)
            report.files[name] = svgs[name]
        parts.append((res, table, name))
        report.tables[res.kind.command] = table
        report.files[f"report_{res.kind.command}.tex"] = latex_tabular(table).encode()
    report.files["report.md"] = _markdown(out, parts).encode()
    report.files["report.html"] = _html(out, parts, svgs).encode()
    return report


def write_report(report: Report, folder: Path) -> list[Path]:
    """Write every file of ``report`` into ``folder`` as one set (staged, then swapped in
    with ``report-manifest.json``, see :class:`kinroots.io.tables.OutputSet`): the
    previous report's files are replaced together; the paths written."""
    out = OutputSet(Path(folder), "report")
    for name, data in report.files.items():
        atomic_write_bytes(out.stage(name), data)
    return out.commit()
