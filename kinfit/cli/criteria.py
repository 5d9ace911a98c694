"""kinfit criteria: transport criteria for one measurement, printed."""

from __future__ import annotations

import argparse
from typing import Any

from kinfit.analysis.calculator import _CORRELATIONS, criteria_from_measurement
from kinfit.core.files import write_json_atomic
from kinfit.core.units import parse_quantity
from kinfit.errors import StudyError
from kinfit.physics.geometry import GEOMETRIES
from kinfit.physics.properties import make_fluid

__all__ = ["add_arguments", "run"]


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


def add_arguments(parser: argparse.ArgumentParser) -> None:
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
    q("--geometry", default="sphere", choices=GEOMETRIES, help="particle shape (default sphere)")
    q("--json", type=str, default=None, metavar="PATH", help="also write the result as JSON")


def run(args: argparse.Namespace) -> int:
    """Run ``kinfit criteria``: print the criteria and the verdict (and write JSON).

    Parameters
    ----------
    args : argparse.Namespace
        Parsed by a parser set up with :func:`add_arguments`.

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

    def qty(text: str | None, kind: str, option: str) -> float | None:
        return None if text is None else parse_quantity(text, kind, where=f"--{option}")

    def required(text: str, kind: str, option: str) -> float:
        return parse_quantity(text, kind, where=f"--{option}")

    fluid = None
    temperature = qty(args.temperature, "temperature", "temperature")
    if args.speed is not None:

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
