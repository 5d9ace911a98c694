"""The quick criteria calculator (``kinfit criteria``): film and pore diagnosis of one measured
rate, with no fitting.

From an observed rate per catalyst mass, the particle size and density, the bulk concentration,
and (optionally) the effective diffusivity and the film coefficient (given, or from a stirrer
speed through a published slurry Sherwood correlation and the liquid's properties):

- Carberry number Ca = r / (kc a_m Cb) (Carberry 1976), and the surface concentration from the
  steady film, Cs = Cb (1 - Ca) (derived);
- Mears number r rho_p R n / (kc Cb) with the particle density and R = dp/2 (Mears 1971 wrote
  it with the bed density), limit 0.05 R/L for a 5 % rate error;
- Weisz-Prater number Psi_L = r rho_p L^2 / (De Cs) in the L = Vp/Sp normalisation (and the
  radius form Psi_R = Psi_L (R/L)^2; Weisz & Prater 1954), limit where the first-order eta of
  the geometry is 0.95 (:mod:`kinfit.physics.criteria`);
- the generalised Thiele modulus Phi by inverting Psi_L = eta(Phi) Phi^2 2/(n + 1) for the order
  and geometry (for first order Psi = eta Phi^2), and the effectiveness factor eta(Phi);
- the shares of film, pore and reaction resistance and the regime label of the results
  contract (:mod:`kinfit.physics.resistances`; not assessed when kc or De is missing), with the
  thresholds and a verdict.

All inputs and outputs are SI; the command line parses quantities with units.
"""

from __future__ import annotations

import math
from typing import Any

import numpy as np
from scipy import optimize

from kinfit.errors import StudyError
from kinfit.physics.criteria import THRESHOLD_SOURCES, Thresholds
from kinfit.physics.film import SlurryFilm
from kinfit.physics.geometry import GEOMETRIES, characteristic_length, external_area
from kinfit.physics.pellet.effectiveness import eta_power_law
from kinfit.physics.resistances import resistance_shares

__all__ = ['criteria_from_measurement']

_CORRELATIONS = ("sano", "armenante_kirwan", "levins_glastonbury")


def _eta_function(order: float, geometry: str):
    """eta(Phi) of the power law of this order in this geometry (the pellet module's table)."""

    def eta(phi: float) -> float:
        return float(np.asarray(eta_power_law(phi, order, geometry)).ravel()[0])

    return eta


def _invert_weisz_prater(psi_L: float, order: float, eta) -> float:
    """Phi with eta(Phi) Phi^2 2/(n + 1) = Psi_L (a monotone function of Phi)."""
    target = psi_L * (order + 1.0) / 2.0

    def g(log_phi: float) -> float:
        phi = math.exp(log_phi)
        return math.log(eta(phi) * phi**2) - math.log(target)

    guess = math.log(math.sqrt(target)) if target > 0 else -20.0
    lo, hi = min(guess, math.log(target)) - 2.0, max(guess, math.log(target)) + 2.0
    while g(lo) > 0:
        lo -= 5.0
    while g(hi) < 0:
        hi += 5.0
    return math.exp(optimize.brentq(g, lo, hi, xtol=1e-14, rtol=1e-13))


def _positive(name: str, value: Any, unit: str) -> float:
    try:
        v = float(value)
    except (TypeError, ValueError):
        raise StudyError(f"{name} must be a number in {unit}, got {value!r}") from None
    if not (math.isfinite(v) and v > 0):
        raise StudyError(f"{name} must be finite and > 0 {unit}, got {value!r}")
    return v


def _film_from_speed(stirrer_speed: float, particle_diameter: float, *, correlation: str,
                     fluid: Any, power_number: float | None, impeller_diameter: float | None,
                     liquid_volume: float | None, impeller_to_tank_ratio: float | None,
                     temperature: float | None) -> tuple[float, str]:

    if correlation not in _CORRELATIONS:
        raise StudyError(f"correlation '{correlation}' is not recognised; use one of "
                         f"{list(_CORRELATIONS)}")
    if (power_number is None or impeller_diameter is None or liquid_volume is None
            or temperature is None or fluid is None):
        missing = [n for n, v in (("power number", power_number),
                                  ("impeller diameter", impeller_diameter),
                                  ("liquid volume", liquid_volume), ("temperature", temperature),
                                  ("fluid", fluid)) if v is None]
        raise StudyError(f"a film coefficient from the stirrer speed needs the {missing[0]} "
                         f"(missing: {', '.join(missing)}); give them, or give the film "
                         "coefficient directly")
    film = SlurryFilm(fluid=fluid, power_number=power_number, impeller_diameter=impeller_diameter,
                      liquid_volume=liquid_volume, correlation=correlation,
                      impeller_to_tank_ratio=impeller_to_tank_ratio)
    fluid.check_temperature(np.asarray(temperature), where="temperature")
    kc = float(np.asarray(film.kc(stirrer_speed, particle_diameter, temperature, {})).ravel()[0])
    sh = float(np.asarray(film.sherwood(stirrer_speed, particle_diameter, temperature)).ravel()[0])
    return kc, (f"film coefficient from the {correlation} correlation at "
                f"{stirrer_speed * 60:.4g} rpm (Sherwood number {sh:.4g})")


