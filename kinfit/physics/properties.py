"""Physical properties of the liquid: solvent viscosity and density, the molecular diffusivity of
the reacting solute (Wilke & Chang 1955), and the effective diffusivity inside a pellet.

All inputs and outputs are SI: temperature in K, viscosity in Pa s, density in kg/m^3, molar mass
in kg/mol, molar volume in m^3/mol, diffusivity in m^2/s. Every function is vectorised over
temperature arrays of any shape.

Named solvents carry published correlations:

- water: viscosity from the two formulas printed in the CRC Handbook of Chemistry and Physics
  (Hardy & Cottington 1949 below 20 degC; the 20-100 degC formula of the same table; both from
  memory), density from Kell (1975). Both are checked against the IAPWS formulations in the test
  suite (viscosity within 1 % from 273.16 to 373 K).
- organic solvents: viscosity from the PPDS equation 9 and density from the PPDS equation 10 of
  the VDI Heat Atlas (2nd ed., 2010, chapter D3.1), with the coefficients as tabulated in the
  open-source ``chemicals`` library. The tests compare them with the independent DIPPR tables of
  Perry's Handbook (8th ed.) and with Dutt & Prasad's correlation.
"""

from __future__ import annotations

import math
from collections.abc import Mapping
from dataclasses import dataclass

import numpy as np
from numpy.typing import ArrayLike, NDArray

from kinfit.errors import ModelError, StudyError

__all__ = [
    "wilke_chang",
    "effective_diffusivity",
    "Fluid",
    "SOLVENTS",
    "make_fluid",
]

FloatArray = NDArray[np.float64]


# ----------------------------------------------------------------------------------------------
# Correlations (small frozen callables, so that a Fluid stays a plain frozen dataclass)
# ----------------------------------------------------------------------------------------------


@dataclass(frozen=True)
class _Constant:
    """A temperature-independent value."""

    value: float

    def __call__(self, T: ArrayLike) -> FloatArray:
        return np.full(np.shape(T), self.value, dtype=float)


@dataclass(frozen=True)
class _WaterViscosity:
    """Viscosity of liquid water at about 1 atm [Pa s], 273.15-373.15 K.

    Below 20 degC (Hardy & Cottington 1949, J. Res. NBS 42, 573, as printed in the CRC Handbook;
    from memory), viscosity in poise:
    log10 mu = 1301 / (998.333 + 8.1855 (t - 20) + 0.00585 (t - 20)^2) - 3.30233.
    From 20 to 100 degC (the CRC Handbook's companion formula; from memory), with
    mu(20 degC) = 1.002 mPa s: log10(mu / mu20) = (1.3272 (20 - t) - 0.001053 (t - 20)^2) / (t + 105).
    The two meet at 20 degC to 6e-5 relative.
    """

    def __call__(self, T: ArrayLike) -> FloatArray:
        t = np.asarray(T, dtype=float) - 273.15
        d = t - 20.0
        cold = 0.1 * 10.0 ** (1301.0 / (998.333 + 8.1855 * d + 0.00585 * d**2) - 3.30233)
        warm = 1.002e-3 * 10.0 ** ((-1.3272 * d - 0.001053 * d**2) / (t + 105.0))
        return np.where(t < 20.0, cold, warm)


@dataclass(frozen=True)
class _WaterDensity:
    """Density of air-free liquid water at 1 atm [kg/m^3], 0-100 degC (Kell 1975,
    J. Chem. Eng. Data 20, 97-105, eq. 16; coefficients from memory, checked against IAPWS-95)."""

    def __call__(self, T: ArrayLike) -> FloatArray:
        t = np.asarray(T, dtype=float) - 273.15
        num = (
            999.83952
            + 16.945176 * t
            - 7.9870401e-3 * t**2
            - 46.170461e-6 * t**3
            + 105.56302e-9 * t**4
            - 280.54253e-12 * t**5
        )
        return num / (1.0 + 16.879850e-3 * t)


@dataclass(frozen=True)
class _PPDS9:
    """Saturated-liquid viscosity [Pa s], PPDS equation 9 (VDI Heat Atlas 2010, D3.1):
    mu = E exp(A X^(1/3) + B X^(4/3)), X = (C - T) / (T - D)."""

    A: float
    B: float
    C: float
    D: float
    E: float

    def __call__(self, T: ArrayLike) -> FloatArray:
        T = np.asarray(T, dtype=float)
        x = (self.C - T) / (T - self.D)
        cbrt = np.cbrt(x)
        return self.E * np.exp(self.A * cbrt + self.B * cbrt * x)


