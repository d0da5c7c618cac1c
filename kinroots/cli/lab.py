"""Lab-prediction commands: ``kinroots launch`` and ``kinroots scatter``.

Registered on the main typer app by :func:`register` (picked up by ``kinroots.cli``).
"""

from __future__ import annotations

import math
from pathlib import Path
from typing import Annotated, Any

import typer
from rich.markup import escape

from kinroots.cli._common import (
    EXIT_BAD_INPUT,
    EXIT_INTERRUPTED,
    CaseArg,
    CtrlC,
    DefaultOpt,
    FigureFormat,
    FigureFormatOpt,
    NoPlotOpt,
    OutOpt,
    check_output_dir,
    figure_path,
    load_case_or_exit,
    stderr_console,
    stdout_console,
    written,
)

__all__ = ["register"]


def _err(message: str) -> None:
    typer.echo(message, err=True)


def _case_name(loaded: Any, case: Path | None) -> str:
    return str(loaded.source or case or "default case")


def launch_command(
    case: CaseArg = None,
    output: OutOpt = Path("kinroots-out"),
    default: DefaultOpt = False,
    figure_format: FigureFormatOpt = FigureFormat.png,
    no_plot: NoPlotOpt = False,
) -> None:
    """Waves launched at real driving frequencies ([launch] table, Hz): complex k of every
    wave in the k box, traced across frequency; writes launch.csv, launch.json and
    launch.png (wavelength, phase speed, damping length 1/Im k).

    Exit code 0 when every point converged, 1 when some failed (flagged: converged =
    false, value cells empty), 2 on bad input.

    Example: kinroots launch cases/lab_launched_ion_acoustic.toml -o out/launch
    """
    from rich.progress import BarColumn, Progress, TextColumn, TimeElapsedColumn

    from kinroots.cli._common import table_units
    from kinroots.io.tables import OutputSet, write_csv, write_json, write_units
    from kinroots.study import launch as launch_mod
    from kinroots.study.rows import metadata
    from kinroots.study.solve import nothing_found_note

    loaded = load_case_or_exit(case, default)
    if loaded.launch is None:
        _err(f"error: {_case_name(loaded, case)}: launch: missing; expected a [launch] table "
             "with frequency = { start = ..., stop = ..., points = ... } in Hz")
        raise typer.Exit(EXIT_BAD_INPUT)
    check_output_dir(output)
    console = stderr_console()
    results = stdout_console()  # results on stdout, diagnostics on stderr
    n = len(loaded.launch.frequencies_hz)
    with CtrlC() as stop, Progress(
        TextColumn("[bold]launching[/bold] {task.description}"), BarColumn(),
        TextColumn("{task.completed}/{task.total} f"), TimeElapsedColumn(),
        console=console, transient=True,
    ) as bar:
        task = bar.add_task(escape(loaded.title), total=n)
        res = launch_mod.launch(loaded, progress=lambda d, t: bar.update(task, completed=d),
                                should_stop=stop)
    rows = launch_mod.launch_rows(res)
    columns = launch_mod.launch_columns(loaded)
    u = loaded.units
    summary = metadata(loaded, rows=[], extra={
        "problem": "spatial: complex k at real omega = 2 pi f (launched waves)",
        "k_box": list(res.box),
        "launch_columns": {
            "freq_hz": "driving frequency f [Hz]",
            "omega": f"2 pi f / {u.frequency_label_ascii}",
            "k_real, k_imag": f"Re k, Im k times {u.length_label_ascii}",
            "k_real_per_m, k_imag_per_m": "Re k, Im k [1/m]",
            "wavelength_m": "2 pi / Re k [m]",
            "phase_speed_m_per_s": "2 pi f / Re k [m/s]",
            "damping_length_m": "1 / Im k [m]; > 0 decays along +k, < 0 grows; empty "
                                "where Im k is below the root's accuracy "
                                "(below_resolution = imag)",
            "damping_length_cm": "1 / Im k [cm]",
            "mode identity": "see kinroots.physics.modes and README (Output)",
        },
        "branches": [{"branch": b.id, "points": len(b.points), "end_reason": b.end_reason,
                      "note": b.note} for b in res.branches],
        "surveys": [{"freq_hz": f, "count": s.count, "found": len(s.values),
                     "complete": s.complete} for f, s in res.surveys],
        "point_checks": [
            {"freq_hz": float(c.param * loaded.units.omega_unit / (2.0 * math.pi)),
             "count": c.count, "rows": c.rows, "verified": c.verified, "reason": c.reason}
            for c in res.point_checks
        ],
        "unverified_points": res.unverified_points,
        "failed_points": res.failed_points,
        "interrupted": res.interrupted,
        "notes": res.notes + ([] if rows else [nothing_found_note(
            res.point_checks, what="wave", region="k box",
            label=lambda w: f"f = {w * u.omega_unit / (2.0 * math.pi):.6g} Hz",
            keys="launch.k_real, launch.k_imag")]),
    })
    summary.pop("fastest_growing", None)
    summary.pop("least_damped", None)
    out = OutputSet(output, "launch")
    write_csv(out.stage("launch.csv"), rows, columns)
    write_units(out.stage("launch.units.csv"), table_units(loaded, columns))
    write_json(out.stage("launch.json"), summary)
    fig_path = figure_path(output, "launch", figure_format, no_plot)
    if fig_path is not None:
        from kinroots.plots.lab import launch_curves_from_rows, plot_launch

        plot_launch(launch_curves_from_rows(rows), title=loaded.title,
                    path=out.stage(fig_path.name))
    out.commit()
    results.print(f"{len(res.branches)} wave(s) in the k box over {n} frequencies")
    for r in rows:
        if r["converged"] and r is rows[0]:
            damp = (f"{r['damping_length_cm']:.4g} cm" if r["damping_length_cm"] is not None
                    else "not resolved (Im k below the root's accuracy: undamped to it)")
            results.print(f"wave {r['branch']} at f = {r['freq_hz']:.4g} Hz: wavelength "
                          f"{r['wavelength_m']:.4g} m, damping length {damp}")
    for note in res.notes:
        console.print(f"note: {note}")
    if not rows:
        results.print(summary["notes"][-1])
    results.print(written(output / "launch.csv", output / "launch.json", fig_path))
    if res.interrupted:
        console.print("interrupted: the tables hold the frequencies done before Ctrl-C "
                      "(launch.json: interrupted = true)", style="red")
        raise typer.Exit(EXIT_INTERRUPTED)
    if res.failed_points or res.unverified_points:
        where = ("flagged in the table (converged = false) and in launch.json (point_checks)"
                 if rows else "no wave was found at any frequency, so launch.csv holds only "
                 "its header; launch.json and the notes above say why")
        console.print(f"{res.failed_points} point(s) failed, {res.unverified_points} of {n} "
                      f"frequencies not verified by a zero count: {where}", style="red")
        raise typer.Exit(1)


