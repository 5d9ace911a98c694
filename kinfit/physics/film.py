"""External (liquid-solid film) mass-transfer coefficients.

A film model gives k_c [m/s] for each observation from the stirrer speed N [rev/s], the particle
diameter dp [m], the temperature T [K] and (for the agitation law) fitted parameters. Families:

- ``agitation``: an empirical power law in N and dp with fittable exponents;
- ``slurry``: Sherwood correlations for particles suspended in a stirred tank, based on the
  mean specific power input (Sano, Yamaguchi & Adachi 1974; Armenante & Kirwan 1989; Levins &
  Glastonbury 1972);
- ``sphere``: a single sphere at a given slip velocity (Frossling 1938; Ranz & Marshall 1952);
- ``packed_bed``: particles in a fixed bed at a superficial velocity (Wakao & Funazkri 1978);
- ``correlation``: any of the published correlations above chosen by name;
- ``none``: no film resistance (k_c = inf).

Shapes broadcast like the rate laws: N, dp, T of shape (n,), parameters of shape (m, 1), result
(m, n). The film rate per kg of catalyst is k_c a_m (C_b - C_s), with a_m from
:func:`kinfit.physics.geometry.external_area`.
"""

from __future__ import annotations

import inspect
from abc import ABC, abstractmethod
from collections.abc import Mapping
from typing import Any, ClassVar

import numpy as np
from numpy.typing import ArrayLike, NDArray

from kinfit.errors import StudyError
from kinfit.physics.families import (
    DeclaredParameters,
    Interval,
    check_keyword_options,
    check_limits,
    positive_option,
)
from kinfit.physics.properties import Fluid
from kinfit.physics.sherwood import (
    kolmogorov_reynolds,
    sherwood_armenante_kirwan,
    sherwood_frossling,
    sherwood_levins_glastonbury,
    sherwood_ranz_marshall,
    sherwood_sano,
    sherwood_wakao_funazkri,
    specific_power,
)

__all__ = ['FilmModel', 'AgitationFilm', 'SlurryFilm', 'SphereFilm', 'PackedBedFilm', 'CorrelationFilm', 'NoFilm', 'FILM_MODELS', 'CORRELATIONS', 'make_film_model']

FloatArray = NDArray[np.float64]
Params = Mapping[str, ArrayLike]

# ----------------------------------------------------------------------------------------------
# Published Sherwood correlations (pure functions)
# ----------------------------------------------------------------------------------------------


# ----------------------------------------------------------------------------------------------
# Film models
# ----------------------------------------------------------------------------------------------


def _positive_option(model: str, option: str, value: Any, unit: str) -> float:
    return positive_option(f"[film] model '{model}'", option, value, unit)


def _fluid_option(model: str, fluid: Any) -> Fluid:
    if not isinstance(fluid, Fluid):
        raise StudyError(
            f"[film] model '{model}': option 'fluid' must be a Fluid (see "
            f"kinfit.physics.properties.make_fluid), got {type(fluid).__name__}"
        )
    if not fluid.has_diffusivity:
        raise StudyError(
            f"[film] model '{model}': the fluid '{fluid.name}' has no molecular diffusivity; "
            "give 'diffusivity' or 'solute_molar_volume' for it"
        )
    return fluid


def _broadcast(value: ArrayLike, *arrays: ArrayLike) -> FloatArray:
    shape = np.broadcast_shapes(*(np.shape(a) for a in (value, *arrays)))
    return np.broadcast_to(np.asarray(value, dtype=float), shape).copy()


class FilmModel(DeclaredParameters, ABC):
    """Liquid-solid mass-transfer coefficient k_c(N, dp, T; p) [m/s].

    Subclasses set :attr:`name` and implement :meth:`kc`; those with fitted parameters declare
    them once in the class tables ``_units`` (name -> SI unit, in column order) and ``_limits``
    (name -> accepted :class:`~kinfit.physics.kinetics.base.Interval`).
    """

    #: Registry name used by the study file's ``[film] model``.
    name: ClassVar[str]

    @abstractmethod
    def kc(self, N: ArrayLike, dp: ArrayLike, T: ArrayLike, p: Params) -> FloatArray:
        """Film mass-transfer coefficient [m/s].

        Parameters
        ----------
        N : array_like
            Stirrer speed [rev/s], e.g. shape (n,).
        dp : array_like
            Particle diameter [m], e.g. shape (n,).
        T : array_like
            Temperature [K], e.g. shape (n,).
        p : mapping of str to array_like
            Parameter values, each e.g. shape (m, 1); may be empty for models without
            parameters.

        Returns
        -------
        ndarray
            k_c, broadcast shape of all inputs (e.g. (m, n)).
        """

    def check(self, p: Params) -> None:
        """Reject parameter values the physics cannot accept.

        Raises
        ------
        StudyError
            If a parameter is missing.
        ModelError
            Naming the parameter, the accepted range and the value found.
        """
        check_limits(f"[film] model '{self.name}'", self._take(p), self.parameter_limits)

    def _take(self, p: Params) -> dict[str, FloatArray]:
        try:
            return {n: np.asarray(p[n], dtype=float) for n in self.parameter_names}
        except KeyError as exc:
            raise StudyError(
                f"[film] model '{self.name}': parameter {exc.args[0]!r} has no value; it needs "
                f"{list(self.parameter_names)} (add a [parameters.{exc.args[0]}] table)"
            ) from None

    def __repr__(self) -> str:
        return f"{type(self).__name__}()"


