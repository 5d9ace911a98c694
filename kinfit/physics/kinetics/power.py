"""The power law r = k(T) (C/C_ref)^n."""

from __future__ import annotations

import numpy as np

from kinfit.physics.families import Interval
from kinfit.physics.kinetics.arrhenius import arrhenius
from kinfit.physics.kinetics.base import (
    _ARRHENIUS_LIMITS,
    _ARRHENIUS_UNITS,
    _AtReferenceConditions,
    _take,
)

__all__ = ["PowerLaw"]


class PowerLaw(_AtReferenceConditions):
    r"""Power law :math:`r = k(T)\,(C/C_\mathrm{ref})^n`, with k(T) by :func:`arrhenius`.

    k is the rate at C_ref [mol/(kg s)], so its unit does not depend on the fitted order.
    For C <= 0 the rate is 0; zero order is a Heaviside step (k for C > 0).

    Parameters
    ----------
    reference_temperature : float
        T_ref [K] of ``k_ref``.
    reference_concentration : float, default 1000
        C_ref [mol/m^3] (1 mol/L).

    Notes
    -----
    Parameters: ``k_ref`` [mol/(kg s)] > 0, ``activation_energy`` [J/mol] >= 0, ``order`` [-] in
    [0, 3].

    Examples
    --------
    >>> law = PowerLaw(reference_temperature=300.0)
    >>> p = {"k_ref": 2.0, "activation_energy": 0.0, "order": 2.0}
    >>> float(law.rate(500.0, 300.0, p)), float(law.drate_dC(500.0, 300.0, p))
    (0.5, 0.002)
    """

    name = "power"
    _units = {**_ARRHENIUS_UNITS, "order": "-"}
    _limits = {**_ARRHENIUS_LIMITS, "order": Interval(0.0, 3.0)}

    def _k_x_n(self, C, T, p):
        k_ref, Ea, n = _take(self, p, self.parameter_names)
        k = arrhenius(k_ref, Ea, T, self.reference_temperature)
        return k, np.maximum(C, 0.0) / self.reference_concentration, n

    def rate(self, C, T, p, *, C0=None):
        C = np.asarray(C, dtype=float)
        k, x, n = self._k_x_n(C, T, p)
        with np.errstate(invalid="ignore", divide="ignore"):
            return k * np.where(C > 0, x**n, 0.0)

    def drate_dC(self, C, T, p, *, C0=None):
        C = np.asarray(C, dtype=float)
        k, x, n = self._k_x_n(C, T, p)
        with np.errstate(invalid="ignore", divide="ignore"):
            slope = np.where(n == 0, 0.0, n * x ** (n - 1.0))
        return np.where(C >= 0, k * slope / self.reference_concentration, 0.0)

    def power_law_order(self, p):
        return np.asarray(p["order"], dtype=float)