@dataclass(frozen=True)
class _PPDS10:
    """Saturated-liquid density [kg/m^3], PPDS equation 10 (VDI Heat Atlas 2010, D3.1):
    rho = rho_c + A tau^0.35 + B tau^(2/3) + C tau + D tau^(4/3), tau = 1 - T/Tc."""

    Tc: float
    rho_c: float
    A: float
    B: float
    C: float
    D: float

    def __call__(self, T: ArrayLike) -> FloatArray:
        tau = np.clip(1.0 - np.asarray(T, dtype=float) / self.Tc, 0.0, None)
        c = np.cbrt(tau)
        return self.rho_c + self.A * tau**0.35 + self.B * c * c + tau * (self.C + self.D * c)


@dataclass(frozen=True)
class _Solvent:
    molar_mass: float  # kg/mol
    association_factor: float  # Wilke-Chang phi
    viscosity: object
    density: object
    temperature_range: tuple[float, float]  # K, where the correlations were cross-checked


#: Named solvents. Molar masses from standard atomic weights (from memory). Wilke-Chang
#: association factors: water 2.6 (Wilke & Chang 1955, as quoted by Hayduk & Laudie 1974),
#: methanol 1.9, ethanol 1.5, unassociated solvents 1.0 (Wilke & Chang 1955; from memory).
#: Temperature ranges are those where the correlation agrees with an independent source
#: (tests/test_properties.py).
SOLVENTS: Mapping[str, _Solvent] = {
    "water": _Solvent(18.015e-3, 2.6, _WaterViscosity(), _WaterDensity(), (273.15, 373.15)),
    "methanol": _Solvent(
        32.042e-3,
        1.9,
        _PPDS9(3.79226, 0.17755, 546.563, 87.845, 7.91e-06),
        _PPDS10(513.38, 282.0, 164.7611, 2257.7678, -3545.6923, 1929.7376),
        (248.0, 333.0),
    ),
    "ethanol": _Solvent(
        46.069e-3,
        1.5,
        _PPDS9(6.16832, -0.00125, 740.323, 90.778, 3.8e-07),
        _PPDS10(513.9, 276.0, 748.617, -412.3622, 776.4394, -436.6757),
        (248.0, 348.0),
    ),
    "benzene": _Solvent(
        78.114e-3,
        1.0,
        _PPDS9(2.35743, 2.43122, 760.674, -267.449, 1.031e-05),
        _PPDS10(562.01, 306.0, 502.4341, 531.598, -663.9865, 469.5949),
        (278.68, 463.0),
    ),
    "toluene": _Solvent(
        92.141e-3,
        1.0,
        _PPDS9(2.9548, 3e-05, 1048.107, 137.144, 3.97e-06),
        _PPDS10(591.75, 292.0, 439.5835, 839.1558, -1234.8445, 797.8741),
        (253.0, 383.0),
    ),
    "acetone": _Solvent(
        58.080e-3,
        1.0,
        _PPDS9(1.65496, 0.5733, 610.687, 11.477, 2.915e-05),
        _PPDS10(508.1, 274.0, 547.382, 208.742, -203.7599, 253.9936),
        (190.0, 329.44),
    ),
    "cyclohexane": _Solvent(
        84.162e-3,
        1.0,
        _PPDS9(0.7569, 2.02779, 787.882, -117.742, 3.221e-05),
        _PPDS10(553.6, 273.0, 373.9221, 848.7461, -1261.1653, 815.8631),
        (279.69, 353.0),
    ),
}


# ----------------------------------------------------------------------------------------------
# Diffusivities
# ----------------------------------------------------------------------------------------------


