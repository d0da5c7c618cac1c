"""The public Python API (``import kinroots``), used only through its public names.

Physics checks name their source; the rest checks the contract: DataFrame columns equal
to the CLI's tables, Datasets with units and long names, pickling into spawned processes
and a Dask cluster, and a netCDF round trip.
"""

from __future__ import annotations

import concurrent.futures
import math
import multiprocessing
import pickle
import tomllib
from pathlib import Path

import mpmath
import numpy as np
import pandas as pd
import pytest
import xarray as xr
from scipy.constants import m_e, m_p

import kinroots

REPO = Path(__file__).resolve().parent.parent

# An invented warm hydrogen plasma: Langmuir waves in the window below.
ELECTRONS = kinroots.Species("e", -1, m_e, 1.0e16, 2.0, 2.0)
PROTONS = kinroots.Species("H+", 1, m_p, 1.0e16, 0.2, 0.2)
WINDOW = {"real": [0.8, 3.0], "imag": [-0.5, 0.2]}


def _langmuir_case(k=0.3):
    return kinroots.case_from_plasma(kinroots.Plasma((ELECTRONS, PROTONS)), k=k, search=WINDOW,
                                     title="warm hydrogen, Langmuir waves")


def _mp_z(zeta: complex) -> complex:
    """Plasma dispersion function Z(ζ) = i√π exp(−ζ²) erfc(−iζ) at 30 digits (Fried &
    Conte, The Plasma Dispersion Function, 1961, eq. for Z in terms of erfc)."""
    with mpmath.workdps(30):
        z = mpmath.mpc(zeta.real, zeta.imag)
        return complex(1j * mpmath.sqrt(mpmath.pi) * mpmath.exp(-z * z) * mpmath.erfc(-1j * z))


def _chi_maxwellian(s: kinroots.Species, omega: complex, k: float) -> complex:
    """Longitudinal χ of a drifting Maxwellian, k along the drift, SI:
    χ = (1 + ζ Z(ζ)) / (k λ_D)², ζ = (ω − k V)/(k w), w = √(2T/m)
    (Stix, Waves in Plasmas, 1992, ch. 8, electrostatic limit; equation number from
    memory)."""
    from scipy.constants import e, epsilon_0

    lam2 = epsilon_0 * s.temperature_par * e / (s.density * (s.charge_number * e) ** 2)
    w = math.sqrt(2 * s.temperature_par * e / s.mass)
    zeta = (omega - k * s.drift) / (k * w)
    return (1 + zeta * _mp_z(zeta)) / (k * k * lam2)


def test_roots_at_one_k_from_a_plasma_built_in_code():
    case = _langmuir_case()
    found = kinroots.roots(case, 0.3)
    assert found.complete and len(found.values) >= 1
    u = case.units
    k_si = 0.3 / u.length_unit
    for w in found.values:  # every root is a zero of D computed independently
        d = 1 + sum(_chi_maxwellian(s, complex(w) * u.omega_unit, k_si)
                    for s in case.plasma.species)
        assert abs(d) < 1e-8
    # the least-damped root is the Langmuir wave: Bohm–Gross ω² ≈ 1 + 3k² (Bohm & Gross,
    # Phys. Rev. 75, 1851, 1949) to a few per cent at kλ_De = 0.3
    langmuir = max(found.values, key=lambda w: w.imag)
    assert langmuir.real == pytest.approx(math.sqrt(1 + 3 * 0.3**2), rel=0.03)
    assert langmuir.imag < 0
    text = repr(found)
    assert len(text.splitlines()) <= 6 and "complete" in text
    assert "<b>" in found._repr_html_()


