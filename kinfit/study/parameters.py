"""The parameter table: each model parameter with its SI value, bounds, vary flag, scope,
optimiser transform and prior, read from the study file's ``[parameters.NAME]`` sections.

A fit never mutates the table: :meth:`ParameterTable.with_values` returns a new one.
"""

from __future__ import annotations

import math
from collections.abc import Iterator, Mapping
from dataclasses import dataclass, replace
from typing import Any

from kinfit.core.units import SI_UNIT, parse_quantity, printable, ureg
from kinfit.errors import StudyError

__all__ = ["Parameter", "ParameterTable", "parameter_table_from_toml", "PARAMETER_KINDS",
           "SCOPES"]

#: Known parameter names -> (quantity kind, positive scale parameter?, default bounds)
PARAMETER_KINDS: dict[str, tuple[str, bool, tuple[float, float]]] = {
    "k_ref": ("rate_per_mass", True, (0.0, math.inf)),
    "activation_energy": ("energy_per_mol", False, (0.0, 4e5)),
    "order": ("dimensionless", False, (0.0, 3.0)),
    "effective_diffusivity": ("diffusivity", True, (0.0, math.inf)),
    "tortuosity": ("dimensionless", True, (1.0, 20.0)),
    "kc_ref": ("velocity", True, (0.0, math.inf)),
    "agitation_exponent": ("dimensionless", False, (0.0, 2.0)),
    "size_exponent": ("dimensionless", False, (-1.0, 3.0)),
    "adsorption_constant": ("per_concentration", True, (0.0, math.inf)),
    "adsorption_enthalpy": ("energy_per_mol", False, (-4e5, 4e5)),
    "equilibrium_constant": ("dimensionless", True, (0.0, math.inf)),
    "reaction_enthalpy": ("energy_per_mol", False, (-4e5, 4e5)),
    "sigma": ("concentration", True, (0.0, math.inf)),
    "sigma_rel": ("dimensionless", True, (0.0, math.inf)),
}
SCOPES = ("shared", "run", "group")
_KEYS = {"value", "min", "max", "vary", "prior", "scope", "transform", "unit"}


@dataclass(frozen=True)
class Parameter:
    """One model parameter, SI units.

    Attributes
    ----------
    name : str
    value : float
        Start value (fit) or the value used (simulate), SI.
    unit : str
        SI unit string.
    min, max : float
        Bounds, SI.
    vary : bool
    scope : {"shared", "run", "group"}
        One value for all runs, one per run, or one per group (catalyst batch).
    transform : {"log", "none"}
        The optimiser works on ln(value) for positive scale parameters.
    prior : str or dict or None
        The study file's prior specification, parsed by :mod:`kinfit.estimate.priors`.
    """

    name: str
    value: float
    unit: str
    min: float
    max: float
    vary: bool = True
    scope: str = "shared"
    transform: str = "none"
    prior: Any = None


class ParameterTable(Mapping[str, Parameter]):
    """An ordered, read-only collection of :class:`Parameter` by name.

    Examples
    --------
    >>> t = ParameterTable([Parameter("order", 1.0, "1", 0.0, 3.0)])
    >>> t["order"].value
    1.0
    >>> t.values()["order"]
    1.0
    """

    def __init__(self, parameters: list[Parameter] | tuple[Parameter, ...]) -> None:
        self._items = {p.name: p for p in parameters}
        if len(self._items) != len(parameters):
            raise StudyError("parameter names must be unique")

    def __getitem__(self, name: str) -> Parameter:
        try:
            return self._items[name]
        except KeyError:
            raise StudyError(
                f"parameter '{name}' is not in the table; parameters are {list(self._items)}"
            ) from None

    def __contains__(self, name: object) -> bool:
        return name in self._items

    def __iter__(self) -> Iterator[str]:
        return iter(self._items)

    def __len__(self) -> int:
        return len(self._items)

    def values(self) -> dict[str, float]:  # type: ignore[override]
        """Name -> value."""
        return {n: p.value for n, p in self._items.items()}

    def varying(self) -> tuple[str, ...]:
        """Names of the parameters with ``vary = true``."""
        return tuple(n for n, p in self._items.items() if p.vary)

    def with_values(self, values: Mapping[str, float]) -> ParameterTable:
        """A new table with some values replaced."""
        return ParameterTable([
            replace(p, value=float(values[n])) if n in values else p
            for n, p in self._items.items()
        ])

    def subset(self, names: tuple[str, ...] | list[str]) -> ParameterTable:
        """A new table holding only these names, in this order."""
        return ParameterTable([self[n] for n in names])

    def to_text(self) -> str:
        """A plain-text table."""
        lines = [f"{'name':<24}{'value':>14}  {'unit':<14}{'min':>11}{'max':>11}  vary  scope"]
        for p in self._items.values():
            lines.append(
                f"{p.name:<24}{p.value:>14.6g}  {p.unit:<14}{p.min:>11.3g}{p.max:>11.3g}  "
                f"{'yes' if p.vary else 'no':<5} {p.scope}"
            )
        return "\n".join(lines)

    def _repr_html_(self) -> str:
        rows = "".join(
            f"<tr><td>{p.name}</td><td>{p.value:.6g}</td><td>{p.unit}</td><td>{p.min:.3g}</td>"
            f"<td>{p.max:.3g}</td><td>{'yes' if p.vary else 'no'}</td><td>{p.scope}</td></tr>"
            for p in self._items.values()
        )
        return ("<table><tr><th>name</th><th>value</th><th>unit</th><th>min</th><th>max</th>"
                f"<th>vary</th><th>scope</th></tr>{rows}</table>")

    def __repr__(self) -> str:
        return f"ParameterTable({list(self._items.values())!r})"


