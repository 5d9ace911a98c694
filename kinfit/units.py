"""Units at the boundary: parse quantity strings and column headers with pint and convert to SI.

Nothing inside kinfit handles non-SI numbers; this module is the only conversion path.
Stirrer speeds are converted to revolutions per second (pint's ``rpm`` is an angular speed, so a
plain ``.to("1/s")`` would give rad/s); temperatures with an offset unit (degC, degF) are parsed
with magnitude and unit apart so they convert correctly.
"""

from __future__ import annotations

import math
import re
from dataclasses import dataclass
from functools import lru_cache

import numpy as np
import pint

from kinfit.errors import StudyError

__all__ = ["QUANTITY_KINDS", "SI_UNIT", "parse_quantity", "parse_header", "to_si", "ureg",
           "printable"]

ureg: pint.UnitRegistry = pint.UnitRegistry(autoconvert_offset_to_baseunit=True)

#: Kinds of quantity kinfit reads, with the SI unit it stores and the dimensionality pint checks.
QUANTITY_KINDS: dict[str, tuple[str, str]] = {
    "temperature": ("K", "[temperature]"),
    "time": ("s", "[time]"),
    "concentration": ("mol/m^3", "[substance] / [length] ** 3"),
    "speed": ("1/s", "1 / [time]"),
    "length": ("m", "[length]"),
    "loading": ("kg/m^3", "[mass] / [length] ** 3"),
    "density": ("kg/m^3", "[mass] / [length] ** 3"),
    "volume": ("m^3", "[length] ** 3"),
    "energy_per_mol": ("J/mol", "[mass] * [length] ** 2 / [time] ** 2 / [substance]"),
    "rate_per_mass": ("mol/(kg*s)", "[substance] / [mass] / [time]"),
    "diffusivity": ("m^2/s", "[length] ** 2 / [time]"),
    "velocity": ("m/s", "[length] / [time]"),
    "per_concentration": ("m^3/mol", "[length] ** 3 / [substance]"),
    "viscosity": ("Pa*s", "[mass] / [length] / [time]"),
    "molar_mass": ("kg/mol", "[mass] / [substance]"),
    "molar_volume": ("m^3/mol", "[length] ** 3 / [substance]"),
    "dimensionless": ("1", "[]"),
}

#: SI unit string stored beside each kind in results.
SI_UNIT = {kind: unit for kind, (unit, _) in QUANTITY_KINDS.items()}

_HEADER = re.compile(r"^\s*([A-Za-z_][A-Za-z0-9_]*)\s*(?:\[(.*)\])?\s*$")
_NUMBER = re.compile(r"^\s*([-+]?(?:\d+\.?\d*|\.\d+)(?:[eE][-+]?\d+)?)\s*(.*?)\s*$")
_ALIASES = {"-": "", "1": "", "%": "percent", "um": "micrometer", "µm": "micrometer",
            "μm": "micrometer", "M": "mol/L"}


_ANGLES = {"revolution", "revolutions_per_minute", "revolutions_per_second", "rps", "turn",
           "radian", "degree"}


@dataclass(frozen=True)
class Header:
    """A parsed column header ``name [unit]``."""

    name: str
    unit: str | None


def printable(text: object, *, limit: int = 80) -> str:
    """User text made safe for a one-line message: non-printable characters (newlines, tabs,
    control and separator characters) escaped as ``\\n``, ``\\x0b``, ``\\u2028``, and text longer
    than ``limit`` characters cut with an ellipsis.

    Examples
    --------
    >>> printable("mol/L\\nK")
    'mol/L\\\\nK'
    >>> printable("x" * 100, limit=10)
    'xxxxxxxxx…'
    """
    s = str(text)
    if len(s) > limit:
        s = s[: limit - 1] + "\u2026"
    return "".join(c if c.isprintable() else c.encode("unicode_escape").decode("ascii")
                   for c in s)


@lru_cache(maxsize=512)
def _unit(text: str) -> pint.Unit:
    text = text.strip()
    text = _ALIASES.get(text, text)
    return ureg.Unit(text) if text else ureg.dimensionless


def _factor(unit_text: str, kind: str, where: str) -> tuple[float, float]:
    """Scale and offset taking a number in ``unit_text`` to the SI unit of ``kind``."""
    si, dim = QUANTITY_KINDS[kind]
    try:
        unit = _unit(unit_text)
    except Exception as exc:  # noqa: BLE001 - pint's parser raises many types for bad text
        # (UndefinedUnitError, DefinitionSyntaxError, TokenError for "(", ZeroDivisionError
        # for "1/0", AttributeError, TypeError, ValueError, AssertionError, RecursionError)
        raise StudyError(
            f"{where}: unit '{printable(unit_text)}' is not recognised "
            f"({exc.__class__.__name__}); "
            f"write {_kind_words(kind)} unit such as '{_EXAMPLE[kind]}'"
        ) from None
    if kind == "speed" and _ANGLES & {str(name) for name in unit._units}:
        target = ureg.rps  # an angle per time: count revolutions, not radians
    else:
        target = _unit(si)
    if unit.dimensionality != target.dimensionality:
        raise StudyError(
            f"{where}: unit '{printable(unit_text)}' is not {_kind_words(kind)} unit (it is "
            f"{unit.dimensionality or 'dimensionless'}); write a unit such as '{_EXAMPLE[kind]}'"
        )
    q0 = ureg.Quantity(0.0, unit).to(target).magnitude
    q1 = ureg.Quantity(1.0, unit).to(target).magnitude
    return q1 - q0, q0


