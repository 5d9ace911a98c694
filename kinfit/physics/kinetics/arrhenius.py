"""Temperature dependence of rate and equilibrium constants at a reference temperature (Arrhenius, van 't Hoff)."""

from __future__ import annotations

import numpy as np
from numpy.typing import ArrayLike, NDArray
from scipy.constants import R as GAS_CONSTANT

from kinfit.errors import StudyError

__all__ = ["GAS_CONSTANT", "arrhenius", "van_t_hoff", "pre_exponential_factor", "decorrelating_reference_temperature"]
FloatArray = NDArray[np.float64]


def arrhenius(
    k_ref: ArrayLike,
    activation_energy: ArrayLike,
    T: ArrayLike,
    reference_temperature: float,
) -> FloatArray:
    r"""Rate constant at temperature T from its value at a reference temperature.

    .. math:: k(T) = k_\mathrm{ref}\exp\left[-\frac{E_a}{R}\left(\frac1T-\frac1{T_\mathrm{ref}}\right)\right]

    Parameters
    ----------
    k_ref : array_like
        Rate constant at ``reference_temperature`` (any unit), e.g. shape (m, 1).
    activation_energy : array_like
        E_a [J/mol], broadcastable against ``k_ref``.
    T : array_like
        Temperature [K], e.g. shape (n,) or (m, n).
    reference_temperature : float
        T_ref [K].

    Returns
    -------
    ndarray
        k(T), broadcast shape of the inputs.

    References
    ----------
    Schwaab, M. & Pinto, J. C. (2007). Optimum reference temperature for reparameterization of
    the Arrhenius equation. Part 1. Chem. Eng. Sci. 62, 2750-2764.

    Examples
    --------
    >>> float(arrhenius(2.0, 50e3, 350.0, 350.0))
    2.0
    """
    T = np.asarray(T, dtype=float)
    return np.asarray(k_ref, dtype=float) * np.exp(
        -np.asarray(activation_energy, dtype=float)
        / GAS_CONSTANT
        * (1.0 / T - 1.0 / reference_temperature)
    )


def van_t_hoff(
    K_ref: ArrayLike,
    enthalpy: ArrayLike,
    T: ArrayLike,
    reference_temperature: float,
) -> FloatArray:
    r"""Equilibrium or adsorption constant at temperature T (van 't Hoff, integrated at constant
    enthalpy).

    .. math:: K(T) = K_\mathrm{ref}\exp\left[-\frac{\Delta H}{R}\left(\frac1T-\frac1{T_\mathrm{ref}}\right)\right]

    Parameters
    ----------
    K_ref : array_like
        Constant at ``reference_temperature`` (any unit).
    enthalpy : array_like
        Reaction or adsorption enthalpy Delta H [J/mol] (negative for exothermic adsorption, so
        that K falls with temperature).
    T : array_like
        Temperature [K].
    reference_temperature : float
        T_ref [K].

    Returns
    -------
    ndarray
        K(T), broadcast shape of the inputs.

    Examples
    --------
    >>> float(van_t_hoff(3.0, -40e3, 320.0, 320.0))
    3.0
    """
    return arrhenius(K_ref, enthalpy, T, reference_temperature)


def pre_exponential_factor(
    k_ref: ArrayLike, activation_energy: ArrayLike, reference_temperature: float
) -> FloatArray:
    r"""Classical pre-exponential factor A with :math:`k = A\exp(-E_a/RT)` equal to
    :func:`arrhenius` at every T: :math:`A = k_\mathrm{ref}\exp(E_a/(R T_\mathrm{ref}))`.

    Examples
    --------
    >>> k = float(pre_exponential_factor(1.0, 0.0, 300.0))
    >>> k
    1.0
    """
    return np.asarray(k_ref, dtype=float) * np.exp(
        np.asarray(activation_energy, dtype=float) / (GAS_CONSTANT * reference_temperature)
    )


def decorrelating_reference_temperature(
    T: ArrayLike, *, weights: ArrayLike | None = None
) -> float:
    r"""Reference temperature that makes ln k_ref and E_a uncorrelated for ln k data.

    With sensitivities s_i of the observations to ln k and weights w_i, the (ln k_ref, E) element
    of J'WJ vanishes for :math:`1/T_\mathrm{ref} = \sum w_i s_i^2 T_i^{-1} / \sum w_i s_i^2`.
    ``weights`` are the products w_i s_i^2 (all ones for equally weighted ln k data, which gives
    the harmonic mean of T).

    Parameters
    ----------
    T : array_like
        Temperatures [K] of the observations, shape (n,).
    weights : array_like, optional
        Non-negative weights w_i s_i^2, shape (n,).

    Returns
    -------
    float
        T_ref [K].

    References
    ----------
    Schwaab, M. & Pinto, J. C. (2007), Chem. Eng. Sci. 62, 2750-2764 (the result); the weighted
    form is derived in Schwaab & Pinto 2007.

    Examples
    --------
    >>> round(decorrelating_reference_temperature([300.0, 310, 320, 330, 340, 350]), 4)
    324.1007
    """
    T = np.asarray(T, dtype=float).reshape(-1)
    w = np.ones_like(T) if weights is None else np.asarray(weights, dtype=float).reshape(-1)
    if T.size == 0 or w.shape != T.shape or np.any(T <= 0) or np.any(w < 0) or w.sum() <= 0:
        raise StudyError(
            "decorrelating_reference_temperature: give one or more temperatures > 0 K and as many "
            "non-negative weights (not all zero)"
        )
    return float(w.sum() / np.sum(w / T))