def wilke_chang(
    T: ArrayLike,
    viscosity: ArrayLike,
    solvent_molar_mass: float,
    solute_molar_volume: float,
    association: float,
) -> FloatArray:
    r"""Molecular diffusivity of a dilute solute in a liquid solvent (Wilke & Chang 1955).

    Parameters
    ----------
    T : array_like
        Temperature [K], any shape.
    viscosity : array_like
        Solvent dynamic viscosity [Pa s], broadcastable against ``T``.
    solvent_molar_mass : float
        Solvent molar mass [kg/mol].
    solute_molar_volume : float
        Solute molar volume at its normal boiling point [m^3/mol].
    association : float
        Association factor phi of the solvent [-] (water 2.6, methanol 1.9, ethanol 1.5,
        unassociated solvents 1.0).

    Returns
    -------
    ndarray
        Diffusivity at infinite dilution [m^2/s], shape of ``broadcast(T, viscosity)``.

    Notes
    -----
    In the units of the 1955 paper (cm^2/s, g/mol, cP, cm^3/mol):

    .. math:: D_{AB} = 7.4\times10^{-8}\,\frac{(\phi M_B)^{1/2}\,T}{\mu_B\,V_A^{0.6}}

    References
    ----------
    Wilke, C. R. & Chang, P. (1955). Correlation of diffusion coefficients in dilute solutions.
    AIChE J. 1, 264-270.

    Examples
    --------
    >>> round(float(wilke_chang(298.15, 0.890e-3, 18.015e-3, 100e-6, 2.6)) * 1e4, 9)
    1.0705e-05
    """
    for label, value in (
        ("solvent_molar_mass", solvent_molar_mass),
        ("solute_molar_volume", solute_molar_volume),
        ("association", association),
    ):
        if not (math.isfinite(value) and value > 0):
            raise ModelError(f"wilke_chang: {label} must be a finite number > 0, got {value!r}")
    mu_cP = np.asarray(viscosity, dtype=float) * 1e3
    M_g = solvent_molar_mass * 1e3
    V_cm3 = solute_molar_volume * 1e6
    D_cm2 = 7.4e-8 * math.sqrt(association * M_g) * np.asarray(T, dtype=float)
    D_cm2 = D_cm2 / (mu_cP * V_cm3**0.6)
    return D_cm2 * 1e-4


def effective_diffusivity(
    porosity: ArrayLike, molecular_diffusivity: ArrayLike, tortuosity: ArrayLike
) -> FloatArray:
    r"""Effective diffusivity in a liquid-filled pellet, :math:`D_e = \varepsilon_p D_m / \tau`.

    Parameters
    ----------
    porosity : array_like
        Pellet porosity eps_p [-], in (0, 1].
    molecular_diffusivity : array_like
        Molecular (or pore) diffusivity D_m [m^2/s], > 0.
    tortuosity : array_like
        Tortuosity factor tau [-], >= 1. Any shapes that broadcast together, e.g. a fitted
        tortuosity of shape (m, 1) against D_m of shape (n,).

    Returns
    -------
    ndarray
        D_e [m^2/s], broadcast shape of the inputs.

    Raises
    ------
    ModelError
        If porosity is outside (0, 1], D_m <= 0 or tortuosity < 1.

    References
    ----------
    Satterfield, C. N. (1970). Mass Transfer in Heterogeneous Catalysis. MIT Press (from memory).

    Examples
    --------
    >>> float(effective_diffusivity(0.5, 1e-9, 4.0))
    1.25e-10
    """
    eps = np.asarray(porosity, dtype=float)
    Dm = np.asarray(molecular_diffusivity, dtype=float)
    tau = np.asarray(tortuosity, dtype=float)
    if not np.all((eps > 0) & (eps <= 1)):
        raise ModelError(
            f"porosity must lie in (0, 1], got {_first_bad(eps, (eps > 0) & (eps <= 1))}"
        )
    if not np.all(Dm > 0):
        raise ModelError(f"molecular diffusivity must be > 0 m^2/s, got {_first_bad(Dm, Dm > 0)}")
    if not np.all(tau >= 1):
        raise ModelError(f"parameter 'tortuosity' must be >= 1, got {_first_bad(tau, tau >= 1)}")
    return eps * Dm / tau


def _first_bad(values: FloatArray, ok: NDArray[np.bool_]) -> float:
    return float(np.broadcast_to(values, ok.shape)[~ok].flat[0])


# ----------------------------------------------------------------------------------------------
# Fluid
# ----------------------------------------------------------------------------------------------


