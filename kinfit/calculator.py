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
  the geometry is 0.95 (:mod:`kinfit.criteria`);
- the generalised Thiele modulus Phi by inverting Psi_L = eta(Phi) Phi^2 2/(n + 1) for the order
  and geometry (for first order Psi = eta Phi^2), and the effectiveness factor eta(Phi);
- the shares of film, pore and reaction resistance and the regime label of the results
  contract (:mod:`kinfit.resistances`; not assessed when kc or De is missing), with the
  thresholds and a verdict.

All inputs and outputs are SI; the command line parses quantities with units.
"""

from __future__ import annotations

import argparse
import math
from typing import Any

import numpy as np
from scipy import optimize

from kinfit.criteria import THRESHOLD_SOURCES, Thresholds
from kinfit.errors import StudyError
from kinfit.resistances import resistance_shares

__all__ = ["criteria_from_measurement", "add_criteria_arguments", "run_criteria_command",
           "format_criteria"]

_GEOMETRIES = ("sphere", "cylinder", "slab")
_CORRELATIONS = ("sano", "armenante_kirwan", "levins_glastonbury")


def _eta_function(order: float, geometry: str):
    """eta(Phi) of the power law of this order in this geometry (the pellet module's table)."""
    from kinfit.transport.pellet import eta_power_law

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
    from kinfit.transport.film import SlurryFilm

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
        The liquid (:func:`kinfit.transport.properties.make_fluid`), with the reactant's
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
    from kinfit.transport.film import characteristic_length, external_area

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
    if geometry not in _GEOMETRIES:
        raise StudyError(f"geometry '{geometry}' is not recognised; use one of "
                         f"{list(_GEOMETRIES)}")
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


def _num(v: float | None, fmt: str = ".4g") -> str:
    return "n/a" if v is None else format(v, fmt)


def format_criteria(res: dict[str, Any]) -> str:
    """The calculator's result as console text.

    Parameters
    ----------
    res : dict
        The result of :func:`criteria_from_measurement`.
    """
    i, t, p = res["inputs"], res["thresholds"], res["passes"]

    def mark(key: str) -> str:
        return {True: "pass", False: "FAIL", None: "-"}[p[key]]

    lines = [f"transport criteria of one measurement ({i['geometry']}, order {i['order']:g})",
             f"  rate {i['rate']:.4g} mol/(kg*s), dp {i['particle_diameter'] * 1e6:.4g} um, "
             f"rho_p {i['particle_density']:.4g} kg/m^3, Cb {i['bulk_concentration']:.4g} "
             f"mol/m^3",
             f"  film coefficient {_num(res['film_coefficient'])} m/s, surface concentration "
             f"{res['surface_concentration']:.4g} mol/m^3", ""]
    rows = [
        ("Carberry  r/(kc a_m Cb)", res["carberry"], t["carberry"], mark("carberry")),
        ("Mears  r rho_p R n/(kc Cb)", res["mears"], t["mears"], mark("mears")),
        ("Weisz-Prater Psi_L = r rho_p L^2/(De Cs)", res["weisz_prater"], t["weisz_prater"],
         mark("weisz_prater")),
        ("Weisz-Prater Psi_R (R = dp/2)", res["weisz_prater_radius"], t["weisz_prater_radius"],
         mark("weisz_prater")),
        ("effectiveness factor eta", res["effectiveness_factor"], t["effectiveness_factor"],
         mark("effectiveness_factor")),
    ]
    for name, value, limit, ok in rows:
        rel = ">=" if name.startswith("effectiveness") else "<"
        lines.append(f"  {name:<42}{_num(value):>11}   limit {rel} {limit:.3g}   {ok}")
    lines.append(f"  {'Thiele modulus Phi (generalised, L = Vp/Sp)':<42}"
                 f"{_num(res['thiele_modulus']):>11}")
    s = res["shares"]
    if res["regime"] is None:
        lines.append("  resistance shares: not assessed (" + ", ".join(
            f"{k} resistance not assessed" for k in ("film", "pore")
            if res["resistances"][k] is None) + "); regime not assessed")
    else:
        lines.append(f"  resistance shares: film {100 * s['film']:.1f} %, pore "
                     f"{100 * s['pore']:.1f} %, reaction {100 * s['reaction']:.1f} % -> regime "
                     f"'{res['regime']}' (controlling: {res['controlling']})")
    lines.append("")
    lines.append(f"  verdict: {res['verdict']}")
    for n in res["notes"]:
        lines.append(f"  note: {n}")
    return "\n".join(lines)


# ----------------------------------------------------------------------------- command line
def add_criteria_arguments(parser: argparse.ArgumentParser) -> None:
    """Options of ``kinfit criteria`` (quantities as strings with units).

    Parameters
    ----------
    parser : argparse.ArgumentParser
        The subcommand's parser.
    """
    q = parser.add_argument
    q("--rate", required=True, metavar="Q",
      help="observed rate per catalyst mass, e.g. '0.02 mol/(kg*s)'")
    q("--diameter", required=True, metavar="Q", help="particle diameter, e.g. '75 um'")
    q("--density", required=True, metavar="Q", help="particle density, e.g. '1500 kg/m^3'")
    q("--concentration", required=True, metavar="Q",
      help="bulk concentration of the reactant, e.g. '0.5 mol/L'")
    q("--diffusivity", metavar="Q", help="effective diffusivity in the pellet, e.g. '1e-9 m^2/s'")
    q("--kc", metavar="Q", help="film coefficient, e.g. '1e-4 m/s' (or give --speed)")
    q("--speed", metavar="Q", help="stirrer speed, e.g. '600 rpm' (film from a correlation)")
    q("--correlation", default="sano", choices=_CORRELATIONS,
      help="slurry Sherwood correlation for --speed (default sano)")
    q("--power-number", type=float, metavar="NP", help="impeller power number (e.g. 5)")
    q("--impeller-diameter", metavar="Q", help="impeller diameter, e.g. '5 cm'")
    q("--liquid-volume", metavar="Q", help="liquid volume, e.g. '1 L'")
    q("--impeller-to-tank", type=float, metavar="RATIO",
      help="impeller over tank diameter (levins_glastonbury only)")
    q("--temperature", metavar="Q", help="temperature for the liquid's properties, e.g. "
                                         "'50 degC'")
    q("--solvent", default="water", help="solvent for viscosity and density (default water)")
    q("--viscosity", metavar="Q", help="liquid viscosity, e.g. '0.9 mPa*s' (overrides solvent)")
    q("--liquid-density", metavar="Q", help="liquid density, e.g. '997 kg/m^3'")
    q("--molecular-diffusivity", metavar="Q",
      help="molecular diffusivity of the reactant in the liquid, e.g. '2e-9 m^2/s'")
    q("--solute-molar-volume", metavar="Q",
      help="reactant molar volume at its boiling point for Wilke-Chang, e.g. '100 cm^3/mol'")
    q("--order", type=float, default=1.0, help="reaction order (default 1)")
    q("--geometry", default="sphere", choices=_GEOMETRIES, help="particle shape (default sphere)")
    q("--json", type=str, default=None, metavar="PATH", help="also write the result as JSON")


def run_criteria_command(args: argparse.Namespace) -> int:
    """Run ``kinfit criteria``: print the criteria and the verdict (and write JSON).

    Parameters
    ----------
    args : argparse.Namespace
        Parsed by a parser set up with :func:`add_criteria_arguments`.

    Returns
    -------
    int
        0.

    Raises
    ------
    StudyError
        Unreadable quantities, missing or non-physical inputs (exit code 2 at the command
        line).
    """
    from kinfit.outputs import write_json_atomic
    from kinfit.units import parse_quantity

    def qty(text: str | None, kind: str, option: str) -> float | None:
        return None if text is None else parse_quantity(text, kind, where=f"--{option}")

    def required(text: str, kind: str, option: str) -> float:
        return parse_quantity(text, kind, where=f"--{option}")

    fluid = None
    temperature = qty(args.temperature, "temperature", "temperature")
    if args.speed is not None:
        from kinfit.transport.properties import make_fluid

        fluid = make_fluid(
            None if args.solvent in ("", "none") else args.solvent,
            viscosity=qty(args.viscosity, "viscosity", "viscosity"),
            density=qty(args.liquid_density, "density", "liquid-density"),
            diffusivity=qty(args.molecular_diffusivity, "diffusivity", "molecular-diffusivity"),
            solute_molar_volume=qty(args.solute_molar_volume, "molar_volume",
                                    "solute-molar-volume"),
        )
        if not fluid.has_diffusivity:
            raise StudyError("--speed needs the reactant's molecular diffusivity in the liquid: "
                             "give --molecular-diffusivity or --solute-molar-volume")
    res = criteria_from_measurement(
        rate=required(args.rate, "rate_per_mass", "rate"),
        particle_diameter=required(args.diameter, "length", "diameter"),
        particle_density=required(args.density, "density", "density"),
        bulk_concentration=required(args.concentration, "concentration", "concentration"),
        effective_diffusivity=qty(args.diffusivity, "diffusivity", "diffusivity"),
        film_coefficient=qty(args.kc, "velocity", "kc"),
        stirrer_speed=qty(args.speed, "speed", "speed"),
        correlation=args.correlation, fluid=fluid, power_number=args.power_number,
        impeller_diameter=qty(args.impeller_diameter, "length", "impeller-diameter"),
        liquid_volume=qty(args.liquid_volume, "volume", "liquid-volume"),
        impeller_to_tank_ratio=args.impeller_to_tank, temperature=temperature,
        order=args.order, geometry=args.geometry,
    )
    print(format_criteria(res))
    if args.json:
        path = write_json_atomic(args.json, res)
        print(f"\nwrote {path}")
    return 0