def test_case_from_dict_takes_numpy_values_one_k_and_no_title():
    doc = {
        "species": [
            {"name": "e", "charge": np.int64(-1), "mass": "electron",
             "density": np.float64(1e16), "temperature": np.float32(2.0)},
            {"name": "H+", "charge": np.int32(1), "mass": "proton", "density": 1e16,
             "temperature": 0.2},
        ],
        "wave": {"model": "electrostatic"},
        "scan": {"k": np.float64(0.3)},
        "search": {"real": np.array([0.8, 3.0]), "imag": (-0.5, 0.2)},
    }
    case = kinroots.case_from_dict(doc)
    assert list(case.k_values) == [0.3]
    assert case.plasma == _langmuir_case().plasma
    listed = kinroots.case_from_dict({**doc, "scan": {"k": np.array([0.2, 0.3, 0.5])}})
    assert list(listed.k_values) == [0.2, 0.3, 0.5]
    with pytest.raises(kinroots.CaseError, match=r"scan\.k.*increasing"):
        kinroots.case_from_dict({**doc, "scan": {"k": [0.3, 0.2]}})
    assert len(repr(case).splitlines()) <= 5


def test_case_from_plasma_keeps_every_species_kind():
    from kinroots.physics.plasma import Component

    kappa = kinroots.Species("e", -1, m_e, 1e16, 2.0, 3.0, distribution="kappa", kappa=4.0)
    parts = (Component(0.8, 1.0, 1.0, -1e5), Component(0.2, 1.0, 2.0, 4e5))
    split = kinroots.Species("p", 1, m_p, 1e16, 0.0, 0.0, components=parts)
    case = kinroots.case_from_plasma(kinroots.Plasma((kappa, split), B=1e-3),
                                     model="electromagnetic", search=WINDOW)
    got = case.plasma.species
    assert got[0] == kappa
    assert got[1].components == parts and got[1].mass == m_p


def test_dispersion_and_susceptibilities_against_mpmath():
    beam = kinroots.Species("beam", -1, m_e, 1e15, 1.0, 1.0, drift=3e6)
    bulk = kinroots.Species("e", -1, m_e, 9e15, 2.0, 2.0, drift=-3e6 / 9)
    plasma = kinroots.Plasma((bulk, beam, PROTONS))
    case = kinroots.case_from_plasma(plasma, search=WINDOW)
    f = kinroots.dispersion(case, 0.4)
    omega = np.array([1.2 - 0.3j, 0.5 + 0.1j, 0.02 - 0.001j])  # normalized (ω_pe)
    chi = f.susceptibilities(omega)
    assert set(chi) == {"e", "beam", "H+"}
    u = case.units
    for s in plasma.species:
        expected = [_chi_maxwellian(s, complex(w) * u.omega_unit, f.k_per_m) for w in omega]
        np.testing.assert_allclose(chi[s.name], expected, rtol=1e-10)
    np.testing.assert_allclose(f(omega), 1 + sum(chi.values()), rtol=1e-12)
    # dD/dω̂ against a central difference of D
    h = 1e-6
    numeric = (f(omega + h) - f(omega - h)) / (2 * h)
    np.testing.assert_allclose(f.derivative(omega), numeric, rtol=1e-6)
    assert len(repr(f).splitlines()) <= 3


def test_electromagnetic_susceptibility_cold_limit():
    # Cold plasma (Stix, Waves in Plasmas, 1992, ch. 1: S and P, from memory): away from
    # the resonances χ_xx → −ω_p²/(ω² − Ω²) and χ_zz → −ω_p²/ω² for each species.
    cold_e = kinroots.Species("e", -1, m_e, 1e18, 1e-3, 1e-3)
    cold_p = kinroots.Species("p", 1, m_p, 1e18, 1e-3, 1e-3)
    plasma = kinroots.Plasma((cold_e, cold_p), B=1.0)
    case = kinroots.case_from_plasma(plasma, model="electromagnetic", angle=30.0,
                                     search={"real": [0.1, 2], "imag": [-0.1, 0.1]})
    f = kinroots.dispersion(case, 1e-4)  # k λ_De: thermal corrections ~ (k w / ω)² ≈ 1e-8
    omega = np.array([0.7 + 0.01j, 1.6])
    chi = f.susceptibilities(omega)
    w_si = omega * case.units.omega_unit
    for s in plasma.species:
        wp2 = s.plasma_frequency**2
        om_c = s.cyclotron_frequency(plasma.B)
        assert chi[s.name].shape == (2, 3, 3)
        np.testing.assert_allclose(chi[s.name][:, 0, 0], -wp2 / (w_si**2 - om_c**2), rtol=1e-6)
        np.testing.assert_allclose(chi[s.name][:, 2, 2], -wp2 / w_si**2, rtol=1e-6)