class AgitationFilm(FilmModel):
    r"""Empirical agitation law :math:`k_c = k_{c,\mathrm{ref}} (N/N_\mathrm{ref})^a (d_p/d_{p,\mathrm{ref}})^{-b}`.

    Parameters
    ----------
    reference_speed : float
        N_ref [rev/s].
    reference_diameter : float
        dp_ref [m].

    Notes
    -----
    Parameters: ``kc_ref`` [m/s] > 0; ``agitation_exponent`` a [-] in [0, 3];
    ``size_exponent`` b [-] in [-1, 3]. Sherwood correlations for slurries give a of about
    0.3-0.75 and b between 0 (large Re) and 1 (Sh -> 2) (Ranz & Marshall 1952; Sano, Yamaguchi & Adachi 1974; common practice); the accepted
    ranges are wider so that a fit can explore.

    Examples
    --------
    >>> film = AgitationFilm(reference_speed=10.0, reference_diameter=50e-6)
    >>> p = {"kc_ref": 1e-4, "agitation_exponent": 0.5, "size_exponent": 1.0}
    >>> float(film.kc(40.0, 100e-6, 300.0, p))
    0.0001
    """

    name = "agitation"
    _units = {"kc_ref": "m/s", "agitation_exponent": "-", "size_exponent": "-"}
    _limits = {
        "kc_ref": Interval(0.0, lower_closed=False, unit="m/s"),
        "agitation_exponent": Interval(0.0, 3.0),
        "size_exponent": Interval(-1.0, 3.0),
    }

    def __init__(self, *, reference_speed: float, reference_diameter: float) -> None:
        self.reference_speed = _positive_option(
            self.name, "reference_speed", reference_speed, "rev/s"
        )
        self.reference_diameter = _positive_option(
            self.name, "reference_diameter", reference_diameter, "m"
        )

    def kc(self, N, dp, T, p):
        v = self._take(p)
        N = np.asarray(N, dtype=float)
        dp = np.asarray(dp, dtype=float)
        kc = (
            v["kc_ref"]
            * (N / self.reference_speed) ** v["agitation_exponent"]
            * (dp / self.reference_diameter) ** (-v["size_exponent"])
        )
        return _broadcast(kc, T)

    def __repr__(self) -> str:
        return (
            f"AgitationFilm(reference_speed={self.reference_speed!r}, "
            f"reference_diameter={self.reference_diameter!r})"
        )


#: Correlations for particles suspended in a stirred tank.
SLURRY_CORRELATIONS = ("sano", "armenante_kirwan", "levins_glastonbury")
#: Correlations for a single sphere at a slip velocity.
SPHERE_CORRELATIONS = ("frossling", "ranz_marshall")


