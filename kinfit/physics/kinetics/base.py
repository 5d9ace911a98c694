"""The base of the intrinsic rate laws per kg of catalyst (one module per law beside this one,
named in :mod:`kinfit.physics.kinetics.registry`), with Arrhenius and van 't Hoff temperature
dependence at a reference temperature (:mod:`kinfit.physics.kinetics.arrhenius`).

Every rate law is vectorised: concentrations C of shape (m, n) for m parameter sets and n points,
parameter values of shape (m, 1), temperatures of shape (n,) or (m, n); the results broadcast.
Units are SI: C in mol/m^3, T in K, rates in mol/(kg s), energies in J/mol.

The temperature dependence uses k_ref at a reference temperature T_ref rather than the
pre-exponential factor, which removes most of the k0-E correlation in estimation (Schwaab &
Pinto 2007, Chem. Eng. Sci. 62, 2750-2764).
"""

from __future__ import annotations

from abc import ABC, abstractmethod
from collections.abc import Collection, Mapping
from typing import Any, ClassVar

import numpy as np
from numpy.typing import ArrayLike, NDArray

from kinfit.errors import StudyError
from kinfit.physics.families import DeclaredParameters, Interval, check_limits, positive_option
from kinfit.physics.kinetics.arrhenius import arrhenius, van_t_hoff

__all__ = ["RateLaw", "DEFAULT_REFERENCE_CONCENTRATION"]

FloatArray = NDArray[np.float64]
Params = Mapping[str, ArrayLike]

#: Default reference concentration of the power law: 1 mol/L.
DEFAULT_REFERENCE_CONCENTRATION = 1000.0


# ----------------------------------------------------------------------------------------------
# Temperature dependence
# ----------------------------------------------------------------------------------------------


# ----------------------------------------------------------------------------------------------
# Base class
# ----------------------------------------------------------------------------------------------


def _take(law: RateLaw, p: Params, names: Collection[str]) -> list[FloatArray]:
    """Parameter arrays in the order of ``names``; a missing one is a StudyError."""
    try:
        return [np.asarray(p[n], dtype=float) for n in names]
    except KeyError as exc:
        raise StudyError(
            f"rate law '{law.name}': parameter {exc.args[0]!r} has no value; it needs "
            f"{list(law.parameter_names)} (add a [parameters.{exc.args[0]}] table)"
        ) from None


def _option_positive(law: str, option: str, value: Any, unit: str) -> float:
    return positive_option(f"rate law '{law}'", option, value, unit)


