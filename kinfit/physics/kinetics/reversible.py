"""The reversible first-order law r = k (C - C_eq)."""

from __future__ import annotations

import numpy as np

from kinfit.errors import ModelError
from kinfit.physics.families import Interval
from kinfit.physics.kinetics.base import (
    _ARRHENIUS_LIMITS,
    _ARRHENIUS_UNITS,
    _AtReferenceConditions,
    _k_and_K,
)

__all__ = ["ReversibleFirstOrder"]


class ReversibleFirstOrder(_AtReferenceConditions):
    r"""First-order reversible A <-> B: :math:`r = k(T)\,[C - (C_0 - C)/K_{eq}(T)]/C_\mathrm{ref}`.

    C0 is the run's initial total concentration (B starts at 0, so C_B = C0 - C). k(T) by
    :func:`arrhenius` [mol/(kg s)] at C_ref, as for :class:`PowerLaw` (with C_ref = 1 mol/m^3,
    k is the usual first-order constant in m^3/(kg s)); K_eq(T) = C_B/C_A at equilibrium by
    :func:`van_t_hoff`. The rate is negative below the equilibrium concentration C0/(1 + K_eq)
    (it is linear in C and is not clipped).

    Parameters
    ----------
    reference_temperature : float
        T_ref [K] of ``k_ref`` and ``equilibrium_constant``.
    reference_concentration : float, default 1000
        C_ref [mol/m^3].

    Notes
    -----
    Parameters: ``k_ref`` [mol/(kg s)] > 0, ``activation_energy`` [J/mol] >= 0,
    ``equilibrium_constant`` [-] > 0, ``reaction_enthalpy`` [J/mol] (finite).

    Examples
    --------
    >>> law = ReversibleFirstOrder(reference_temperature=300.0)
    >>> p = {"k_ref": 1.0, "activation_energy": 0.0, "equilibrium_constant": 3.0,
    ...      "reaction_enthalpy": 0.0}
    >>> float(law.equilibrium_concentration(300.0, p, C0=1000.0))
    250.0
    """

    name = "reversible"
    reversible = True
    _units = {**_ARRHENIUS_UNITS, "equilibrium_constant": "-", "reaction_enthalpy": "J/mol"}
    _limits = {**_ARRHENIUS_LIMITS, "equilibrium_constant": Interval(0.0, lower_closed=False)}

    def _C0(self, C0):
        if C0 is None:
            raise ModelError(
                f"rate law '{self.name}' needs the run's initial concentration C0 "
                "(mol/m^3) to compute the product concentration C0 - C"
            )
        return np.asarray(C0, dtype=float)

    def rate(self, C, T, p, *, C0=None):
        C0 = self._C0(C0)
        k, K = _k_and_K(self, T, p, self.reference_temperature)
        C = np.asarray(C, dtype=float)
        return k * (C - (C0 - C) / K) / self.reference_concentration

    def drate_dC(self, C, T, p, *, C0=None):
        C0 = self._C0(C0)
        k, K = _k_and_K(self, T, p, self.reference_temperature)
        slope = k * (1.0 + 1.0 / K) / self.reference_concentration
        shape = np.broadcast_shapes(np.shape(C), np.shape(slope), np.shape(C0))
        return np.broadcast_to(slope, shape).copy()

    def equilibrium_concentration(self, T, p, *, C0=None):
        C0 = self._C0(C0)
        _, K = _k_and_K(self, T, p, self.reference_temperature)
        return C0 / (1.0 + K)

    def linear_slope(self, T, p, *, C0=None):
        k, K = _k_and_K(self, T, p, self.reference_temperature)
        return np.asarray(k * (1.0 + 1.0 / K) / self.reference_concentration, dtype=float)
