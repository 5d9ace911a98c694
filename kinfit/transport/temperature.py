"""How the transport coefficients change with temperature: the viscosity scaling of the
effective diffusivity and of the film coefficient, and the film's own apparent activation
energy.

A fitted De_ref and kc_ref hold at the reference temperature T_ref of the kinetics. In a liquid
the molecular diffusivity goes as T/mu(T) (Stokes-Einstein; Wilke & Chang 1955), so with
porosity and tortuosity fixed

    De(T) = De_ref (T/T_ref) mu(T_ref)/mu(T),

and the film coefficient of stirred-slurry correlations of the form of Sano, Yamaguchi & Adachi
(1974), Sh = 2 + 0.4 (eps dp^4/nu^3)^(1/4) Sc^(1/3), goes away from Sh = 2 as
kc ~ eps^(1/4) nu^(-5/12) D^(2/3), so at fixed power input (derived)

    kc(T) = kc(T_ref) (D(T)/D(T_ref))^(2/3) (nu(T)/nu(T_ref))^(-5/12).

``temperature_scaling = "viscosity"`` applies these ([pellet] and [film] of a study, with the
solvent from [fluid]); ``"none"`` holds De and kc at their reference values for every run. A
correlation film model (``slurry``, ``sphere``, ``packed_bed``, ``correlation``) evaluates its
own correlation with the liquid's properties at each run's temperature when scaling is on (the
molecular diffusivity then scales as T/mu from T_ref), and at T_ref when it is off.
"""

from __future__ import annotations

from dataclasses import dataclass, replace
from typing import Any

import numpy as np
from numpy.typing import ArrayLike, NDArray

from kinfit.errors import StudyError

__all__ = ["SCALINGS", "TransportScaling", "film_activation_energy", "FILM_EXPONENTS",
           "with_scaled_diffusivity"]

FloatArray = NDArray[np.float64]
R_GAS = 8.314462618
#: accepted values of ``temperature_scaling``
SCALINGS = ("viscosity", "none")

#: (exponent of D, exponent of nu) of kc in the film laws kinfit knows, at their high-Re limit
#: (derived from Sh = kc dp/D with the Kolmogorov Reynolds number eps^(1/3) dp^(4/3)/nu):
#: Sano et al. (1974) Re^(3/4)-type form D^(2/3) nu^(-5/12); Armenante & Kirwan (1989)
#: Re_K^0.52 Sc^(1/3): D^(2/3) nu^(-0.187); Levins & Glastonbury (1972) Re_K^0.62 Sc^0.36:
#: D^0.64 nu^(-0.26); and the stagnant limit Sh = 2: D^1.
FILM_EXPONENTS = {
    "sano": (2.0 / 3.0, -5.0 / 12.0),
    "armenante_kirwan": (2.0 / 3.0, 0.52 * -1.0 + 1.0 / 3.0),
    "levins_glastonbury": (0.64, -0.62 + 0.36),
    "stagnant": (1.0, 0.0),
}


def with_scaled_diffusivity(fluid: Any, reference_temperature: float) -> Any:
    """The fluid with a molecular diffusivity that goes as T/mu(T): a constant diffusivity
    given without its temperature is taken to hold at ``reference_temperature``."""
    if (fluid is not None and fluid.diffusivity_value is not None
            and fluid.diffusivity_temperature is None):
        return replace(fluid, diffusivity_temperature=float(reference_temperature))
    return fluid