def _value(raw: Any, name: str, key: str, kind: str | None, fname: str) -> tuple[float, str]:
    where = f"{fname} [parameters.{name}].{key}"
    if kind is not None:
        return parse_quantity(raw, kind, where=where), SI_UNIT[kind]
    # a parameter of a user expression: a bare number is SI; a string converts to SI base units
    if isinstance(raw, bool) or not isinstance(raw, int | float | str):
        raise StudyError(f"{where}: expected a number or a quantity string, got {raw!r}")
    try:
        if isinstance(raw, int | float):
            value, unit = float(raw), "SI"
        else:
            q: Any = ureg.Quantity(raw).to_base_units()
            value, unit = float(q.magnitude), f"{q.units:~}" or "1"
    except Exception:  # noqa: BLE001 - pint raises many types for bad strings; float() of a
        # huge integer raises OverflowError, of a complex magnitude TypeError
        raise StudyError(f"{where}: cannot read '{printable(raw)}' as a finite quantity") from None
    if not math.isfinite(value):
        raise StudyError(f"{where}: {printable(raw)} is not a finite number; give a finite value")
    return value, unit


def parameter_table_from_toml(section: Mapping[str, Any], fname: str) -> ParameterTable:
    """Build the table from the ``[parameters]`` section of a study file.

    Raises
    ------
    StudyError
        Unknown keys, unreadable values, bounds that exclude the value, ``min >= max``, an
        unknown scope or transform, or a prior on a fixed parameter.
    """
    params = []
    for name, spec in section.items():
        if not name.isprintable():
            raise StudyError(f"{fname}: parameter name '{printable(name)}' holds a non-printable "
                             "character; retype it")
        if not isinstance(spec, Mapping):
            raise StudyError(
                f"{fname}: [parameters.{name}] must be a table with at least 'value', "
                f"got {spec!r}"
            )
        unknown = set(spec) - _KEYS
        if unknown:
            raise StudyError(
                f"{fname} [parameters.{name}]: unknown key(s) {sorted(unknown)}; allowed keys "
                f"are {sorted(_KEYS)}"
            )
        if "value" not in spec:
            raise StudyError(f"{fname} [parameters.{name}]: 'value' is missing")
        kind, positive, (lo_d, hi_d) = PARAMETER_KINDS.get(name, (None, False, (-math.inf,
                                                                               math.inf)))
        value, unit = _value(spec["value"], name, "value", kind, fname)
        lo = _value(spec["min"], name, "min", kind, fname)[0] if "min" in spec else lo_d
        hi = _value(spec["max"], name, "max", kind, fname)[0] if "max" in spec else hi_d
        vary = spec.get("vary", True)
        if not isinstance(vary, bool):
            raise StudyError(f"{fname} [parameters.{name}].vary must be true or false, "
                             f"got {vary!r}")
        scope = spec.get("scope", "shared")
        if scope not in SCOPES:
            raise StudyError(f"{fname} [parameters.{name}].scope = {scope!r} is not recognised; "
                             f"use one of {list(SCOPES)}")
        transform = spec.get("transform", "log" if positive and lo >= 0 else "none")
        if transform not in ("log", "none"):
            raise StudyError(f"{fname} [parameters.{name}].transform = {transform!r} is not "
                             "recognised; use 'log' or 'none'")
        if not lo < hi:
            raise StudyError(f"{fname} [parameters.{name}]: min ({lo:g}) must be below max "
                             f"({hi:g}); fix the bounds")
        if not lo <= value <= hi:
            raise StudyError(
                f"{fname} [parameters.{name}]: value {value:g} {unit} lies outside its bounds "
                f"[{lo:g}, {hi:g}]; move the value or widen the bounds"
            )
        if transform == "log" and lo < 0:
            raise StudyError(f"{fname} [parameters.{name}]: transform 'log' needs min >= 0")
        if transform == "log" and vary and value <= 0:
            raise StudyError(f"{fname} [parameters.{name}]: a log-transformed parameter needs a "
                             f"start value > 0, got {value:g}")
        prior = spec.get("prior")
        if prior is not None and not vary:
            raise StudyError(
                f"{fname} [parameters.{name}]: a fixed parameter (vary = false) cannot have a "
                "prior; remove the prior or let the parameter vary"
            )
        params.append(Parameter(name, value, unit, lo, hi, vary, scope, transform, prior))
    return ParameterTable(params)
