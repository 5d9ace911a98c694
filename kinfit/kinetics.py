"""Intrinsic rate laws per kg of catalyst, with Arrhenius and van 't Hoff temperature
dependence at a reference temperature, behind a name registry.

Every rate law is vectorised: concentrations C of shape (m, n) for m parameter sets and n points,
parameter values of shape (m, 1), temperatures of shape (n,) or (m, n); the results broadcast.
Units are SI: C in mol/m^3, T in K, rates in mol/(kg s), energies in J/mol.

The temperature dependence uses k_ref at a reference temperature T_ref rather than the
pre-exponential factor, which removes most of the k0-E correlation in estimation (Schwaab &
Pinto 2007, Chem. Eng. Sci. 62, 2750-2764).
"""

from __future__ import annotations

import inspect
from abc import ABC, abstractmethod
from collections.abc import Collection, Mapping
from typing import Any, ClassVar

import numpy as np
from numpy.typing import ArrayLike, NDArray
from scipy.constants import R as GAS_CONSTANT

from kinfit.errors import ModelError, StudyError, did_you_mean
from kinfit.expressions import CompiledExpression, compile_expression
from kinfit.families import DeclaredParameters, Interval, check_limits, positive_option

__all__ = [
    "GAS_CONSTANT",
    "Interval",
    "check_limits",
    "arrhenius",
    "van_t_hoff",
    "pre_exponential_factor",
    "decorrelating_reference_temperature",
    "RateLaw",
    "PowerLaw",
    "LangmuirHinshelwood",
    "ReversibleFirstOrder",
    "ExpressionRate",
    "RATE_LAWS",
    "make_rate_law",
]

FloatArray = NDArray[np.float64]
Params = Mapping[str, ArrayLike]

#: Default reference concentration of the power law: 1 mol/L.
DEFAULT_REFERENCE_CONCENTRATION = 1000.0


# ----------------------------------------------------------------------------------------------
# Temperature dependence
# ----------------------------------------------------------------------------------------------


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


class ExpressionRate(RateLaw):
    """A user rate expression compiled safely by :func:`kinfit.expressions.compile_expression`.

    The expression is evaluated at max(C, 0), so the rate below zero equals the rate at zero;
    the derivative is symbolic (exact) and 0 below zero. The law is treated as irreversible
    (equilibrium concentration 0). Parameters need only be finite; their units are unknown
    (``""``).

    Parameters
    ----------
    expression : str
        The rate [mol/(kg s)] in terms of ``C`` [mol/m^3], ``T`` [K], ``R`` [J/(mol K)], the
        constants ``T_ref`` and ``C_ref`` when the options below are given, and parameter names.
    reference_temperature : float, optional
        Makes ``T_ref`` [K] available in the expression.
    reference_concentration : float, optional
        Makes ``C_ref`` [mol/m^3] available in the expression.
    parameters : collection of str, optional
        If given, the only parameter names the expression may use.

    Examples
    --------
    >>> law = ExpressionRate(expression="k*C/(1 + b*C)")
    >>> law.parameter_names
    ('k', 'b')
    >>> float(law.rate(2.0, 300.0, {"k": 3.0, "b": 0.5}))
    3.0
    """

    name = "expression"

    def __init__(
        self,
        *,
        expression: str,
        reference_temperature: float | None = None,
        reference_concentration: float | None = None,
        parameters: Collection[str] | None = None,
    ) -> None:
        constants: dict[str, float] = {}
        if reference_temperature is not None:
            constants["T_ref"] = _option_positive(
                self.name, "reference_temperature", reference_temperature, "K"
            )
        if reference_concentration is not None:
            constants["C_ref"] = _option_positive(
                self.name, "reference_concentration", reference_concentration, "mol/m^3"
            )
        self.expression = expression
        self.reference_temperature = constants.get("T_ref")
        self.reference_concentration = constants.get("C_ref")
        self.parameters = None if parameters is None else tuple(parameters)
        self.compiled: CompiledExpression = compile_expression(
            expression, allowed_names=self.parameters, constants=constants
        )
        self._dC = self.compiled.diff("C")

    @property
    def parameter_names(self) -> tuple[str, ...]:
        return self.compiled.parameter_names

    @property
    def parameter_units(self) -> dict[str, str]:
        return dict.fromkeys(self.parameter_names, "")

    @property
    def options(self) -> dict[str, Any]:
        opts = {
            "expression": self.expression,
            "reference_temperature": self.reference_temperature,
            "reference_concentration": self.reference_concentration,
            "parameters": self.parameters,
        }
        return {k: v for k, v in opts.items() if v is not None}

    def _params(self, p):
        return dict(zip(self.parameter_names, _take(self, p, self.parameter_names), strict=True))

    def rate(self, C, T, p, *, C0=None):
        Cc = np.maximum(np.asarray(C, dtype=float), 0.0)
        return self.compiled(C=Cc, T=T, **self._params(p))

    def drate_dC(self, C, T, p, *, C0=None):
        C = np.asarray(C, dtype=float)
        slope = self._dC(C=np.maximum(C, 0.0), T=T, **self._params(p))
        return np.where(C >= 0, slope, 0.0)


# ----------------------------------------------------------------------------------------------
# Registry
# ----------------------------------------------------------------------------------------------

#: Rate-law families by the name the study file uses.
RATE_LAWS: dict[str, type[RateLaw]] = {
    cls.name: cls for cls in (PowerLaw, LangmuirHinshelwood, ReversibleFirstOrder, ExpressionRate)
}


def make_rate_law(name: str, **options: Any) -> RateLaw:
    """Build a rate law by registry name.

    Parameters
    ----------
    name : str
        One of :data:`RATE_LAWS` (``power``, ``langmuir_hinshelwood``, ``reversible``,
        ``expression``).
    **options
        Keyword options of the family's class (e.g. ``reference_temperature``).

    Returns
    -------
    RateLaw

    Raises
    ------
    StudyError
        Unknown name (the message lists the valid ones), an unknown or missing option, or a bad
        option value.

    Examples
    --------
    >>> make_rate_law("power", reference_temperature=323.15).parameter_names
    ('k_ref', 'activation_energy', 'order')
    """
    cls = RATE_LAWS.get(name)
    if cls is None:
        raise StudyError(
            f"[kinetics] rate_law '{name}' is not recognised{did_you_mean(name, RATE_LAWS)}; "
            f"use one of {sorted(RATE_LAWS)}"
        )
    params = inspect.signature(cls.__init__).parameters
    valid = [n for n, prm in params.items() if prm.kind is inspect.Parameter.KEYWORD_ONLY]
    unknown = sorted(set(options) - set(valid))
    if unknown:
        raise StudyError(
            f"rate law '{name}': option(s) {unknown} not recognised"
            f"{did_you_mean(unknown[0], valid)}; valid options are {valid}"
        )
    missing = [
        n for n in valid if params[n].default is inspect.Parameter.empty and n not in options
    ]
    if missing:
        raise StudyError(f"rate law '{name}': option(s) {missing} must be given")
    return cls(**options)
