"""Figures (issue 17 item 2, issue 12): formats by suffix with the right magic bytes, plot
functions returning the Figure and drawing on given axes, --figure-format and --no-plot on
the commands, user text literal and kinroots' subscripts set by mathtext."""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest
from typer.testing import CliRunner

from kinroots.cli import app
from kinroots.plots._style import literal, math_label, new_figure, save_figure
from kinroots.plots.branches import BranchCurve, plot_branches, plot_roots
from kinroots.plots.lab import LaunchCurve, plot_launch, plot_spectrum
from kinroots.plots.maps import plot_growth_map, plot_threshold

ROOT = Path(__file__).resolve().parent.parent
runner = CliRunner()

#: File signatures: PNG (ISO/IEC 15948 §5.2), PDF (ISO 32000-1 §7.5.2), SVG is XML text.
MAGIC = {"png": b"\x89PNG\r\n\x1a\n", "pdf": b"%PDF-"}


def is_format(data: bytes, fmt: str) -> bool:
    if fmt == "svg":
        head = data[:400].lstrip()
        return (head.startswith(b"<?xml") or head.startswith(b"<svg")) and b"<svg" in head
    return data.startswith(MAGIC[fmt])


def _curves() -> list[BranchCurve]:
    k = np.linspace(0.1, 1.0, 12)
    w = 1.0 + 0.5 * k**2 + 1j * (0.05 - 0.1 * k)
    return [BranchCurve("branch 0", k, w, verified=k < 0.5),
            BranchCurve("beam $x$", k, 0.5 * w.conj(), verified=None)]


@pytest.mark.parametrize("fmt", ["png", "svg", "pdf"])
def test_saved_bytes_match_suffix(tmp_path: Path, fmt: str) -> None:
    path = tmp_path / f"b.{fmt}"
    fig = plot_branches(_curves(), k_label="λ_De", omega_label="ω_pe", title="t",
                        k_unit_per_m=100.0, omega_unit_rad_per_s=1e9, path=path)
    assert fig.__class__.__name__ == "Figure"
    data = path.read_bytes()
    assert is_format(data, fmt)
    for other in {"png", "svg", "pdf"} - {fmt}:
        assert not is_format(data, other)


def test_unknown_suffix_refused(tmp_path: Path) -> None:
    with pytest.raises(ValueError, match="expected one of .png, .svg, .pdf"):
        save_figure(new_figure(), tmp_path / "x.jpg")


def test_every_plot_function_draws_on_given_axes() -> None:
    """ax= is used (no new figure) and the same Figure is returned, nothing written."""
    fig = new_figure(figsize=(8, 12))
    axes = fig.subplots(10, 1)
    assert plot_branches(_curves(), k_label="d_p", omega_label="Ω_p",
                         ax=axes[0:2]) is fig
    assert plot_roots([1 - 0.1j, 2 + 0.05j], [True, False], (0, 3, -1, 1),
                      omega_label="ω_pe", ax=axes[2]) is fig
    x, y = np.array([1.0, 2.0, 3.0]), np.array([0.5, 1.0])
    g = np.array([[-0.1, 0.2], [0.0, 0.3], [np.nan, 0.5]])
    assert plot_growth_map(x, y, g, x_label="a", y_label="b", growth_label="γ_max / Ω_p",
                           levels=[0.1], ax=axes[3]) is fig
    assert plot_threshold(x, x**2, x_label="a", y_label="b", label="l", ax=axes[4]) is fig
    lc = [LaunchCurve("wave 0", [1e6, 2e6], [10 + 1j, 20 - 2j], [True, False])]
    assert plot_launch(lc, ax=axes[5:8]) is fig
    s = np.linspace(-2, 2, 41)
    assert plot_spectrum(s, np.exp(-s**2), ion_window_nm=0.5, alpha=0.3,
                         ax=axes[8:10]) is fig
    assert len(fig.axes) >= 10
    with pytest.raises(ValueError, match="expected 2"):
        plot_branches(_curves(), k_label="d_p", omega_label="Ω_p", ax=axes[0])


def test_math_label_and_literal() -> None:
    assert math_label("ω_pe") == r"$ω_{\mathrm{pe}}$"
    assert math_label("|Ω_c(H+)|") == r"|$Ω_{\mathrm{c(H+)}}$|"
    assert math_label("γ / ω_p(Ar+)") == r"γ / $ω_{\mathrm{p(Ar+)}}$"
    # a user name with $ or odd characters is never turned into mathtext
    assert math_label("ω_p$x$") == r"$ω_{\mathrm{p}}$\$x\$"
    assert literal("a $b$") == r"a \$b\$"


