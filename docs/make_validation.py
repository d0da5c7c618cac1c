"""Write docs/validation.md (and docs/figures/) from the validation check registry.

The validation tests in ``tests/validation/test_*.py`` register check functions with the
``@validation(family)`` decorator of ``tests/validation/_checks.py``; each function
returns a list of ``Check`` records (quantity, case, published source, reference value,
kinroots value, tolerance and why).  The tests assert on those records; this script calls
the very same functions and tabulates them, one Markdown table per physics family, then
calls each module's optional ``figure(path)`` to draw ``figures/<module>.png`` beside the
report and embeds it.

A module that fails to import, or a check function that raises (or returns something
other than a list of checks), is reported as "not run: <reason>" instead of stopping the
script.  Exit status: 0 when every check ran and passed, 1 otherwise (2 for bad options).
The report and the figures are written atomically (temporary file, then rename).

Usage::

    python docs/make_validation.py                      # what `make validation` runs
    python docs/make_validation.py --checks-dir DIR --out path/to/validation.md
"""

from __future__ import annotations

import argparse
import importlib
import os
import sys
import tempfile
import time
import traceback
from collections.abc import Callable
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

ROOT = Path(__file__).resolve().parent.parent
DEFAULT_CHECKS_DIR = ROOT / "tests" / "validation"
DEFAULT_OUT = ROOT / "docs" / "validation.md"
#: Figures larger than this earn a warning (they bloat the repository).
FIGURE_WARN_BYTES = 200 * 1024


@dataclass
class Row:
    """One line of a family table: a check record, or a function that did not run."""

    module: str
    function: str
    check: Any = None  # a _checks.Check
    not_run: str = ""


@dataclass
class Report:
    families: dict[str, list[Row]] = field(default_factory=dict)
    module_errors: dict[str, str] = field(default_factory=dict)
    family_modules: dict[str, list[str]] = field(default_factory=dict)
    figures: dict[str, str] = field(default_factory=dict)  # module -> relative path
    figure_notes: dict[str, str] = field(default_factory=dict)  # module -> problem
    seconds: dict[str, float] = field(default_factory=dict)

    def counts(self, rows: list[Row]) -> tuple[int, int, int]:
        passed = sum(1 for r in rows if r.check is not None and _passed(r.check))
        failed = sum(1 for r in rows if r.check is not None and not _passed(r.check))
        not_run = sum(1 for r in rows if r.check is None)
        return passed, failed, not_run

    @property
    def ok(self) -> bool:
        if self.module_errors:
            return False
        rows = [r for rs in self.families.values() for r in rs]
        _, failed, not_run = self.counts(rows)
        return bool(rows) and failed == 0 and not_run == 0


def _passed(check: Any) -> bool:
    try:
        return bool(check.passed)
    except Exception:  # a malformed record counts as failed
        return False


def _reason(exc: BaseException) -> str:
    """One line: exception type, message and where it was raised."""
    tb = traceback.extract_tb(exc.__traceback__)
    where = f" ({Path(tb[-1].filename).name}:{tb[-1].lineno})" if tb else ""
    msg = str(exc).strip().splitlines()[0] if str(exc).strip() else ""
    return f"{type(exc).__name__}: {msg}{where}" if msg else f"{type(exc).__name__}{where}"


def _is_check(obj: Any) -> bool:
    names = ("family", "quantity", "case", "source", "reference", "value", "tolerance",
             "tolerance_reason", "relative")
    return all(hasattr(obj, n) for n in names)