@dataclass(frozen=True)
class TransportScaling:
    """Temperature scaling of De and kc for one study.

    Attributes
    ----------
    pellet, film : {"viscosity", "none"}
    reference_temperature : float
        T_ref, K (the kinetics' reference temperature), where De_ref and kc_ref hold.
    fluid : Fluid or None
        The liquid whose viscosity and density set the scaling (needed for "viscosity").
    """

    pellet: str = "none"
    film: str = "none"
    reference_temperature: float = 298.15
    fluid: Any = None

    def __post_init__(self) -> None:
        for where, v in (("[pellet]", self.pellet), ("[film]", self.film)):
            if v not in SCALINGS:
                raise StudyError(f"{where} temperature_scaling = {v!r} is not recognised; use "
                                 f"one of {list(SCALINGS)}")
            if v == "viscosity" and self.fluid is None:
                raise StudyError(f"{where} temperature_scaling = \"viscosity\" needs the liquid: "
                                 "add a [fluid] section with a solvent (e.g. solvent = "
                                 "\"water\") or constant viscosity and density, or set "
                                 "temperature_scaling = \"none\"")

    def diffusivity_ratio(self, T: ArrayLike) -> FloatArray:
        """D(T)/D(T_ref) = (T/T_ref) mu(T_ref)/mu(T) (Stokes-Einstein; Wilke & Chang 1955)."""
        T = np.asarray(T, dtype=float)
        T0 = self.reference_temperature
        return (T / T0) * (self.fluid.viscosity(T0) / self.fluid.viscosity(T))

    def pellet_factor(self, T: ArrayLike) -> FloatArray:
        """De(T)/De_ref (ones when the pellet scaling is "none")."""
        T = np.asarray(T, dtype=float)
        if self.pellet == "none":
            return np.ones(T.shape)
        return self.diffusivity_ratio(T)

    def film_factor(self, T: ArrayLike) -> FloatArray:
        """kc(T)/kc(T_ref) of the agitation law: (D/D_ref)^(2/3) (nu/nu_ref)^(-5/12) (Sano
        et al. 1974 form at fixed power input); ones when the film scaling is "none"."""
        T = np.asarray(T, dtype=float)
        if self.film == "none":
            return np.ones(T.shape)
        nu_ratio = (self.fluid.kinematic_viscosity(T)
                    / self.fluid.kinematic_viscosity(self.reference_temperature))
        return self.diffusivity_ratio(T) ** (2.0 / 3.0) * nu_ratio ** (-5.0 / 12.0)

    def describe(self, film_model: str | None = None) -> dict[str, Any]:
        """Plain description for results and reports (formulas and the liquid)."""
        agitation = film_model in (None, "agitation")
        return {
            "pellet": self.pellet, "film": self.film,
            "reference_temperature": self.reference_temperature,
            "solvent": None if self.fluid is None else self.fluid.name,
            "pellet_formula": ("De(T) = De_ref (T/T_ref) mu(T_ref)/mu(T)"
                               if self.pellet == "viscosity" else "De(T) = De_ref"),
            "film_formula": (
                ("kc(T) = kc(T_ref) (D(T)/D(T_ref))^(2/3) (nu(T)/nu(T_ref))^(-5/12), "
                 "D ~ T/mu" if agitation else
                 "the film correlation with the liquid's properties at each run's "
                 "temperature, D ~ T/mu")
                if self.film == "viscosity" else
                ("kc(T) = kc(T_ref)" if agitation else
                 "the film correlation with the liquid's properties at T_ref")),
        }


def film_activation_energy(fluid: Any, temperatures: ArrayLike) -> dict[str, Any]:
    """The apparent activation energy of a film-controlled rate, -R d ln kc/d(1/T), over the
    given temperatures, from the liquid's viscosity and density.

    A film-controlled rate is kc a_m Cb, so its apparent activation energy is that of kc. The
    central value is the Sano et al. (1974) scaling D^(2/3) nu^(-5/12); the interval spans the
    film laws of :data:`FILM_EXPONENTS` (their exponents differ, so this is the uncertainty of
    the law, not of the liquid's properties).

    Parameters
    ----------
    fluid : Fluid
    temperatures : array_like
        K; at least two distinct values.

    Returns
    -------
    dict
        ``estimate`` and ``interval`` [lo, hi] in J/mol, ``diffusion`` (E of D ~ T/mu),
        ``by_law`` {law: J/mol}, ``temperature_range`` [K, K].
    """
    T = np.unique(np.asarray(temperatures, dtype=float))
    if T.size < 2:
        raise StudyError("the film's apparent activation energy needs runs at two or more "
                         "temperatures")
    x = 1.0 / T
    lnD = np.log(T / fluid.viscosity(T))
    lnnu = np.log(fluid.kinematic_viscosity(T))

    def energy(y: FloatArray) -> float:
        return float(-R_GAS * np.polyfit(x, y, 1)[0])

    by_law = {name: energy(a * lnD + b * lnnu) for name, (a, b) in FILM_EXPONENTS.items()}
    vals = list(by_law.values())
    return {"estimate": by_law["sano"], "interval": [min(vals), max(vals)],
            "diffusion": energy(lnD), "by_law": by_law,
            "temperature_range": [float(T[0]), float(T[-1])]}