def test_rendered_labels_have_no_literal_underscore(tmp_path: Path) -> None:
    """ω_r and λ_De are set as subscripts: no text drawn on the figure keeps "_"."""
    fig = plot_branches(_curves(), k_label="λ_De", omega_label="ω_pe",
                        k_unit_per_m=1.0, omega_unit_rad_per_s=1.0)
    fig.canvas.draw()
    from matplotlib.text import Text

    shown = [t for t in fig.findobj(Text) if t.get_visible() and t.get_text()]
    for t in shown:
        text = t.get_text()
        plain = text.replace("$", "") if text.count("$") >= 2 else text
        if "_" in text:
            assert text.count("$") >= 2 and "\\mathrm" in text, text
        assert "_" not in plain.replace("_{", "")


def test_long_title_is_wrapped_not_clipped() -> None:
    title = "A very long case title " * 8
    fig = plot_roots([1 + 0j], [True], None, omega_label="ω_pe", title=title)
    shown = fig.axes[0].title.get_text()
    assert "\n" in shown and shown.replace("\n", " ").split() == title.split()


def _small_case(tmp_path: Path) -> Path:
    text = (ROOT / "cases" / "argon_ion_acoustic.toml").read_text()
    text = text.replace("points = 100", "points = 4")
    assert "points = 4" in text
    path = tmp_path / "c.toml"
    path.write_text(text)
    return path


@pytest.mark.parametrize("fmt", ["svg", "pdf"])
def test_solve_figure_format(tmp_path: Path, fmt: str) -> None:
    case = _small_case(tmp_path)
    out = tmp_path / "o"
    res = runner.invoke(app, ["solve", str(case), "-o", str(out), "--figure-format", fmt])
    assert res.exit_code == 0, res.output
    assert is_format((out / f"branches.{fmt}").read_bytes(), fmt)
    assert not (out / "branches.png").exists()


def test_no_plot_writes_tables_only(tmp_path: Path) -> None:
    case = _small_case(tmp_path)
    out = tmp_path / "o"
    res = runner.invoke(app, ["roots", str(case), "-o", str(out), "--at", "0.5", "--no-plot"])
    assert res.exit_code == 0, res.output
    assert sorted(p.name for p in out.iterdir()) == ["roots-manifest.json", "roots.csv",
                                                     "roots.units.csv", "summary.json"]


def test_every_drawing_command_has_the_figure_options() -> None:
    for name in ("solve", "roots", "launch", "scatter", "sweep", "threshold"):
        res = runner.invoke(app, [name, "--help"], terminal_width=120)
        assert "--figure-format" in res.output and "--no-plot" in res.output, name


def test_rounding_noise_is_drawn_as_zero() -> None:
    from kinroots.plots.branches import curves_from_rows

    rows = [{"branch": 0, "k": k, "omega_real": re, "omega_imag": 0.01, "converged": True,
             "verified": True, "below_resolution": "real"}
            for k, re in ((0.1, -3.5e-24), (0.2, 2.0e-46))]
    (c,) = curves_from_rows(rows)
    assert list(c.omega.real) == [0.0, 0.0] and list(c.omega.imag) == [0.01, 0.01]


def test_launch_im_k_noise_is_drawn_as_zero() -> None:
    from kinroots.plots.lab import launch_curves_from_rows

    rows = [{"branch": 0, "freq_hz": f, "k_real_per_m": 30.0, "k_imag_per_m": ki,
             "converged": True, "verified": False, "below_resolution": mark}
            for f, ki, mark in ((1e5, 4e-18, "imag"), (2e5, 0.5, ""), (3e5, -2e-19, "imag"))]
    (c,) = launch_curves_from_rows(rows)
    assert list(c.k_per_m.imag) == [0.0, 0.5, 0.0] and list(c.k_per_m.real) == [30.0] * 3


def test_failed_points_are_gaps_not_zero_growth() -> None:
    from kinroots.plots.branches import curves_from_rows

    rows = [{"branch": 0, "k": 0.1, "omega_real": 1.0, "omega_imag": -0.0095,
             "converged": True, "verified": True},
            {"branch": 0, "k": 0.2, "omega_real": None, "omega_imag": None,
             "converged": False, "verified": False}]
    (c,) = curves_from_rows(rows)
    assert np.isnan(c.omega[1].real) and np.isnan(c.omega[1].imag)