def _branches_csv(tmp_path, case_path):
    from typer.testing import CliRunner

    from kinroots.cli import app

    out = tmp_path / "cli"
    result = CliRunner().invoke(app, ["solve", str(case_path), "-o", str(out)])
    assert result.exit_code == 0, result.output
    return pd.read_csv(out / "branches.csv")


def test_trace_to_dataframe_and_xarray(tmp_path):
    case_path = tmp_path / "langmuir.toml"
    case_path.write_text(
        'title = "warm hydrogen"\n'
        '[[species]]\nname = "e"\ncharge = -1\nmass = "electron"\ndensity = 1e16\n'
        'temperature = 2.0\n'
        '[[species]]\nname = "H+"\ncharge = 1\nmass = "proton"\ndensity = 1e16\n'
        'temperature = 0.2\n'
        '[wave]\nmodel = "electrostatic"\n'
        '[scan]\nk = { start = 0.2, stop = 0.4, points = 5 }\n'
        '[search]\nreal = [0.8, 3.0]\nimag = [-0.5, 0.2]\n', encoding="utf-8")
    sol = kinroots.solve(kinroots.load_case(case_path))
    assert sol.failed_points == 0 and sol.branches
    df = sol.to_dataframe()
    csv = _branches_csv(tmp_path, case_path)
    assert list(df.columns) == list(csv.columns)
    np.testing.assert_allclose(df["omega_imag"], csv["omega_imag"], rtol=1e-12, atol=0)
    np.testing.assert_array_equal(df["branch"], csv["branch"])

    ds = sol.to_xarray()
    assert dict(ds.sizes) == {"branch": len(sol.branches), "k": 5}
    for name, var in {**ds.data_vars, **ds.coords}.items():
        assert var.attrs.get("long_name") and var.attrs.get("units"), name
    assert ds["omega_real"].attrs["units"] == "omega_pe"
    assert ds["k"].attrs["units"] == "1/lambda_De"
    assert ds["converged"].dtype == np.int8
    assert list(ds["converged"].attrs["flag_values"]) == [-1, 0, 1]
    for row in df.itertuples():
        cell = ds.sel(branch=row.branch, k=row.k)
        assert float(cell["omega_real"]) == row.omega_real
        assert int(cell["converged"]) == int(row.converged)
    lines = repr(sol).splitlines()
    assert 1 < len(lines) <= 6


def _sweep_case():
    """A two-point [sweep] of an invented electron beam (1-D, electrostatic, B = 0)."""
    return kinroots.case_from_dict({
        "title": "beam drift sweep",
        "species": [
            {"name": "e", "charge": -1, "mass": "electron", "density": 0.99e16,
             "temperature": 1.0, "drift": -0.01 / 0.99 * 8.4e6},
            {"name": "beam", "charge": -1, "mass": "electron", "density": 1e14,
             "temperature": 1.0, "drift": 8.4e6},
            {"name": "H+", "charge": 1, "mass": "proton", "density": 1e16,
             "temperature": 0.1},
        ],
        "wave": {"model": "electrostatic"},
        "scan": {"k": {"start": 0.04, "stop": 0.12, "points": 3}},
        "search": {"real": [0.8, 1.5], "imag": [-0.05, 0.3]},
        "sweep": {"x": {"parameter": "species.beam.drift", "start": 6e6, "stop": 8.4e6,
                        "points": 2}},
    })


def _check_sweep(ds, case):
    assert dict(ds.sizes) == {"species_beam_drift": 2}
    dim = "species_beam_drift"
    np.testing.assert_allclose(ds[dim].values, [6e6, 8.4e6])
    assert ds[dim].attrs["units"] == "m/s"
    for name, var in {**ds.data_vars, **ds.coords}.items():
        assert var.attrs.get("long_name") and var.attrs.get("units"), name
    assert ds["growing"].dtype == np.int8 and "flag_meanings" in ds["growing"].attrs
    assert ds.attrs["kinroots_version"] == kinroots.__version__
    assert "conventions" not in ds.attrs and "Conventions" not in ds.attrs
    assert "exp(i k.x - i omega t)" in ds.attrs["kinroots_sign_convention"]
    assert tomllib.loads(ds.attrs["case"]) == case.raw