def collect(checks_dir: Path, figures_dir: Path, out_dir: Path, *,
            log: Callable[[str], None]) -> Report:
    """Import every ``test_*.py`` in ``checks_dir``, run its checks, draw its figure."""
    report = Report()
    checks_dir = checks_dir.resolve()
    if str(checks_dir) not in sys.path:
        sys.path.insert(0, str(checks_dir))
    try:
        registry_module = importlib.import_module("_checks")
    except Exception as exc:
        report.module_errors["_checks"] = _reason(exc)
        return report
    registry: dict[str, list[Callable[[], list[Any]]]] = registry_module.REGISTRY

    modules: dict[str, Any] = {}
    for path in sorted(checks_dir.glob("test_*.py")):
        name = path.stem
        before = {fam: list(fns) for fam, fns in registry.items()}
        try:
            modules[name] = importlib.import_module(name)
        except BaseException as exc:  # includes SystemExit and pytest.skip
            if isinstance(exc, KeyboardInterrupt):
                raise
            report.module_errors[name] = _reason(exc)
            log(f"not run: module {name}: {report.module_errors[name]}")
            # drop whatever a half-imported module registered
            for fam in list(registry):
                if fam in before:
                    registry[fam] = before[fam]
                else:
                    del registry[fam]

    for family, fns in registry.items():
        rows = report.families.setdefault(family, [])
        for fn in fns:
            mod = getattr(fn, "__module__", "?")
            fname = getattr(fn, "__qualname__", repr(fn))
            if mod not in report.family_modules.setdefault(family, []):
                report.family_modules[family].append(mod)
            t0 = time.perf_counter()
            try:
                result = fn()
                if not isinstance(result, list | tuple) or not all(map(_is_check, result)):
                    raise TypeError(f"returned {type(result).__name__}, not a list of Check")
                if not result:
                    raise ValueError("returned no checks")
                rows.extend(Row(mod, fname, check=c) for c in result)
            except BaseException as exc:
                if isinstance(exc, KeyboardInterrupt):
                    raise
                rows.append(Row(mod, fname, not_run=_reason(exc)))
                log(f"not run: {mod}.{fname}: {_reason(exc)}")
            report.seconds[f"{mod}.{fname}"] = time.perf_counter() - t0

    figures_dir.mkdir(parents=True, exist_ok=True)
    for name, mod in modules.items():
        fig_fn = getattr(mod, "figure", None)
        if not callable(fig_fn):
            continue
        target = figures_dir / f"{name}.png"
        fd, tmp = tempfile.mkstemp(prefix=f".{name}.", suffix=".png", dir=figures_dir)
        os.close(fd)
        try:
            fig_fn(tmp)
            size = os.path.getsize(tmp)
            if size == 0:
                raise RuntimeError("figure() wrote nothing")
            _publish(tmp, target)
        except BaseException as exc:
            if isinstance(exc, KeyboardInterrupt):
                raise
            report.figure_notes[name] = f"figure not made: {_reason(exc)}"
            log(f"warning: {name}: {report.figure_notes[name]}")
            continue
        finally:
            if os.path.exists(tmp):
                os.unlink(tmp)
        if size > FIGURE_WARN_BYTES:
            note = f"figure is {size / 1024:.0f} kB (over {FIGURE_WARN_BYTES // 1024} kB)"
            report.figure_notes[name] = note
            log(f"warning: {name}: {note}")
        report.figures[name] = os.path.relpath(target, out_dir).replace(os.sep, "/")
    return report


# --------------------------------------------------------------------------- Markdown


def _md(text: Any) -> str:
    """Make text safe inside a Markdown table cell."""
    return str(text).replace("\\", "\\\\").replace("|", "\\|").replace("\n", " ").strip()


def _num(x: Any) -> str:
    try:
        return f"{float(x):.10g}"
    except (TypeError, ValueError):
        return _md(x)


def _row_cells(row: Row) -> list[str]:
    c = row.check
    if c is None:
        return [f"`{_md(row.function)}`", "", "", "", "", "", "",
                f"not run: {_md(row.not_run)}"]
    kind = "rel." if c.relative else "abs."
    try:
        diff = f"{float(c.difference):.3g} ({kind})"
    except Exception:
        diff = "?"
    mark = "✅ pass" if _passed(c) else "❌ FAIL"
    tol = f"{float(c.tolerance):.3g} ({kind}): {_md(c.tolerance_reason)}"
    return [_md(c.quantity), _md(c.case), _md(c.source), _num(c.reference), _num(c.value),
            diff, tol, mark]


HEADER = ("quantity", "case", "source", "reference value", "kinroots value", "difference",
          "tolerance (reason)", "result")