class SlurryFilm(FilmModel):
    r"""Stirred-tank slurry: Sherwood number from the mean specific power input.

    :math:`\varepsilon = N_p N^3 D^5 / V`; then Sano, Yamaguchi & Adachi (1974) by default,
    :math:`Sh = [2 + 0.4 (\varepsilon d_p^4/\nu^3)^{1/4} Sc^{1/3}]/\phi_c`, or Armenante &
    Kirwan (1989) or Levins & Glastonbury (1972); k_c = Sh D_m / dp.

    Parameters
    ----------
    fluid : Fluid
        Liquid properties (viscosity, density, molecular diffusivity of the solute).
    power_number : float
        Impeller power number N_p [-].
    impeller_diameter : float
        D [m].
    liquid_volume : float
        V [m^3].
    correlation : {'sano', 'armenante_kirwan', 'levins_glastonbury'}, default 'sano'
    shape_factor : float, default 1
        Carman shape factor phi_c (Sano only).
    impeller_to_tank_ratio : float, optional
        D/T [-], needed by Levins & Glastonbury.

    Notes
    -----
    The correlations presume the particles are fully suspended (above the just-suspended speed
    of Zwietering 1958).
    """

    name = "slurry"

    def __init__(
        self,
        *,
        fluid: Fluid,
        power_number: float,
        impeller_diameter: float,
        liquid_volume: float,
        correlation: str = "sano",
        shape_factor: float = 1.0,
        impeller_to_tank_ratio: float | None = None,
    ) -> None:
        self.fluid = _fluid_option(self.name, fluid)
        self.power_number = _positive_option(self.name, "power_number", power_number, "")
        self.impeller_diameter = _positive_option(
            self.name, "impeller_diameter", impeller_diameter, "m"
        )
        self.liquid_volume = _positive_option(self.name, "liquid_volume", liquid_volume, "m^3")
        if correlation not in SLURRY_CORRELATIONS:
            raise StudyError(
                f"[film] model '{self.name}': correlation '{correlation}' is not recognised; "
                f"use one of {list(SLURRY_CORRELATIONS)}"
            )
        self.correlation = correlation
        self.shape_factor = _positive_option(self.name, "shape_factor", shape_factor, "")
        if correlation == "levins_glastonbury":
            if impeller_to_tank_ratio is None:
                raise StudyError(
                    f"[film] model '{self.name}': correlation 'levins_glastonbury' needs option "
                    "'impeller_to_tank_ratio' (impeller over tank diameter, e.g. 0.33)"
                )
            impeller_to_tank_ratio = _positive_option(
                self.name, "impeller_to_tank_ratio", impeller_to_tank_ratio, ""
            )
        self.impeller_to_tank_ratio = impeller_to_tank_ratio

    def sherwood(self, N: ArrayLike, dp: ArrayLike, T: ArrayLike) -> FloatArray:
        """Sherwood number k_c dp / D_m [-], broadcast shape of N, dp, T."""
        dp = np.asarray(dp, dtype=float)
        eps = specific_power(
            N,
            power_number=self.power_number,
            impeller_diameter=self.impeller_diameter,
            liquid_volume=self.liquid_volume,
        )
        nu = self.fluid.kinematic_viscosity(T)
        Sc = nu / self.fluid.diffusivity(T)
        if self.correlation == "sano":
            return sherwood_sano(eps, dp, nu, Sc, shape_factor=self.shape_factor)
        Re_K = kolmogorov_reynolds(eps, dp, nu)
        if self.correlation == "armenante_kirwan":
            return sherwood_armenante_kirwan(Re_K, Sc)
        return sherwood_levins_glastonbury(Re_K, Sc, self.impeller_to_tank_ratio)  # type: ignore[arg-type]

    def kc(self, N, dp, T, p):
        dp = np.asarray(dp, dtype=float)
        return _broadcast(self.sherwood(N, dp, T) * self.fluid.diffusivity(T) / dp, N, T)

    def __repr__(self) -> str:
        return (
            f"SlurryFilm(correlation={self.correlation!r}, power_number={self.power_number!r}, "
            f"impeller_diameter={self.impeller_diameter!r}, liquid_volume={self.liquid_volume!r},"
            f" fluid={self.fluid.name!r})"
        )


class SphereFilm(FilmModel):
    """Single sphere at a slip velocity u: Re = u dp / nu; Frossling (1938) or Ranz & Marshall
    (1952); k_c = Sh D_m / dp. The stirrer speed is not used.

    Parameters
    ----------
    fluid : Fluid
    slip_velocity : float
        Particle-liquid slip velocity u [m/s].
    correlation : {'ranz_marshall', 'frossling'}, default 'ranz_marshall'
    """

    name = "sphere"

    def __init__(
        self, *, fluid: Fluid, slip_velocity: float, correlation: str = "ranz_marshall"
    ) -> None:
        self.fluid = _fluid_option(self.name, fluid)
        self.slip_velocity = _positive_option(self.name, "slip_velocity", slip_velocity, "m/s")
        if correlation not in SPHERE_CORRELATIONS:
            raise StudyError(
                f"[film] model '{self.name}': correlation '{correlation}' is not recognised; "
                f"use one of {list(SPHERE_CORRELATIONS)}"
            )
        self.correlation = correlation

    def sherwood(self, dp: ArrayLike, T: ArrayLike) -> FloatArray:
        """Sherwood number [-], broadcast shape of dp and T."""
        nu = self.fluid.kinematic_viscosity(T)
        Re = self.slip_velocity * np.asarray(dp, dtype=float) / nu
        Sc = nu / self.fluid.diffusivity(T)
        if self.correlation == "frossling":
            return sherwood_frossling(Re, Sc)
        return sherwood_ranz_marshall(Re, Sc)

    def kc(self, N, dp, T, p):
        dp = np.asarray(dp, dtype=float)
        return _broadcast(self.sherwood(dp, T) * self.fluid.diffusivity(T) / dp, N)

    def __repr__(self) -> str:
        return (
            f"SphereFilm(correlation={self.correlation!r}, slip_velocity={self.slip_velocity!r},"
            f" fluid={self.fluid.name!r})"
        )


