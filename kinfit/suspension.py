"""Whether the catalyst of a slurry is fully suspended: the just-suspended stirrer speed.

Zwietering (1958, Chem. Eng. Sci. 8, 244-253, eq. 1) correlated the speed at which no particle
rests on the vessel floor for more than a second or two:

    N_js = S nu^0.1 dp^0.2 (g drho / rho_L)^0.45 X^0.13 D^-0.85

with N_js in rev/s, nu the liquid's kinematic viscosity (m^2/s), dp the particle diameter (m),
drho = rho_s - rho_L the density difference (kg/m^3), g = 9.80665 m/s^2, X the solids loading
in mass of solid per 100 mass of liquid, D the impeller diameter (m) and S a dimensionless
constant of the vessel and impeller geometry (of order 4 to 12 for common set-ups, from
memory; Zwietering tabulates it per impeller type and clearance).

A porous catalyst particle in a slurry is filled with liquid, so its density in the liquid is
``rho_p + eps_p rho_L`` (``rho_p`` the apparent particle density of the dry particle, ``eps_p``
its porosity; common practice). Below N_js part of the catalyst lies on the floor, the loading
that takes part is unknown and the film coefficient of the agitation law does not apply.

The vessel is described in the study's optional ``[vessel]`` section: ``impeller_diameter``
(a length) and ``suspension_constant`` (Zwietering's S); without both the check is reported as
not assessed.
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass
from typing import Any

from kinfit.study import Study
from kinfit.units import parse_quantity

__all__ = ["G", "zwietering_speed", "SuspensionCheck", "suspension_check"]

#: standard acceleration of gravity, m/s^2 (CGPM 1901, exact)
G = 9.80665


def zwietering_speed(*, kinematic_viscosity: float, particle_diameter: float,
                     density_difference: float, liquid_density: float, solids_percent: float,
                     impeller_diameter: float, s: float) -> float:
    """Just-suspended stirrer speed N_js [rev/s] by Zwietering (1958, eq. 1).

    Parameters
    ----------
    kinematic_viscosity : float
        Liquid kinematic viscosity nu [m^2/s].
    particle_diameter : float
        dp [m].
    density_difference : float
        rho_s - rho_L [kg/m^3], > 0 (a particle lighter than the liquid floats instead).
    liquid_density : float
        rho_L [kg/m^3].
    solids_percent : float
        X: mass of solid per 100 mass of liquid.
    impeller_diameter : float
        D [m].
    s : float
        Zwietering's geometry constant S [-].

    Examples
    --------
    Water-like liquid, 100 um particles 1500 kg/m^3 denser, 1 % solids, a 5 cm impeller, S = 6:

    >>> round(zwietering_speed(kinematic_viscosity=1e-6, particle_diameter=1e-4,
    ...                        density_difference=1500.0, liquid_density=1000.0,
    ...                        solids_percent=1.0, impeller_diameter=0.05, s=6.0), 2)
    10.22
    """
    return float(s * kinematic_viscosity ** 0.1 * particle_diameter ** 0.2
                 * (G * density_difference / liquid_density) ** 0.45
                 * solids_percent ** 0.13 * impeller_diameter ** -0.85)


@dataclass(frozen=True)
class SuspensionCheck:
    """The just-suspended check of one condition.

    Attributes
    ----------
    assessed : bool
        False when the vessel or the liquid is not described well enough.
    n_js : float or None
        Just-suspended speed [rev/s].
    suspended : bool or None
        ``N >= N_js``.
    message : str
        One sentence in the lab's units.
    """

    assessed: bool
    n_js: float | None
    suspended: bool | None
    message: str

    def to_dict(self) -> dict[str, Any]:
        """Plain content for JSON outputs (n_js in rev/s)."""
        return {"assessed": self.assessed, "n_js": self.n_js, "n_js_unit": "1/s",
                "suspended": self.suspended, "method": "Zwietering (1958)",
                "message": self.message}


def _vessel(study: Study) -> Mapping[str, Any]:
    sec = study.raw.get("vessel", {}) if study.raw else {}
    return sec if isinstance(sec, Mapping) else {}


def suspension_check(study: Study, *, temperature: float, stirrer_speed: float,
                     particle_diameter: float, catalyst_loading: float) -> SuspensionCheck:
    """Compare the stirrer speed of one slurry condition with Zwietering's N_js (SI inputs)."""
    if study.kind == "rate":
        return SuspensionCheck(False, None, None, "not a slurry campaign: suspension not "
                               "assessed")
    vessel = _vessel(study)
    missing = [k for k in ("impeller_diameter", "suspension_constant") if k not in vessel]
    if missing:
        return SuspensionCheck(False, None, None, "suspension not assessed: give [vessel] "
                               "impeller_diameter and suspension_constant (Zwietering's S) in "
                               "the study")
    if not study.fluid:
        return SuspensionCheck(False, None, None, "suspension not assessed: the liquid's "
                               "density and viscosity are unknown; give a [fluid] section")
    from kinfit.transport.properties import make_fluid

    fluid = make_fluid(**dict(study.fluid))
    d_imp = parse_quantity(vessel["impeller_diameter"], "length",
                           where=f"{study.path.name} [vessel].impeller_diameter")
    s = float(vessel["suspension_constant"])
    rho_l = float(fluid.density(temperature))
    nu = float(fluid.kinematic_viscosity(temperature))
    eps = float(study.catalyst.get("porosity") or 0.0)
    rho_s = float(study.catalyst["particle_density"]) + eps * rho_l
    drho = rho_s - rho_l
    if drho <= 0:
        return SuspensionCheck(False, None, None, "suspension not assessed: the liquid-filled "
                               "particle is not denser than the liquid")
    x = 100.0 * catalyst_loading / rho_l
    n_js = zwietering_speed(kinematic_viscosity=nu, particle_diameter=particle_diameter,
                            density_difference=drho, liquid_density=rho_l, solids_percent=x,
                            impeller_diameter=float(d_imp), s=s)
    ok = stirrer_speed >= n_js
    text = (f"N {stirrer_speed * 60:.4g} rpm {'is at or above' if ok else 'is below'} the "
            f"just-suspended speed {n_js * 60:.4g} rpm (Zwietering 1958)")
    if not ok:
        text += ("; part of the catalyst rests on the floor, so the loading in play and the "
                 "film coefficient are not those of the fit")
    return SuspensionCheck(True, n_js, ok, text)
