"""The Langmuir-Hinshelwood law r = k K C/(1 + K C)^m."""

from __future__ import annotations

import numpy as np

from kinfit.errors import StudyError
from kinfit.physics.families import Interval
from kinfit.physics.kinetics.base import (
    _ARRHENIUS_LIMITS,
    _ARRHENIUS_UNITS,
    RateLaw,
    _k_and_K,
    _option_positive,
)

__all__ = ["LangmuirHinshelwood"]


class LangmuirHinshelwood(RateLaw):
    r"""Langmuir-Hinshelwood rate :math:`r = k(T) K(T) C / (1 + K(T) C)^m`, m = 1 or 2.

    k(T) by :func:`arrhenius` [mol/(kg s)]; K(T) by :func:`van_t_hoff` [m^3/mol]. The rate is
    first order (k K C) at low C and tends to k (m = 1) or peaks at C = 1/K (m = 2). For C <= 0
    the rate is 0.

    Parameters
    ----------
    reference_temperature : float
        T_ref [K] of ``k_ref`` and ``adsorption_constant``.
    m : int, default 1
        Power of the denominator: 1 (single-site) or 2 (dual-site surface reaction).

    Notes
    -----
    Parameters: ``k_ref`` [mol/(kg s)] > 0, ``activation_energy`` [J/mol] >= 0,
    ``adsorption_constant`` [m^3/mol] > 0, ``adsorption_enthalpy`` [J/mol] (finite, usually < 0).

    Examples
    --------
    >>> law = LangmuirHinshelwood(reference_temperature=300.0)
    >>> p = {"k_ref": 1.0, "activation_energy": 0.0, "adsorption_constant": 0.01,
    ...      "adsorption_enthalpy": 0.0}
    >>> float(law.rate(100.0, 300.0, p))
    0.5
    """

    name = "langmuir_hinshelwood"
    _units = {**_ARRHENIUS_UNITS, "adsorption_constant": "m^3/mol", "adsorption_enthalpy": "J/mol"}
    _limits = {
        **_ARRHENIUS_LIMITS,
        "adsorption_constant": Interval(0.0, lower_closed=False, unit="m^3/mol"),
    }
    _option_names = ("reference_temperature", "m")

    def __init__(self, *, reference_temperature: float, m: int = 1) -> None:
        self.reference_temperature = _option_positive(
            self.name, "reference_temperature", reference_temperature, "K"
        )
        if isinstance(m, bool) or m not in (1, 2):
            raise StudyError(
                f"rate law '{self.name}': option 'm' (denominator power) must be 1 or 2, got {m!r}"
            )
        self.m = int(m)

    def rate(self, C, T, p, *, C0=None):
        k, K = _k_and_K(self, T, p, self.reference_temperature)
        KC = K * np.maximum(np.asarray(C, dtype=float), 0.0)
        return k * KC / (1.0 + KC) ** self.m

    def drate_dC(self, C, T, p, *, C0=None):
        k, K = _k_and_K(self, T, p, self.reference_temperature)
        C = np.asarray(C, dtype=float)
        KC = K * np.maximum(C, 0.0)
        slope = k * K * (1.0 + (1.0 - self.m) * KC) / (1.0 + KC) ** (self.m + 1)
        return np.where(C >= 0, slope, 0.0)

    def langmuir_hinshelwood_form(self, T, p):
        _, K = _k_and_K(self, T, p, self.reference_temperature)
        return np.asarray(K, dtype=float), self.m