def test_sweep_to_a_dataset(tmp_path):
    case = _sweep_case()
    ds = kinroots.sweep(case, workers=1)
    _check_sweep(ds, case)
    ds.to_netcdf(tmp_path / "sweep.nc")
    with xr.open_dataset(tmp_path / "sweep.nc") as back:
        _check_sweep(back, case)
        np.testing.assert_array_equal(back["growth_max"].values, ds["growth_max"].values)
    assert (ds["converged"] == 1).all()
    # the maximum over k can only exceed the largest growth found at the scan's k values
    raw = case.raw
    for i, drift in enumerate(ds["species_beam_drift"].values):
        point = dict(raw, species=[dict(s) for s in raw["species"]])
        point["species"][1]["drift"] = float(drift)
        point.pop("sweep")
        best = max(w.imag for k in case.k_values for w in kinroots.roots(point, k).values)
        assert float(ds["growth_max"][i]) >= best - 1e-9
    assert float(ds["growth_max"][1]) > 0  # the faster beam is unstable


def _roots_in_child(k: float) -> kinroots.RootSet:
    return kinroots.roots(_langmuir_case(), k)


def test_use_under_multiprocessing_spawn():
    ctx = multiprocessing.get_context("spawn")
    with concurrent.futures.ProcessPoolExecutor(max_workers=1, mp_context=ctx) as pool:
        got = list(pool.map(_roots_in_child, [0.2, 0.3]))
    for k, r in zip([0.2, 0.3], got, strict=True):
        here = kinroots.roots(_langmuir_case(), k)
        assert isinstance(r, kinroots.RootSet) and r.complete
        np.testing.assert_allclose(r.values, here.values, rtol=1e-12)
        assert list(r.to_dataframe().columns) == list(here.to_dataframe().columns)


def test_use_under_a_dask_local_cluster():
    import distributed  # a dependency: missing must fail, not skip

    with (distributed.LocalCluster(n_workers=1, threads_per_worker=1, processes=False,
                                   dashboard_address=None) as cluster,
          distributed.Client(cluster) as client):
        fut = client.submit(kinroots.roots, _langmuir_case(), 0.3)
        here = kinroots.roots(_langmuir_case(), 0.3)
        np.testing.assert_allclose(fut.result().values, here.values, rtol=1e-12)
        case = _sweep_case()
        ds = kinroots.sweep(case, scheduler=client)
        _check_sweep(ds, case)


def test_netcdf_round_trip(tmp_path):
    sol = kinroots.solve(_langmuir_case(k={"start": 0.2, "stop": 0.3, "points": 3}))
    again = pickle.loads(pickle.dumps(sol))
    assert repr(again) == repr(sol) and again.failed_points == sol.failed_points
    ds = sol.to_xarray()
    path = tmp_path / "branches.nc"
    ds.to_netcdf(path)
    with xr.open_dataset(path) as back:
        assert back["converged"].dtype == np.int8
        assert back["converged"].attrs["flag_meanings"] == ds["converged"].attrs["flag_meanings"]
        for name in ds.variables:
            assert back[name].attrs["units"] == ds[name].attrs["units"], name
            assert back[name].attrs["long_name"] == ds[name].attrs["long_name"], name
        np.testing.assert_array_equal(back["omega_imag"].values, ds["omega_imag"].values)
        assert tomllib.loads(back.attrs["case"]) == sol.case.raw
        for key in ("title", "kinroots_version", "history", "kinroots_sign_convention"):
            assert back.attrs[key] == ds.attrs[key]