@dataclass(frozen=True)
class Fluid:
    r"""The liquid phase of a slurry: solvent viscosity and density, and the solute's molecular
    diffusivity, each as a function of temperature.

    Build one with :func:`make_fluid`; the fields hold the chosen correlations.

    Attributes
    ----------
    name : str
        Solvent name (``"custom"`` when every property was given as a constant).
    viscosity_law, density_law : callable
        ``T -> Pa s`` and ``T -> kg/m^3``.
    molar_mass : float or None
        Solvent molar mass [kg/mol] (Wilke-Chang).
    association_factor : float or None
        Wilke-Chang association factor [-].
    solute_molar_volume : float or None
        Solute molar volume at its normal boiling point [m^3/mol] (Wilke-Chang route).
    diffusivity_value : float or None
        Given molecular diffusivity [m^2/s] (constant route).
    diffusivity_temperature : float or None
        Temperature [K] at which ``diffusivity_value`` holds; when given, D scales as
        T/mu(T) (Stokes-Einstein, common practice).
    temperature_range : tuple of float
        Range [K] in which the correlations are trusted (see :meth:`check_temperature`).
    """

    name: str
    viscosity_law: object
    density_law: object
    molar_mass: float | None = None
    association_factor: float | None = None
    solute_molar_volume: float | None = None
    diffusivity_value: float | None = None
    diffusivity_temperature: float | None = None
    temperature_range: tuple[float, float] = (0.0, math.inf)

    def viscosity(self, T: ArrayLike) -> FloatArray:
        """Dynamic viscosity [Pa s] at temperature ``T`` [K] (any shape)."""
        return self.viscosity_law(T)  # type: ignore[operator]

    def density(self, T: ArrayLike) -> FloatArray:
        """Density [kg/m^3] at temperature ``T`` [K] (any shape)."""
        return self.density_law(T)  # type: ignore[operator]

    def kinematic_viscosity(self, T: ArrayLike) -> FloatArray:
        """Kinematic viscosity nu = mu / rho [m^2/s]."""
        return self.viscosity(T) / self.density(T)

    @property
    def has_diffusivity(self) -> bool:
        """Whether a molecular diffusivity can be computed (given value or Wilke-Chang data)."""
        return self.diffusivity_value is not None or self.solute_molar_volume is not None

    def diffusivity(self, T: ArrayLike) -> FloatArray:
        """Molecular diffusivity of the solute [m^2/s] at temperature ``T`` [K].

        Raises
        ------
        StudyError
            If neither a diffusivity nor a solute molar volume was given.
        """
        T = np.asarray(T, dtype=float)
        if self.diffusivity_value is not None:
            if self.diffusivity_temperature is None:
                return np.full(T.shape, self.diffusivity_value)
            T0 = self.diffusivity_temperature
            return self.diffusivity_value * (T / T0) * (self.viscosity(T0) / self.viscosity(T))
        if self.solute_molar_volume is None:
            raise StudyError(
                f"fluid '{self.name}': no molecular diffusivity; give 'diffusivity' (m^2/s) or "
                "'solute_molar_volume' (molar volume at the normal boiling point) for Wilke-Chang"
            )
        return wilke_chang(
            T,
            self.viscosity(T),
            self.molar_mass,  # type: ignore[arg-type]
            self.solute_molar_volume,
            self.association_factor,  # type: ignore[arg-type]
        )

    def schmidt_number(self, T: ArrayLike) -> FloatArray:
        """Schmidt number Sc = nu / D_m [-]."""
        return self.kinematic_viscosity(T) / self.diffusivity(T)

    def check_temperature(self, T: ArrayLike, *, where: str = "") -> None:
        """Raise StudyError if any temperature lies outside the correlations' range.

        Call it once when a study is built (not inside a fit): the property functions
        themselves do not check, so that they stay cheap.

        Parameters
        ----------
        T : array_like
            Temperatures [K].
        where : str
            Context for the message (for example a run id or a column).
        """
        T = np.asarray(T, dtype=float)
        lo, hi = self.temperature_range
        bad = ~((T >= lo) & (T <= hi))
        if np.any(bad):
            found = float(T[bad].flat[0])
            prefix = f"{where}: " if where else ""
            raise StudyError(
                f"{prefix}temperature {found:.2f} K is outside the range of the '{self.name}' "
                f"property correlations ({lo:.2f}-{hi:.2f} K); give constant 'viscosity', "
                "'density' and 'diffusivity' values for this solvent instead"
            )


def _positive(label: str, value: float | None) -> float | None:
    if value is None:
        return None
    try:
        v = float(value)
    except (TypeError, ValueError):
        raise StudyError(f"fluid option '{label}' must be a number, got {value!r}") from None
    if not (math.isfinite(v) and v > 0):
        raise StudyError(f"fluid option '{label}' must be a finite number > 0, got {value!r}")
    return v


