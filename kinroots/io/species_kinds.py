"""The distribution keys of a ``[[species]]`` table: ``distribution``, ``kappa`` and
``[[species.components]]`` (validated here, called from ``species_tables``)."""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass
from typing import Any

from kinroots.io.checker import Checker
from kinroots.io.limits import LIMITS
from kinroots.physics.models.species_models import negative_region
from kinroots.physics.plasma import C_LIGHT, DISTRIBUTIONS, EV, Component

#: Keys of one ``[[species.components]]`` table.
COMPONENT_KEYS = ("weight", "temperature", "temperature_par", "temperature_perp", "drift")
#: Tolerance on Σ weights = 1.
WEIGHT_SUM_TOL = 1e-9


@dataclass(frozen=True)
class Kind:
    """What the distribution keys of one species table say."""

    distribution: str = "maxwellian"
    kappa: float | None = None
    components: tuple[Component, ...] = ()


def check_kind(chk: Checker, entry: Mapping[str, Any], p: str) -> Kind | None:
    """``distribution`` / ``kappa`` / ``components`` of the species table at ``p``.

    Returns None after reporting a problem.  Component species must not also give
    species-level temperatures or a drift (their moments follow from the components).
    """
    n_errors = len(chk.errors)
    dist = chk.choice(entry, "distribution", f"{p}.distribution", DISTRIBUTIONS,
                      default="maxwellian", required=False)
    kappa = None
    if dist == "kappa":
        kappa = chk.number(entry, "kappa", f"{p}.kappa",
                           'a number in (1.5, 1e6] (the kappa index; distribution = "kappa")',
                           check=lambda x: 1.5 < x <= 1e6)
    elif "kappa" in entry and dist is not None:
        chk.error(f"{p}.kappa", f"got {entry['kappa']!r}, but {p}.distribution is "
                  f"{dist!r}; expected distribution = \"kappa\" with it, or no kappa key")
    components: tuple[Component, ...] = ()
    if "components" in entry:
        if dist == "kappa":
            chk.error(f"{p}.components", "components are drifting bi-Maxwellians; expected "
                      'no components with distribution = "kappa"')
        for key in ("temperature", "temperature_par", "temperature_perp", "drift"):
            if key in entry:
                chk.error(f"{p}.{key}", f"given together with [[{p}.components]]; expected "
                          "temperatures and drifts in the component tables only")
        components = _check_components(chk, entry["components"], p) or ()
    if len(chk.errors) > n_errors or dist is None:
        return None
    return Kind(dist, kappa, components)


def _check_components(chk: Checker, value: Any, p: str) -> tuple[Component, ...] | None:
    path = f"{p}.components"
    if not isinstance(value, list) or not value or not all(isinstance(v, dict) for v in value):
        chk.bad(path, value, "one or more [[species.components]] tables")
        return None
    out: list[Component] = []
    n_errors = len(chk.errors)
    for j, tab in enumerate(value, start=1):
        q = f"{path}[{j}]"
        chk.unknown_keys(tab, COMPONENT_KEYS, q)
        w = chk.number(tab, "weight", f"{q}.weight",
                       "a non-zero number (share of the species density; may be negative)",
                       check=lambda x: x != 0.0)
        t_par, t_perp = _component_temperatures(chk, tab, q)
        drift = chk.number(tab, "drift", f"{q}.drift", "a number (m/s) with |drift| < c",
                           default=0.0, required=False, check=lambda x: abs(x) < C_LIGHT)
        if w is not None and t_par is not None and t_perp is not None and drift is not None:
            out.append(Component(w, t_par, t_perp, drift))
    if len(chk.errors) > n_errors:
        return None
    total = sum(c.weight for c in out)
    if abs(total - 1.0) > WEIGHT_SUM_TOL:
        chk.error(path, f"weights sum to {total!r}; expected a sum of 1 (the weights split "
                  "the species density)")
        return None
    return tuple(out)


def _component_temperatures(
    chk: Checker, tab: Mapping[str, Any], q: str
) -> tuple[float | None, float | None]:
    limit = LIMITS["species.temperature"]
    if "temperature" in tab:
        if "temperature_par" in tab or "temperature_perp" in tab:
            chk.error(q, "both 'temperature' and 'temperature_par'/'temperature_perp' given; "
                      "expected one or the other")
            return None, None
        t = chk.ranged(tab, "temperature", f"{q}.temperature", limit)
        return t, t
    if "temperature_par" in tab or "temperature_perp" in tab:
        return (
            chk.ranged(tab, "temperature_par", f"{q}.temperature_par", limit),
            chk.ranged(tab, "temperature_perp", f"{q}.temperature_perp", limit),
        )
    chk.missing(f"{q}.temperature", "'temperature', or 'temperature_par' and 'temperature_perp'")
    return None, None


def check_positive(chk: Checker, components: tuple[Component, ...], mass: float,
                   p: str) -> bool:
    """Report (and return False) if the component sum is negative somewhere."""
    where = negative_region(components, mass)
    if where is None:
        return True
    vpar, vperp = where
    chk.error(f"{p}.components", f"the distribution is negative near v_par = {vpar:.4g} m/s, "
              f"v_perp = {vperp:.4g} m/s; expected weights, temperatures and drifts that "
              "keep f >= 0 everywhere (a subtracted Maxwellian must be narrower than what "
              "it is subtracted from, in every direction)")
    return False


def moments(components: tuple[Component, ...], mass: float) -> tuple[float, float, float]:
    """(T∥, T⊥ [eV], mean drift [m/s]) of the whole component species (see `Species`)."""
    v = sum(c.weight * c.drift for c in components)
    t_par = sum(c.weight * (c.temperature_par + mass * (c.drift - v) ** 2 / EV)
                for c in components)
    t_perp = sum(c.weight * c.temperature_perp for c in components)
    return t_par, t_perp, v