def test_import_is_light_and_names_resolve():
    import subprocess
    import sys

    code = ("import sys, kinroots; heavy = [m for m in ('numpy', 'scipy', 'xarray', "
            "'kinroots.api') if m in sys.modules]; print(heavy)")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True,
                         check=True).stdout
    assert out.strip() == "[]"
    for name in kinroots.__all__:
        assert getattr(kinroots, name) is not None
    from kinroots.roots import find_roots  # the root-finding layer of the same name

    assert callable(find_roots)
    assert kinroots.roots.__module__ == "kinroots.api"
    with pytest.raises(AttributeError):
        kinroots.no_such_name  # noqa: B018
    # tab completion in a notebook offers the API, not helper modules or subpackages
    assert dir(kinroots) == sorted(kinroots.__all__)


def test_launch_agrees_with_the_temporal_roots():
    """Weak damping: the spatial rate of a driven wave is Im k = −γ/v_g at k = Re k
    (Gaster, J. Fluid Mech. 14, 222, 1962, the relation between temporal and spatial
    growth rates; here for the damped ion acoustic wave of the lab example)."""
    case = kinroots.load_case(REPO / "cases" / "lab_launched_ion_acoustic.toml")
    driven = kinroots.launch(case, frequencies_hz=[2.0e6])
    df = driven.to_dataframe()
    assert len(df) == 1 and bool(df["converged"][0])
    row = df.iloc[0]
    assert row["wavelength_m"] == pytest.approx(2 * math.pi / row["k_real_per_m"], rel=1e-12)
    assert row["damping_length_m"] == pytest.approx(1 / row["k_imag_per_m"], rel=1e-12)
    k, h = float(row["k_real"]), 1e-4
    w_drive = float(row["omega"])

    def temporal(kk):
        return min(kinroots.roots(case, kk).values, key=lambda w: abs(w.real - w_drive))

    w = temporal(k)
    group = (temporal(k + h).real - temporal(k - h).real) / (2 * h)
    assert w.real == pytest.approx(w_drive, rel=1e-4)
    assert float(row["k_imag"]) == pytest.approx(-w.imag / group, rel=1e-4)  # (γ/ω)² ≈ 4e-6
    assert "Launch" in repr(driven) and len(repr(driven).splitlines()) <= 3


def test_spectrum_to_dataframe():
    case = kinroots.load_case(REPO / "cases" / "lab_launched_ion_acoustic.toml")
    sp = kinroots.spectrum(case, laser_wavelength=10.6e-6, scattering_angle=1.0, points=401)
    df = sp.to_dataframe()
    # 401 starting samples, more where the peaks need them (adaptive bisection)
    assert len(df) > 401 and "spectral_density_s" in df.columns
    assert df["scattered_wavelength_nm"].is_monotonic_increasing
    # α = 1/(k λ_De) (definition of the scattering parameter)
    assert sp.alpha == pytest.approx(1 / (sp.k_per_m * case.plasma.electron_debye_length),
                                     rel=1e-9)
    assert (df["spectral_density_s"] >= 0).all()


@pytest.mark.parametrize("freqs", [[3e6, 1e6], [2e6, 2e6], [], [math.nan], [1e25], "abc",
                                   [[1e6, 2e6]]])
def test_launch_refuses_bad_frequencies(freqs):
    # the limits of the case file's launch.frequency, named in the message
    case = kinroots.load_case(REPO / "cases" / "lab_launched_ion_acoustic.toml")
    with pytest.raises(ValueError, match="frequencies_hz: got .*expected"):
        kinroots.launch(case, frequencies_hz=freqs)


def test_api_inputs_named_in_errors():
    case = kinroots.load_case(REPO / "cases" / "hydrogen_discharge.toml")
    with pytest.raises(ValueError, match="k: got True"):
        kinroots.roots(case, True)
    with pytest.raises(ValueError, match="workers: got -3"):
        kinroots.sweep(REPO / "cases" / "sweep_proton_anisotropy.toml", workers=-3)
    f = kinroots.dispersion(case, 0.3)
    with pytest.raises(ValueError, match="omega: got 'x', expected complex"):
        f("x")
    # no value beyond double precision or at ω = ∞: NaN in both parts (a NaN real part
    # with imaginary part 0 would read as a number on the real axis)
    d = f(np.array([1e300, np.inf, 1.1]))
    assert np.isnan(d[:2].real).all() and np.isnan(d[:2].imag).all()
    assert np.isfinite(d[2])