def scatter_command(
    case: CaseArg = None,
    laser_wavelength: Annotated[float, typer.Option(
        "--laser-wavelength", help="Probe laser wavelength [m], e.g. 532e-9.")] = 532e-9,
    angle: Annotated[float, typer.Option(
        "--angle", help="Scattering angle between incident and scattered light [deg].")] = 90.0,
    points: Annotated[int, typer.Option("--points", help="Spectrum samples.")] = 4001,
    output: OutOpt = Path("kinroots-out"),
    default: DefaultOpt = False,
    figure_format: FigureFormatOpt = FigureFormat.png,
    no_plot: NoPlotOpt = False,
) -> None:
    """Thermal fluctuation spectrum seen by a probe laser: S(k, ω) against scattered
    wavelength, with α = 1/(k λ_De); writes spectrum.csv, spectrum.json, spectrum.png.

    k = k_s − k_i makes the case's wave.angle with z (the drift axis).  Needs B = 0 and
    no collisions.  Exit code 0 done, 2 bad input.

    Example: kinroots scatter cases/lab_launched_ion_acoustic.toml
             --laser-wavelength 532e-9 --angle 90 -o out/scatter
    """
    from kinroots.cli._common import table_units
    from kinroots.io.tables import OutputSet, write_csv, write_json, write_units
    from kinroots.physics import spectrum
    from kinroots.physics.plasma import CONVENTIONS, derived_quantities

    loaded = load_case_or_exit(case, default)
    option = {"laser_wavelength": "--laser-wavelength", "scattering_angle": "--angle"}
    problems = [f"option {option[key]}: {why}" for key, why in spectrum.probe_problems(
        loaded.plasma, laser_wavelength, angle, loaded.angle_deg).items()]
    if points < 11:
        problems.append(f"option --points: {points!r}: expected an integer >= 11")
    name = _case_name(loaded, case)
    if loaded.plasma.magnetized:
        problems.append(f"{name}: magnetic_field.B: {loaded.plasma.B!r}: the scattering "
                        "spectrum is implemented for B = 0 only; expected 0")
    for i, s in enumerate(loaded.plasma.species, start=1):
        if s.collision_frequency > 0:
            problems.append(f"{name}: species[{i}].collision_frequency: "
                            f"{s.collision_frequency!r}: the scattering spectrum is "
                            "collisionless; expected 0")
        if not s.is_plain_maxwellian:
            key = "components" if s.components else "distribution"
            problems.append(f"{name}: species[{i}].{key}: the scattering spectrum is "
                            "implemented for drifting bi-Maxwellians only; expected "
                            "one Maxwellian (no kappa, no components)")
    if not any(s.is_electron for s in loaded.plasma.species):
        problems.append(f"{name}: species: no electron species; expected one")
    if problems:
        for p in problems:
            _err(f"error: {p}")
        raise typer.Exit(EXIT_BAD_INPUT)
    check_output_dir(output)
    console = stderr_console()
    results = stdout_console()  # results on stdout, diagnostics on stderr
    with console.status("computing the fluctuation spectrum"):
        sp = spectrum.scattered_spectrum(loaded.plasma, laser_wavelength=laser_wavelength,
                                         scattering_angle_deg=angle,
                                         k_angle_deg=loaded.angle_deg, points=points)
    rows = sp.rows()
    cols = sp.columns
    import numpy as np

    ion_nm = float(np.max(np.abs(cols["wavelength_shift_nm"][
        np.abs(cols["omega_rad_per_s"]) <= 0.02 * np.max(np.abs(cols["omega_rad_per_s"]))])))
    rule = spectrum.sum_rule_check(loaded.plasma, sp)
    meta = {
        "title": loaded.title,
        "source": str(loaded.source) if loaded.source else None,
        "case": loaded.raw,
        "conventions": CONVENTIONS,
        "derived": derived_quantities(loaded.plasma, loaded.units),
        "laser_wavelength_m": sp.laser_wavelength_m,
        "scattering_angle_deg": sp.scattering_angle_deg,
        "k_direction": f"k = k_s - k_i at {loaded.angle_deg} deg to z",
        "k_bragg_per_m": sp.k_bragg_per_m,
        "alpha_bragg": sp.alpha_bragg,
        "columns": {
            "spectral_density_s": "S(k, omega) [s]; (1/2 pi) integral S d omega = S(k)",
            "relative_power_per_nm": "(1 + 2 omega/omega_i) S |d omega_s/d lambda_s|, max 1",
            "alpha": "1 / (k lambda_De)",
            "omega_rad_per_s": "omega_s - omega_i",
        },
        "formula": "Sheffield et al. 2011 ch. 5 (from memory); see kinroots.physics.spectrum",
        "samples": len(rows),
        "sum_rule": rule,
    }
    out = OutputSet(output, "scatter")
    write_csv(out.stage("spectrum.csv"), rows, spectrum.SPECTRUM_COLUMNS)
    write_units(out.stage("spectrum.units.csv"), table_units(loaded, spectrum.SPECTRUM_COLUMNS))
    write_json(out.stage("spectrum.json"), meta)
    fig_path = figure_path(output, "spectrum", figure_format, no_plot)
    if fig_path is not None:
        from kinroots.plots.lab import plot_spectrum

        plot_spectrum(cols["wavelength_shift_nm"], cols["relative_power_per_nm"],
                      ion_window_nm=ion_nm, alpha=sp.alpha_bragg,
                      title=f"{loaded.title}: λ_i = {laser_wavelength * 1e9:.4g} nm, "
                            f"θ = {angle:g}°, α = {sp.alpha_bragg:.3g}",
                      path=out.stage(fig_path.name))
    out.commit()
    results.print(f"k = {sp.k_bragg_per_m:.6g} 1/m, α = 1/(k λ_De) = {sp.alpha_bragg:.4g}; "
                  f"{len(rows)} samples; (1/2π)∫S dω = {rule['area']:.5g}; "
                  + written(output / "spectrum.csv", output / "spectrum.json", fig_path))
    if rule["relative_difference"] is not None and rule["relative_difference"] > 0.02:
        console.print(f"warning: (1/2π)∫S dω = {rule['area']:.5g} differs from Salpeter's "
                      f"S(k) = {rule['salpeter']:.5g} by {100 * rule['relative_difference']:.2g} "
                      "%: a feature may be under-resolved (try --points) or outside the "
                      "sampled range", style="yellow")


def register(app: typer.Typer) -> None:
    """Add ``launch`` and ``scatter`` to ``app``."""
    app.command("launch")(launch_command)
    app.command("scatter")(scatter_command)