class PackedBedFilm(FilmModel):
    """Fixed bed at a superficial velocity u: Re = u dp / nu, Wakao & Funazkri (1978)
    Sh = 2 + 1.1 Sc^(1/3) Re^0.6; k_c = Sh D_m / dp. The stirrer speed is not used.

    Parameters
    ----------
    fluid : Fluid
    superficial_velocity : float
        u [m/s] (volumetric flow over the empty bed cross-section).
    """

    name = "packed_bed"

    def __init__(self, *, fluid: Fluid, superficial_velocity: float) -> None:
        self.fluid = _fluid_option(self.name, fluid)
        self.superficial_velocity = _positive_option(
            self.name, "superficial_velocity", superficial_velocity, "m/s"
        )

    def sherwood(self, dp: ArrayLike, T: ArrayLike) -> FloatArray:
        """Sherwood number [-], broadcast shape of dp and T."""
        nu = self.fluid.kinematic_viscosity(T)
        Re = self.superficial_velocity * np.asarray(dp, dtype=float) / nu
        return sherwood_wakao_funazkri(Re, nu / self.fluid.diffusivity(T))

    def kc(self, N, dp, T, p):
        dp = np.asarray(dp, dtype=float)
        return _broadcast(self.sherwood(dp, T) * self.fluid.diffusivity(T) / dp, N)

    def __repr__(self) -> str:
        return (
            f"PackedBedFilm(superficial_velocity={self.superficial_velocity!r}, "
            f"fluid={self.fluid.name!r})"
        )


#: Published correlations by name, and the film model family each belongs to.
CORRELATIONS: Mapping[str, str] = {
    **dict.fromkeys(SLURRY_CORRELATIONS, "slurry"),
    **dict.fromkeys(SPHERE_CORRELATIONS, "sphere"),
    "wakao_funazkri": "packed_bed",
}


class CorrelationFilm(FilmModel):
    """A published Sherwood correlation chosen by name (the study file's ``model =
    "correlation"``); builds and delegates to :class:`SlurryFilm`, :class:`SphereFilm` or
    :class:`PackedBedFilm`.

    Parameters
    ----------
    correlation : str
        One of :data:`CORRELATIONS`.
    **options
        The options of the family the correlation belongs to (e.g. ``fluid``,
        ``power_number``...).
    """

    name = "correlation"

    def __init__(self, *, correlation: str, **options: Any) -> None:
        family = CORRELATIONS.get(correlation)
        if family is None:
            raise StudyError(
                f"[film] model 'correlation': correlation '{correlation}' is not recognised; "
                f"use one of {sorted(CORRELATIONS)}"
            )
        if family != "packed_bed":
            options["correlation"] = correlation
        self.correlation = correlation
        self.model = make_film_model(family, **options)

    def kc(self, N, dp, T, p):
        return self.model.kc(N, dp, T, p)

    def __repr__(self) -> str:
        return f"CorrelationFilm({self.model!r})"


class NoFilm(FilmModel):
    """No external resistance: k_c = inf (so C_s = C_b).

    Examples
    --------
    >>> NoFilm().kc([1.0, 2.0], 50e-6, 300.0, {})
    array([inf, inf])
    """

    name = "none"

    def __init__(self) -> None:
        """No options."""

    def kc(self, N, dp, T, p):
        return _broadcast(np.inf, N, dp, T)


#: Film-model families by the name the study file uses.
FILM_MODELS: dict[str, type[FilmModel]] = {
    cls.name: cls
    for cls in (AgitationFilm, SlurryFilm, SphereFilm, PackedBedFilm, CorrelationFilm, NoFilm)
}


def make_film_model(name: str, **options: Any) -> FilmModel:
    """Build a film model by registry name.

    Parameters
    ----------
    name : str
        One of :data:`FILM_MODELS`.
    **options
        Keyword options of the family's class.

    Returns
    -------
    FilmModel

    Raises
    ------
    StudyError
        Unknown name (the message lists the valid ones), an unknown or missing option, or a bad
        option value.

    Examples
    --------
    >>> make_film_model("agitation", reference_speed=10.0, reference_diameter=5e-5).parameter_names
    ('kc_ref', 'agitation_exponent', 'size_exponent')
    """
    cls = FILM_MODELS.get(name)
    if cls is None:
        raise StudyError(
            f"[film] model '{name}' is not recognised; use one of {sorted(FILM_MODELS)}"
        )
    params = inspect.signature(cls.__init__).parameters
    if not any(prm.kind is inspect.Parameter.VAR_KEYWORD for prm in params.values()):
        check_keyword_options(cls, options, f"[film] model '{name}'")
    elif "correlation" not in options:
        raise StudyError(
            f"[film] model '{name}': option 'correlation' must be given; use one of "
            f"{sorted(CORRELATIONS)}"
        )
    return cls(**options)