def test_root_map_colour_scale_follows_the_window_interior() -> None:
    """A Landau-like factor exp(-(30 omega)^2) climbs by hundreds of decades below the real
    axis and overflows deep there: the colour scale still resolves the window (issue 15.7),
    and the overflow is drawn as its own legend entry."""
    from kinroots.plots.branches import plot_root_map

    def func(w: np.ndarray) -> np.ndarray:
        return (w - 0.2) * np.exp(-(30.0 * w) ** 2)

    box = (-0.5, 0.5, -1.0, 0.3)
    fig = plot_root_map(func, box, [0.2 + 0j], omega_label="ω_pe", resolution=80)
    mesh = fig.axes[0].collections[0]
    data = np.asarray(mesh.get_array(), dtype=float)
    finite = data[np.isfinite(data)]
    assert finite.max() - finite.min() > 200  # the data itself spans hundreds of decades
    lo, hi = mesh.get_clim()
    assert hi < finite.max() - 100  # the old scale ran up to finite.max()
    assert lo >= finite.min() - 1e-9
    labels = fig.axes[0].get_legend_handles_labels()[1]
    assert "D not finite (overflow)" in labels


def test_root_map_marks_the_window_used_and_the_excluded_points() -> None:
    """D = (ω - 0.2)/(ω - 0.5): the pole at 0.5 is excluded (a cross with its legend
    entry); a surveyed box moved off an edge is drawn beside the window (issue 15.9)."""
    from kinroots.plots.branches import plot_root_map

    def func(w: np.ndarray) -> np.ndarray:
        return (w - 0.2) / (w - 0.5)

    box = (0.0, 1.0, -0.3, 0.3)
    used = (0.0, 1.0, -0.3, 0.3 + 1e-4)
    fig = plot_root_map(func, box, [0.2 + 0j], omega_label="ω_pe", resolution=40,
                        used=used, excluded=[0.5 + 0j])
    axis = fig.axes[0]
    handles, labels = axis.get_legend_handles_labels()
    assert "search window" in labels
    cross = handles[labels.index("excluded point (pole circled by the survey)")]
    assert list(cross.get_xdata()) == [0.5] and list(cross.get_ydata()) == [0.0]
    frame = handles[labels.index("window surveyed (edge moved off a root or pole)")]
    assert max(frame.get_ydata()) == pytest.approx(0.3 + 1e-4)
    # the same box is not drawn twice, and no excluded entry without excluded points
    labels = plot_root_map(func, box, [0.2 + 0j], omega_label="ω_pe", resolution=40,
                           used=box).axes[0].get_legend_handles_labels()[1]
    assert not any(lb.startswith(("window surveyed", "excluded")) for lb in labels)


def test_empty_figures_say_nothing_was_found() -> None:
    """A run that finds nothing says so on its figure (issue 15.6): map, branches, launch."""
    from kinroots.plots.branches import plot_root_map

    def texts(fig) -> str:
        return " ".join(t.get_text() for a in fig.axes for t in a.texts)

    fig = plot_root_map(lambda w: w - 5.0, (0.0, 1.0, -0.1, 0.1), [], omega_label="ω_pe",
                        resolution=20)
    assert "no root found in the search window" in texts(fig)
    assert "no root found" not in texts(
        plot_root_map(lambda w: w - 0.5, (0.0, 1.0, -0.1, 0.1), [0.5 + 0j],
                      omega_label="ω_pe", resolution=20))
    assert "no root found in the search window" in texts(
        plot_branches([], k_label="λ_De", omega_label="ω_pe"))
    assert "no wave found in the k box" in texts(plot_launch([]))


def test_threshold_plot_with_no_points_on_a_log_axis() -> None:
    """A threshold run that found no point draws an empty curve on a log-spaced axis
    (was an internal error: max of an empty array; found by test_fuzz_commands)."""
    from kinroots.plots.maps import plot_threshold

    fig = plot_threshold(np.array([]), np.array([]), x_label="β∥", y_label="T⊥/T∥",
                         label="γ = 1e-3", x_log=True)
    assert fig.axes[0].get_xscale() == "linear"
