"""Published Sherwood correlations for the liquid-solid film (pure functions of dimensionless groups)."""

from __future__ import annotations

import numpy as np
from numpy.typing import ArrayLike, NDArray

FloatArray = NDArray[np.float64]

__all__ = ['specific_power', 'kolmogorov_reynolds', 'sherwood_sano', 'sherwood_armenante_kirwan', 'sherwood_levins_glastonbury', 'sherwood_frossling', 'sherwood_ranz_marshall', 'sherwood_wakao_funazkri']


def specific_power(
    N: ArrayLike, *, power_number: float, impeller_diameter: float, liquid_volume: float
) -> FloatArray:
    r"""Mean specific power input of a stirred tank, eps = N_p N^3 D^5 / V [W/kg].

    From the power number :math:`N_p = P/(\rho N^3 D^5)` and :math:`\varepsilon = P/(\rho V)`.

    Parameters
    ----------
    N : array_like
        Stirrer speed [rev/s].
    power_number : float
        Turbulent power number N_p [-] (about 5 for a Rushton turbine, common practice).
    impeller_diameter : float
        D [m].
    liquid_volume : float
        V [m^3].

    Examples
    --------
    >>> eps = specific_power(10.0, power_number=5, impeller_diameter=0.05, liquid_volume=1e-3)
    >>> round(float(eps), 10)
    1.5625
    """
    N = np.asarray(N, dtype=float)
    return power_number * N**3 * impeller_diameter**5 / liquid_volume


def kolmogorov_reynolds(eps: ArrayLike, dp: ArrayLike, nu: ArrayLike) -> FloatArray:
    """Particle Reynolds number on the Kolmogorov velocity scale, Re_K = eps^(1/3) dp^(4/3) / nu.

    Parameters
    ----------
    eps : array_like
        Specific power input [W/kg].
    dp : array_like
        Particle diameter [m].
    nu : array_like
        Kinematic viscosity [m^2/s].
    """
    return np.cbrt(np.asarray(eps, dtype=float)) * np.asarray(dp, dtype=float) ** (4.0 / 3.0) / nu


def sherwood_sano(
    eps: ArrayLike, dp: ArrayLike, nu: ArrayLike, Sc: ArrayLike, *, shape_factor: float = 1.0
) -> FloatArray:
    r"""Sano, Yamaguchi & Adachi (1974): :math:`Sh\,\phi_c = 2 + 0.4 (\varepsilon d_p^4/\nu^3)^{1/4} Sc^{1/3}`.

    ``shape_factor`` is Carman's phi_c (1 for spheres). J. Chem. Eng. Japan 7, 255-261
    (form from memory).
    """
    dp = np.asarray(dp, dtype=float)
    group = (np.asarray(eps, dtype=float) * dp**4 / np.asarray(nu, dtype=float) ** 3) ** 0.25
    return (2.0 + 0.4 * group * np.cbrt(np.asarray(Sc, dtype=float))) / shape_factor


def sherwood_armenante_kirwan(Re_K: ArrayLike, Sc: ArrayLike) -> FloatArray:
    """Armenante & Kirwan (1989), microparticles: Sh = 2 + 0.52 Re_K^0.52 Sc^(1/3).

    Chem. Eng. Sci. 44, 2781-2796 (form from memory).
    """
    return 2.0 + 0.52 * np.asarray(Re_K, dtype=float) ** 0.52 * np.cbrt(Sc)


def sherwood_levins_glastonbury(
    Re_K: ArrayLike, Sc: ArrayLike, impeller_to_tank_ratio: float
) -> FloatArray:
    """Levins & Glastonbury (1972): Sh = 2 + 0.47 Re_K^0.62 Sc^0.36 (D/T)^0.17.

    Trans. IChemE 50, 132-146 (form from memory).
    """
    Re_K = np.asarray(Re_K, dtype=float)
    return 2.0 + 0.47 * Re_K**0.62 * np.asarray(Sc, dtype=float) ** 0.36 * (
        impeller_to_tank_ratio**0.17
    )


def sherwood_frossling(Re: ArrayLike, Sc: ArrayLike) -> FloatArray:
    """Frossling (1938), single sphere: Sh = 2 + 0.552 Re^(1/2) Sc^(1/3)."""
    return 2.0 + 0.552 * np.sqrt(np.asarray(Re, dtype=float)) * np.cbrt(Sc)


def sherwood_ranz_marshall(Re: ArrayLike, Sc: ArrayLike) -> FloatArray:
    """Ranz & Marshall (1952), single sphere: Sh = 2 + 0.6 Re^(1/2) Sc^(1/3)."""
    return 2.0 + 0.6 * np.sqrt(np.asarray(Re, dtype=float)) * np.cbrt(Sc)


def sherwood_wakao_funazkri(Re: ArrayLike, Sc: ArrayLike) -> FloatArray:
    """Wakao & Funazkri (1978), packed beds: Sh = 2 + 1.1 Sc^(1/3) Re^0.6 (3 < Re < 1e4).

    Re is based on the superficial velocity and the particle diameter. Chem. Eng. Sci. 33,
    1375-1384.
    """
    return 2.0 + 1.1 * np.cbrt(Sc) * np.asarray(Re, dtype=float) ** 0.6