#: what each quantity kind is called in a message
_KIND_WORDS = {"energy_per_mol": "molar energy", "rate_per_mass": "rate per catalyst mass",
               "per_concentration": "reciprocal concentration", "speed": "stirrer speed",
               "loading": "catalyst loading", "dimensionless": "dimensionless"}


def _kind_words(kind: str) -> str:
    """'a temperature', 'a molar energy', 'an ...': the kind with its article."""
    words = _KIND_WORDS.get(kind, kind.replace("_", " "))
    return f"{'an' if words[0] in 'aeiou' else 'a'} {words}"


_EXAMPLE = {
    "temperature": "K or degC",
    "time": "s, min or h",
    "concentration": "mol/L or mol/m^3",
    "speed": "rpm or 1/s",
    "length": "um or mm",
    "loading": "g/L or kg/m^3",
    "density": "kg/m^3 or g/cm^3",
    "volume": "mL or L",
    "energy_per_mol": "kJ/mol",
    "rate_per_mass": "mol/(kg*s) or mmol/(g*min)",
    "diffusivity": "m^2/s or cm^2/s",
    "velocity": "m/s",
    "per_concentration": "L/mol or m^3/mol",
    "viscosity": "mPa*s or cP",
    "molar_mass": "g/mol",
    "molar_volume": "cm^3/mol",
    "dimensionless": "- (dimensionless)",
}


def to_si(values, unit_text: str, kind: str, *, where: str = "value"):
    """Convert numbers (scalar or numpy array) given in ``unit_text`` to the SI unit of ``kind``.

    Parameters
    ----------
    values : float or ndarray
        Magnitudes in ``unit_text``.
    unit_text : str
        A pint unit expression, for example ``"degC"``, ``"rpm"``, ``"um"``, ``"mol/L"``.
    kind : str
        One of :data:`QUANTITY_KINDS`.
    where : str
        Names the source (file, column) in error messages.

    Examples
    --------
    >>> float(to_si(45.0, "degC", "temperature"))
    318.15
    >>> float(to_si(600.0, "rpm", "speed"))
    10.0
    """
    if kind not in QUANTITY_KINDS:
        raise KeyError(kind)
    scale, offset = _factor(unit_text, kind, where)
    with np.errstate(over="ignore", invalid="ignore"):  # overflow to inf: callers test finiteness
        return values * scale + offset


def parse_quantity(text: object, kind: str, *, where: str = "value") -> float:
    """Parse a quantity string such as ``"250 rpm"`` or ``"45 degC"`` into SI.

    A bare number is accepted only for a dimensionless kind.

    Examples
    --------
    >>> parse_quantity("75 um", "length")
    7.5e-05
    >>> parse_quantity("60 kJ/mol", "energy_per_mol")
    60000.0
    """
    if isinstance(text, bool):
        raise StudyError(f"{where}: expected a {kind} such as '{_example_value(kind)}', got {text}")
    if isinstance(text, int | float):
        if kind == "dimensionless":
            try:
                number = float(text)
            except OverflowError:  # an integer beyond double precision
                number = math.inf
            if not math.isfinite(number):
                raise StudyError(f"{where}: {printable(text, limit=40)} is not a finite number")
            return number
        raise StudyError(
            f"{where}: the number {printable(text, limit=40)} has no unit; write it as a "
            "string with its unit, "
            f"for example \"{_example_value(kind)}\""
        )
    if not isinstance(text, str):
        raise StudyError(
            f"{where}: expected a {kind} string such as \"{_example_value(kind)}\", "
            f"got {type(text).__name__}"
        )
    m = _NUMBER.match(text)
    if not m:
        raise StudyError(
            f"{where}: cannot read '{printable(text)}' as a number with a unit; "
            f"write it like \"{_example_value(kind)}\""
        )
    magnitude = float(m.group(1))
    unit_text = m.group(2)
    if not unit_text and kind != "dimensionless":
        raise StudyError(
            f"{where}: '{printable(text)}' has no unit; write it like \"{_example_value(kind)}\""
        )
    value = float(to_si(magnitude, unit_text, kind, where=where))
    if value != value or value in (float("inf"), float("-inf")):
        raise StudyError(f"{where}: '{printable(text)}' is not a finite number (in SI units)")
    return value


def _example_value(kind: str) -> str:
    return {
        "temperature": "45 degC", "time": "30 min", "concentration": "0.5 mol/L",
        "speed": "600 rpm", "length": "75 um", "loading": "2 g/L",
        "density": "1500 kg/m^3", "volume": "0.3 L", "energy_per_mol": "60 kJ/mol",
        "rate_per_mass": "0.01 mol/(kg*s)", "diffusivity": "1e-9 m^2/s",
        "velocity": "0.01 m/s", "per_concentration": "1 L/mol", "viscosity": "0.89 mPa*s",
        "molar_mass": "18 g/mol", "molar_volume": "100 cm^3/mol", "dimensionless": "0.5",
    }[kind]


def parse_header(text: str, *, where: str) -> Header:
    """Split a column header ``name [unit]`` into its name and unit text.

    Examples
    --------
    >>> parse_header("temperature [degC]", where="runs.csv")
    Header(name='temperature', unit='degC')
    >>> parse_header("run", where="runs.csv")
    Header(name='run', unit=None)
    """
    m = _HEADER.match(str(text))
    if not m:
        raise StudyError(
            f"{where}: column header '{printable(text)}' is not of the form 'name [unit]'; "
            "write for example 'temperature [degC]'"
        )
    unit = m.group(2)
    return Header(m.group(1), None if unit is None else unit.strip())