class RateLaw(DeclaredParameters, ABC):
    """Intrinsic rate of A -> products per kg of catalyst as a function of C and T.

    A family declares its parameters once, in the class tables ``_units`` (name -> SI unit, in
    column order) and ``_limits`` (name -> accepted :class:`Interval`), lists its constructor
    options in ``_option_names``, and implements :meth:`rate` and :meth:`drate_dC`.

    Shapes: C (m, n), T (n,) or (m, n), every parameter (m, 1), C0 (n,) or (m, n); any shapes
    that broadcast together are accepted and the result has the broadcast shape.
    """

    #: Registry name used by the study file's ``[kinetics] rate_law``.
    name: ClassVar[str]
    #: Whether the law has a non-zero equilibrium concentration (needs ``C0``).
    reversible: ClassVar[bool] = False
    _option_names: ClassVar[tuple[str, ...]] = ()

    @property
    def options(self) -> dict[str, Any]:
        """The options the law was built with (for reports and manifests)."""
        return {k: getattr(self, k) for k in self._option_names}

    @abstractmethod
    def rate(
        self, C: ArrayLike, T: ArrayLike, p: Params, *, C0: ArrayLike | None = None
    ) -> FloatArray:
        """Intrinsic rate r(C, T) [mol/(kg s)].

        Parameters
        ----------
        C : array_like
            Concentration [mol/m^3], e.g. shape (m, n).
        T : array_like
            Temperature [K], e.g. shape (n,).
        p : mapping of str to array_like
            Parameter values, each e.g. shape (m, 1).
        C0 : array_like, optional
            The run's initial (total) concentration [mol/m^3]; only reversible laws use it.

        Returns
        -------
        ndarray
            Broadcast shape of the inputs.
        """

    @abstractmethod
    def drate_dC(
        self, C: ArrayLike, T: ArrayLike, p: Params, *, C0: ArrayLike | None = None
    ) -> FloatArray:
        """Analytic derivative dr/dC [mol/(kg s) per mol/m^3 = m^3/(kg s)].

        Same arguments and shapes as :meth:`rate`. At C = 0 the right-hand derivative is
        returned (inf for a power law of order in (0, 1)); below zero the rate is constant, so
        the derivative is 0.
        """

    def equilibrium_concentration(
        self, T: ArrayLike, p: Params, *, C0: ArrayLike | None = None
    ) -> FloatArray:
        """Concentration [mol/m^3] at which the rate vanishes: 0 for irreversible laws.

        Returns an array of the broadcast shape of ``T``, the parameters and ``C0``.
        """
        shapes = [np.shape(T), *(np.shape(v) for v in _take(self, p, self.parameter_names))]
        if C0 is not None:
            shapes.append(np.shape(C0))
        return np.zeros(np.broadcast_shapes(*shapes))

    def check(self, p: Params) -> None:
        """Reject parameter values the physics cannot accept.

        Raises
        ------
        StudyError
            If a parameter is missing.
        ModelError
            Naming the parameter, the accepted range and the value found, for non-finite or
            out-of-range values (see :attr:`parameter_limits`).
        """
        values = dict(zip(self.parameter_names, _take(self, p, self.parameter_names), strict=True))
        check_limits(f"rate law '{self.name}'", values, self.parameter_limits)

    def power_law_order(self, p: Params) -> FloatArray | None:
        """The reaction order when the law is a pure power law, else None."""
        return None

    def langmuir_hinshelwood_form(self, T: ArrayLike, p: Params
                                  ) -> tuple[FloatArray, int] | None:
        """(K(T) [m^3/mol], m) when the law is k K C/(1 + K C)^m, else None (lets the pellet
        use the tabulated Langmuir-Hinshelwood effectiveness factor)."""
        return None

    def linear_slope(self, T: ArrayLike, p: Params, *, C0: ArrayLike | None = None
                     ) -> FloatArray | None:
        """dr/dC [m^3/(kg s)] when the rate is linear in C, r = slope (C - C_eq), for every
        concentration (so the pellet has the first-order closed form in C - C_eq); else None.
        Power laws are handled by their order instead."""
        return None

    def __repr__(self) -> str:
        opts = ", ".join(f"{k}={v!r}" for k, v in self.options.items())
        return f"{type(self).__name__}({opts})"


#: Units and limits shared by every Arrhenius rate constant.
_ARRHENIUS_UNITS = {"k_ref": "mol/(kg*s)", "activation_energy": "J/mol"}
_ARRHENIUS_LIMITS = {
    "k_ref": Interval(0.0, lower_closed=False, unit="mol/(kg*s)"),
    "activation_energy": Interval(0.0, unit="J/mol"),
}


def _k_and_K(law: RateLaw, T: ArrayLike, p: Params, T_ref: float) -> tuple[FloatArray, ...]:
    """k(T) by Arrhenius and K(T) by van 't Hoff from the law's four parameters in order
    (k_ref, activation_energy, K_ref, enthalpy)."""
    k_ref, Ea, K_ref, dH = _take(law, p, law.parameter_names)
    return arrhenius(k_ref, Ea, T, T_ref), van_t_hoff(K_ref, dH, T, T_ref)


# ----------------------------------------------------------------------------------------------
# Families
# ----------------------------------------------------------------------------------------------


class _AtReferenceConditions(RateLaw):
    """A law whose rate constant is given at a reference temperature and concentration."""

    _option_names = ("reference_temperature", "reference_concentration")

    def __init__(
        self,
        *,
        reference_temperature: float,
        reference_concentration: float = DEFAULT_REFERENCE_CONCENTRATION,
    ) -> None:
        self.reference_temperature = _option_positive(
            self.name, "reference_temperature", reference_temperature, "K"
        )
        self.reference_concentration = _option_positive(
            self.name, "reference_concentration", reference_concentration, "mol/m^3"
        )


# ----------------------------------------------------------------------------------------------
# Registry
# ----------------------------------------------------------------------------------------------


