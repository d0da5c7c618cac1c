"""kinroots: roots of the linear Vlasov dispersion relation of multi-species plasmas.

The public API (names resolved on first use, so ``import kinroots`` stays light)::

    load_case(path)                  a case file -> Case
    case_from_dict(mapping)          the keys of a case file, as a dict -> Case
    case_from_plasma(plasma, ...)    a Plasma built in code -> Case
    Species, Plasma                  species (SI, temperatures in eV) and B [T]
    roots(case, k)                   every root in the window at one k -> RootSet
    solve(case, progress=None)       every branch across the k scan -> Solution
    sweep(case, workers, scheduler)  a [sweep] grid -> xarray.Dataset (as sweep.nc)
    dispersion(case, k)              D(omega) and the susceptibilities at one k
    launch(case)                     complex k of driven waves ([launch] table) -> Launch
    spectrum(case, laser_wavelength=, scattering_angle=)   scattered spectrum -> Spectrum

Example::

    import kinroots
    case = kinroots.load_case("cases/argon_ion_acoustic.toml")
    sol = kinroots.solve(case)
    df = sol.to_dataframe()          # the columns of branches.csv

Note: ``kinroots.roots`` is the function above.  The root-finding layer of the same name
is imported as ``from kinroots.roots import find_roots`` (through ``sys.modules``), never
as ``import kinroots.roots as ...``.
"""

import sys as _sys
import types as _types

#: Public name -> module that defines it.
_EXPORTS: dict[str, str] = {
    "load_case": "kinroots.io.case",
    "case_from_dict": "kinroots.io.case",
    "case_from_plasma": "kinroots.io.case",
    "Case": "kinroots.io.case",
    "CaseError": "kinroots.io.case",
    "Species": "kinroots.physics.plasma",
    "Plasma": "kinroots.physics.plasma",
    "roots": "kinroots.api",
    "solve": "kinroots.api",
    "sweep": "kinroots.api",
    "dispersion": "kinroots.api",
    "launch": "kinroots.api",
    "spectrum": "kinroots.api",
    "RootSet": "kinroots.api",
    "Solution": "kinroots.api",
    "DispersionFunction": "kinroots.api",
    "Launch": "kinroots.api",
    "Spectrum": "kinroots.api",
}

__all__ = ["__version__", *_EXPORTS]


def __getattr__(name: str) -> object:
    if name == "__version__":
        from importlib.metadata import PackageNotFoundError, version

        try:
            value = version("kinroots")
        except PackageNotFoundError:  # a source tree without installation
            value = "0+unknown"
    elif name in _EXPORTS:
        import importlib

        value = getattr(importlib.import_module(_EXPORTS[name]), name)
    else:
        raise AttributeError(f"module 'kinroots' has no attribute {name!r}")
    globals()[name] = value
    return value


def __dir__() -> list[str]:
    # the public names only (not the helper modules above nor loaded subpackages)
    return sorted(__all__)


class _Package(_types.ModuleType):
    """The package module: the public function ``roots`` keeps its name when the
    subpackage ``kinroots.roots`` (the root-finding layer) is imported."""

    def __setattr__(self, name: str, value: object) -> None:
        if name == "roots" and isinstance(value, _types.ModuleType):
            return  # the subpackage stays reachable through sys.modules
        super().__setattr__(name, value)


_sys.modules[__name__].__class__ = _Package
