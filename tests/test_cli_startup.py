"""Start-up cost of the command line: what `import kinroots.cli`, `--help` and `check` load.

Issue 14, item 5: the heavy packages (scipy.optimize, matplotlib, xarray, dask) and the
model stack (dispersion, builders, root finder) are imported only by the commands that
need them. Each check runs in a fresh interpreter, since this test process has long
imported everything.
"""

from __future__ import annotations

import json
import subprocess
import sys
from pathlib import Path

import pytest

#: Never loaded by `import kinroots.cli`, `kinroots --help` or `kinroots check`.
FORBIDDEN = (
    "scipy.optimize",
    "scipy.constants",
    "matplotlib",
    "xarray",
    "dask",
    "kinroots.plots",
)

#: Also not loaded by `import kinroots.cli` and `kinroots --help`.  (`check` tries the
#: window, issue 15 item 6: it evaluates D on the window's edges, so it loads the model
#: stack, the root layer's boundary count and the study layer.)
HELP_ALSO = ("numpy", "kinroots.io", "kinroots.physics", "kinroots.roots", "kinroots.study")

CASES = Path(__file__).resolve().parent.parent / "cases"

_PROBE = """
import contextlib, io, json, sys
import kinroots.cli
args = json.loads(sys.argv[1])
if args:
    with contextlib.redirect_stdout(io.StringIO()), contextlib.redirect_stderr(io.StringIO()):
        try:
            kinroots.cli.app(args, standalone_mode=False)
        except SystemExit:
            pass
print(json.dumps(sorted(sys.modules)))
"""


def _loaded(args: list[str]) -> set[str]:
    out = subprocess.run(
        [sys.executable, "-c", _PROBE, json.dumps(args)],
        capture_output=True, text=True, check=True, timeout=120,
    )
    return set(json.loads(out.stdout.strip().splitlines()[-1]))


@pytest.mark.parametrize(
    "args",
    [[], ["--help"], ["check"], ["check", str(CASES / "argon_ion_acoustic.toml")]],
    ids=["import", "help", "check-default", "check-case"],
)
def test_startup_imports_stay_light(args: list[str]) -> None:
    loaded = _loaded(args)
    # --help (and the import itself) read no case: numpy and the case layer wait too
    forbidden = FORBIDDEN if "check" in args else FORBIDDEN + HELP_ALSO
    heavy = sorted(
        m for m in loaded if any(m == f or m.startswith(f + ".") for f in forbidden)
    )
    assert heavy == []


def test_probe_sees_lazy_imports() -> None:
    # the probe can see a lazy import: `plasma` on a two-ion magnetized case computes the
    # lower-hybrid frequency with scipy's brentq, imported only then
    loaded = _loaded(["plasma", str(CASES / "space_protons_alphas.toml")])
    assert "scipy.optimize" in loaded