def criteria_from_measurement(
    *,
    rate: float,
    particle_diameter: float,
    particle_density: float,
    bulk_concentration: float,
    effective_diffusivity: float | None = None,
    film_coefficient: float | None = None,
    stirrer_speed: float | None = None,
    correlation: str = "sano",
    fluid: Any = None,
    power_number: float | None = None,
    impeller_diameter: float | None = None,
    liquid_volume: float | None = None,
    impeller_to_tank_ratio: float | None = None,
    temperature: float | None = None,
    order: float = 1.0,
    geometry: str = "sphere",
    thresholds: Thresholds | None = None,
) -> dict[str, Any]:
    """Transport criteria of one measured rate.

    Parameters
    ----------
    rate : float
        Observed rate per catalyst mass, mol/(kg s).
    particle_diameter : float
        m (slab: thickness).
    particle_density : float
        kg/m^3 (pellet, not bed, density).
    bulk_concentration : float
        mol/m^3.
    effective_diffusivity : float, optional
        m^2/s; without it the pore criteria are not computed.
    film_coefficient : float, optional
        kc, m/s. Alternatively ``stirrer_speed`` with ``correlation``, the tank data and
        ``fluid`` at ``temperature``.
    stirrer_speed : float, optional
        Revolutions per second.
    fluid : Fluid, optional
        The liquid (:func:`kinfit.physics.properties.make_fluid`), with the reactant's
        molecular diffusivity.
    temperature : float, optional
        K, for the liquid's properties.
    correlation : {"sano", "armenante_kirwan", "levins_glastonbury"}
    power_number, impeller_diameter, liquid_volume, impeller_to_tank_ratio : float, optional
        Tank data (-, m, m^3, -) for the correlation.
    order : float
        Reaction order n in [0, 3] used by the Mears and Carberry limits and the modulus.
    geometry : {"sphere", "cylinder", "slab"}
    thresholds : Thresholds, optional

    Returns
    -------
    dict
        ``weisz_prater`` (Psi_L), ``weisz_prater_radius`` (Psi_R), ``mears``, ``carberry``,
        ``thiele_modulus``, ``effectiveness_factor``, ``surface_concentration`` (mol/m^3),
        ``film_coefficient`` (m/s), ``shares`` {film, pore, reaction}, ``regime``,
        ``passes``, ``intrinsic``, ``verdict``, ``thresholds``, ``notes``, ``sources``,
        ``inputs`` and ``units``. Criteria that the inputs cannot give are None.

    Raises
    ------
    StudyError
        Missing or non-physical inputs, or a rate the film could not carry (Ca >= 1).
    """

    r = _positive("the observed rate", rate, "mol/(kg*s)")
    dp = _positive("the particle diameter", particle_diameter, "m")
    rho = _positive("the particle density", particle_density, "kg/m^3")
    Cb = _positive("the bulk concentration", bulk_concentration, "mol/m^3")
    try:
        n = float(order)
    except (TypeError, ValueError):
        raise StudyError(f"the order must be a number >= 0, got {order!r}") from None
    if not (math.isfinite(n) and 0.0 <= n <= 3.0):
        raise StudyError(f"the order must be a number in [0, 3] (the range of the pellet "
                         f"solution), got {order!r}")
    if geometry not in GEOMETRIES:
        raise StudyError(f"geometry '{geometry}' is not recognised; use one of "
                         f"{list(GEOMETRIES)}")
    De = None if effective_diffusivity is None else _positive(
        "the effective diffusivity", effective_diffusivity, "m^2/s")
    thresholds = thresholds or Thresholds()
    notes: list[str] = []
    L = float(characteristic_length(geometry, dp))
    a_m = float(external_area(geometry, dp, rho))
    R = dp / 2.0

    if film_coefficient is not None and stirrer_speed is not None:
        raise StudyError("give either the film coefficient or the stirrer speed (with a "
                         "correlation), not both")
    kc: float | None = None
    if film_coefficient is not None:
        kc = _positive("the film coefficient", film_coefficient, "m/s")
        notes.append("film coefficient as given")
    elif stirrer_speed is not None:
        N = _positive("the stirrer speed", stirrer_speed, "rev/s")
        kc, text = _film_from_speed(N, dp, correlation=correlation, fluid=fluid,
                                    power_number=power_number,
                                    impeller_diameter=impeller_diameter,
                                    liquid_volume=liquid_volume,
                                    impeller_to_tank_ratio=impeller_to_tank_ratio,
                                    temperature=temperature)
        notes.append(text + "; the correlation presumes fully suspended particles")
    else:
        notes.append("no film coefficient or stirrer speed: Carberry and Mears not computed "
                     "(the surface concentration is taken equal to the bulk)")

    carberry = mears = None
    Cs = Cb
    if kc is not None:
        carberry = r / (kc * a_m * Cb)
        if carberry >= 1.0:
            raise StudyError(
                f"the observed rate {r:.4g} mol/(kg*s) exceeds what the film can carry, "
                f"kc a_m Cb = {kc * a_m * Cb:.4g} mol/(kg*s) (Carberry number {carberry:.3g} "
                ">= 1); check the units of the rate, the film coefficient and the concentration"
            )
        Cs = Cb * (1.0 - carberry)
        mears = r * rho * R * n / (kc * Cb)

    wp = wp_R = phi = None
    eta: float | None = None
    if De is not None:
        wp = r * rho * L**2 / (De * Cs)
        wp_R = wp * (R / L) ** 2
        eta_of = _eta_function(n, geometry)
        phi = _invert_weisz_prater(wp, n, eta_of)
        eta = eta_of(phi)
        notes.append("Thiele modulus from the Weisz-Prater number, Psi_L = eta Phi^2 2/(n + 1), "
                     "with eta from the pellet solution for this order and geometry")
    else:
        notes.append("no effective diffusivity: Weisz-Prater, Thiele modulus and eta not "
                     "computed (pore resistance not assessed)")

    # resistances in series per kg, linearised at the surface (results contract); a
    # resistance not assessed leaves every share and the label unknown
    eta_v = 1.0 if eta is None else eta
    sh = resistance_shares(intrinsic_rate=r / eta_v, surface_concentration=Cs,
                           effectiveness=eta, conductance=None if kc is None else kc * a_m)
    labelled = sh.at()
    shares, regime, controlling = (labelled["shares"], labelled["regime"],
                                   labelled["controlling"])
    resistances = {k: (None if np.isnan(v) else float(v)) for k, v in sh.resistances.items()}
    if regime is None:
        missing = [w for w, v in (("film", kc), ("pore", eta)) if v is None]
        notes.append(f"{' and '.join(missing)} resistance not assessed: the resistance shares "
                     "and the regime label are not assessed")

    limits = thresholds.to_dict(geometry, n)
    if n == 0:
        notes.append("zero order: a film concentration drop does not change the rate while "
                     "Cs > 0, so the Carberry and Mears limits do not bind")
    passes: dict[str, bool | None] = {
        "carberry": None if carberry is None else bool(carberry < limits["carberry"]),
        "mears": None if mears is None else bool(mears < limits["mears"] or n == 0),
        "weisz_prater": None if wp is None else bool(wp < limits["weisz_prater"]),
        "effectiveness_factor": None if eta is None else bool(
            eta >= limits["effectiveness_factor"]),
    }
    failed = [k for k, v in passes.items() if v is False]
    unknown = [k for k, v in passes.items() if v is None]
    if failed:
        intrinsic: bool | None = False
        why = []
        if passes["carberry"] is False or passes["mears"] is False:
            why.append(f"film resistance (Carberry {carberry:.3g} against {limits['carberry']:.3g})")
        if passes["weisz_prater"] is False or passes["effectiveness_factor"] is False:
            why.append(f"pore diffusion (Weisz-Prater Psi_R {wp_R:.3g} against "
                       f"{limits['weisz_prater_radius']:.3g}, eta {eta:.3g})")
        verdict = ("not intrinsic: " + "; ".join(why) + (
            f" (regime label '{regime}' by the resistance shares)" if regime is not None
            else " (regime not assessed)"))
    elif unknown:
        intrinsic = None
        verdict = ("no transport limit by the criteria that could be computed; not assessed: "
                   + ", ".join(unknown))
    else:
        intrinsic = True
        verdict = ("intrinsic: film and pore resistance negligible by every criterion "
                   f"(regime {regime}, reaction share {shares['reaction']:.3f})")
    return {
        "inputs": {"rate": r, "particle_diameter": dp, "particle_density": rho,
                   "bulk_concentration": Cb, "effective_diffusivity": De,
                   "film_coefficient": film_coefficient, "stirrer_speed": stirrer_speed,
                   "correlation": correlation if stirrer_speed is not None else None,
                   "temperature": temperature, "order": n, "geometry": geometry},
        "characteristic_length": L, "external_area": a_m, "film_coefficient": kc,
        "surface_concentration": Cs, "carberry": carberry, "mears": mears,
        "weisz_prater": wp, "weisz_prater_radius": wp_R, "thiele_modulus": phi,
        "effectiveness_factor": eta, "shares": shares, "resistances": resistances,
        "regime": regime, "controlling": controlling, "passes": passes,
        "intrinsic": intrinsic, "verdict": verdict, "thresholds": limits, "notes": notes,
        "sources": dict(THRESHOLD_SOURCES),
        "units": {"rate": "mol/(kg*s)", "particle_diameter": "m",
                  "particle_density": "kg/m^3", "bulk_concentration": "mol/m^3",
                  "surface_concentration": "mol/m^3", "effective_diffusivity": "m^2/s",
                  "film_coefficient": "m/s", "stirrer_speed": "1/s (revolutions per second)",
                  "temperature": "K", "characteristic_length": "m", "external_area": "m^2/kg",
                  "criteria": "dimensionless"},
    }


# ----------------------------------------------------------------------------- command line


