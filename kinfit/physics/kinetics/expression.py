"""A user's rate expression, compiled safely (never eval)."""

from __future__ import annotations

from collections.abc import Collection
from typing import Any

import numpy as np

from kinfit.physics.kinetics.base import RateLaw, _option_positive, _take
from kinfit.physics.kinetics.expressions import CompiledExpression, compile_expression

__all__ = ["ExpressionRate"]


class ExpressionRate(RateLaw):
    """A user rate expression compiled safely by :func:`kinfit.physics.kinetics.expressions.compile_expression`.

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