def render(report: Report, *, version: str) -> str:
    lines = [
        "# Validation of kinroots against published physics",
        "",
        "Generated by `docs/make_validation.py` (`make validation`) from the check records",
        "that the tests in `tests/validation/` assert on; do not edit by hand.",
        f"kinroots version {version}.  Differences are relative (rel.) or absolute (abs.)",
        "as stated; a check passes when the difference is within its tolerance.",
        "",
        "## Summary",
        "",
        "| family | checks | passed | failed | not run |",
        "|---|---|---|---|---|",
    ]
    all_rows: list[Row] = []
    for family, rows in report.families.items():
        p, f, n = report.counts(rows)
        all_rows += rows
        lines.append(f"| {_md(family)} | {len(rows)} | {p} | {f} | {n} |")
    p, f, n = report.counts(all_rows)
    lines.append(f"| **all** | {len(all_rows)} | {p} | {f} | "
                 f"{n + len(report.module_errors)} |")
    lines.append("")
    if report.module_errors:
        lines += ["## Modules not run", ""]
        for name, why in report.module_errors.items():
            lines.append(f"* `{_md(name)}`: not run: {_md(why)}")
        lines.append("")
    shown: set[str] = set()
    for family, rows in report.families.items():
        lines += [f"## {_md(family)}", ""]
        mods = report.family_modules.get(family, [])
        if mods:
            lines += ["Checks from " + ", ".join(f"`tests/validation/{m}.py`" for m in mods)
                      + ".", ""]
        lines.append("| " + " | ".join(HEADER) + " |")
        lines.append("|" + "---|" * len(HEADER))
        for row in rows:
            lines.append("| " + " | ".join(_row_cells(row)) + " |")
        lines.append("")
        for m in mods:
            if m in shown:
                continue
            shown.add(m)
            if m in report.figures:
                lines += [f"![{_md(family)} ({m})]({report.figures[m]})", ""]
            if m in report.figure_notes:
                lines += [f"*{m}: {_md(report.figure_notes[m])}*", ""]
    return "\n".join(lines).rstrip() + "\n"


def _publish(tmp: str | Path, target: Path) -> None:
    """Give a temporary file ordinary permissions and rename it over ``target``."""
    umask = os.umask(0)
    os.umask(umask)
    os.chmod(tmp, 0o666 & ~umask)
    os.replace(tmp, target)


def atomic_write_text(path: Path, text: str) -> None:
    path.parent.mkdir(parents=True, exist_ok=True)
    fd, tmp = tempfile.mkstemp(prefix=f".{path.name}.", suffix=".tmp", dir=path.parent)
    try:
        with os.fdopen(fd, "w", encoding="utf-8") as fh:
            fh.write(text)
        _publish(tmp, path)
    except BaseException:
        if os.path.exists(tmp):
            os.unlink(tmp)
        raise


def main(argv: list[str] | None = None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    ap.add_argument("--checks-dir", type=Path, default=DEFAULT_CHECKS_DIR,
                    help="folder with _checks.py and the test_*.py validation modules")
    ap.add_argument("--out", type=Path, default=DEFAULT_OUT,
                    help="Markdown report to write; figures go to figures/ beside it")
    args = ap.parse_args(argv)
    if not args.checks_dir.is_dir():
        print(f"make_validation: --checks-dir {args.checks_dir} is not a folder",
              file=sys.stderr)
        return 2
    os.environ.setdefault("MPLBACKEND", "Agg")
    out = args.out.resolve()

    def log(msg: str) -> None:
        print(msg, file=sys.stderr, flush=True)

    report = collect(args.checks_dir, out.parent / "figures", out.parent, log=log)
    try:
        from kinroots import __version__ as version
    except Exception:
        version = "unknown"
    atomic_write_text(out, render(report, version=version))
    rows = [r for rs in report.families.values() for r in rs]
    p, f, n = report.counts(rows)
    log(f"wrote {out}: {len(rows)} checks, {p} passed, {f} failed, {n} not run, "
        f"{len(report.module_errors)} module(s) not imported")
    for r in rows:
        if r.check is not None and not _passed(r.check):
            log(f"FAILED: {r.check.family}: {r.check.quantity} ({r.check.case})")
    if not rows and not report.module_errors:
        log("no validation checks found")
    return 0 if report.ok else 1


if __name__ == "__main__":
    sys.exit(main())