def make_fluid(
    solvent: str | None = "water",
    *,
    viscosity: float | None = None,
    density: float | None = None,
    molar_mass: float | None = None,
    association_factor: float | None = None,
    solute_molar_volume: float | None = None,
    diffusivity: float | None = None,
    diffusivity_temperature: float | None = None,
) -> Fluid:
    """Build a :class:`Fluid` from a named solvent and/or constant values.

    Parameters
    ----------
    solvent : str or None
        One of :data:`SOLVENTS` (matched after case-folding), or None for a custom liquid whose
        ``viscosity`` and ``density`` must then be given.
    viscosity : float, optional
        Constant dynamic viscosity [Pa s]; replaces the solvent's correlation.
    density : float, optional
        Constant density [kg/m^3]; replaces the solvent's correlation.
    molar_mass, association_factor : float, optional
        Solvent molar mass [kg/mol] and Wilke-Chang association factor [-]; default to the named
        solvent's values.
    solute_molar_volume : float, optional
        Solute molar volume at its normal boiling point [m^3/mol]: diffusivity by Wilke-Chang.
    diffusivity : float, optional
        Molecular diffusivity of the solute [m^2/s]; takes precedence over Wilke-Chang.
    diffusivity_temperature : float, optional
        Temperature [K] at which ``diffusivity`` was measured; D then scales as T/mu(T).

    Returns
    -------
    Fluid

    Raises
    ------
    StudyError
        Unknown solvent (the message lists the valid names), a custom liquid without viscosity or
        density, a non-positive value, or Wilke-Chang data missing for a custom solvent.

    Examples
    --------
    >>> water = make_fluid("water", solute_molar_volume=100e-6)
    >>> round(float(water.viscosity(298.15)) * 1e3, 3)
    0.89
    """
    viscosity = _positive("viscosity", viscosity)
    density = _positive("density", density)
    molar_mass = _positive("molar_mass", molar_mass)
    association_factor = _positive("association_factor", association_factor)
    solute_molar_volume = _positive("solute_molar_volume", solute_molar_volume)
    diffusivity = _positive("diffusivity", diffusivity)
    diffusivity_temperature = _positive("diffusivity_temperature", diffusivity_temperature)

    if solvent is None:
        if viscosity is None or density is None:
            raise StudyError(
                "fluid: a custom liquid (no solvent name) needs constant 'viscosity' (Pa s) and "
                "'density' (kg/m^3); give both, or name one of the solvents "
                f"{sorted(SOLVENTS)}"
            )
        name = "custom"
        mu_law: object = _Constant(viscosity)
        rho_law: object = _Constant(density)
        t_range = (0.0, math.inf)
    else:
        key = str(solvent).strip().casefold()
        if key not in SOLVENTS:
            raise StudyError(
                f"fluid: solvent '{solvent}' is not known; use one of {sorted(SOLVENTS)}, or give "
                "constant 'viscosity', 'density' and 'diffusivity' values without a solvent name"
            )
        data = SOLVENTS[key]
        name = key
        mu_law = data.viscosity if viscosity is None else _Constant(viscosity)
        rho_law = data.density if density is None else _Constant(density)
        molar_mass = data.molar_mass if molar_mass is None else molar_mass
        association_factor = (
            data.association_factor if association_factor is None else association_factor
        )
        t_range = (0.0, math.inf) if (viscosity and density) else data.temperature_range

    if (
        diffusivity is None
        and solute_molar_volume is not None
        and (molar_mass is None or association_factor is None)
    ):
        raise StudyError(
            "fluid: Wilke-Chang needs the solvent's 'molar_mass' (kg/mol) and "
            "'association_factor' (-); give both, or give 'diffusivity' directly"
        )
    if diffusivity_temperature is not None and diffusivity is None:
        raise StudyError(
            "fluid: 'diffusivity_temperature' was given without 'diffusivity'; give the "
            "diffusivity measured at that temperature, or drop the option"
        )
    return Fluid(
        name=name,
        viscosity_law=mu_law,
        density_law=rho_law,
        molar_mass=molar_mass,
        association_factor=association_factor,
        solute_molar_volume=solute_molar_volume,
        diffusivity_value=diffusivity,
        diffusivity_temperature=diffusivity_temperature,
        temperature_range=t_range,
    )
