"""Plausibility of a study's numbers: impossible values are bad input (exit 2, with file, row
and column), implausible ones a :class:`~kinfit.errors.PlausibilityWarning`, and runs that
carry no rate information are named.

Limits (common practice for liquid-phase catalytic campaigns unless a source is given):

- temperature: outside 150 K to 1500 K no liquid-phase slurry or packed-bed kinetics is run;
  above 700 K few solvents are still liquid, so it warns;
- stirrer speed: 0 rpm makes the agitation law's film coefficient zero (no transfer at all);
- densities (particle, liquid): above 22.6 g/cm^3, the density of osmium, the densest element
  (CRC Handbook of Chemistry and Physics), no material exists; above 10 g/cm^3 a catalyst
  support or a solvent is unheard of (most lie between 0.5 and 5 g/cm^3), so it warns.
"""

from __future__ import annotations

import warnings
from collections.abc import Mapping, Sequence
from typing import Any

from kinfit.errors import PlausibilityWarning, StudyError

__all__ = ["T_MIN", "T_MAX", "T_LIQUID_MAX", "DENSITY_MAX", "DENSITY_WARN", "check_runs",
           "check_density", "uninformative_runs"]

T_MIN, T_MAX = 150.0, 1500.0  # K
T_LIQUID_MAX = 700.0  # K
DENSITY_MAX = 22_600.0  # kg/m^3, osmium
DENSITY_WARN = 10_000.0  # kg/m^3


def check_runs(info: Mapping[str, Mapping[str, Any]], fname: str, *, film_model: str) -> None:
    """Impossible run conditions raise :class:`StudyError`; implausible ones warn.

    ``info`` maps run id -> the runs table's SI values, with ``_line`` (the file line of the
    run) and ``_headers`` (factor -> header text).
    """
    for rid, rec in info.items():
        line, headers = rec.get("_line"), rec.get("_headers", {})
        T = rec["temperature"]
        col = headers.get("temperature", "temperature")
        if not T_MIN <= T <= T_MAX:
            raise StudyError(
                f"temperature {T:.6g} K ({T - 273.15:.6g} degC) lies outside "
                f"{T_MIN:g} K to {T_MAX:g} K, where no liquid-phase kinetics is measured; "
                "correct the value or its unit (degC, K)", file=fname, row=line, column=col,
                run=rid)
        if T > T_LIQUID_MAX:
            warnings.warn(f"{fname}, run '{rid}', row {line}: temperature {T:.6g} K is above "
                          f"{T_LIQUID_MAX:g} K, where few solvents are still liquid; check the "
                          "value and its unit", PlausibilityWarning, stacklevel=3)
        if film_model == "agitation" and rec["stirrer_speed"] == 0:
            raise StudyError(
                "stirrer speed 0 under the agitation law makes the film coefficient zero (no "
                "transfer to the catalyst at all); give the real speed, or use [film] model = "
                "\"none\" or \"correlation\" for an unstirred system", file=fname, row=line,
                column=headers.get("stirrer_speed", "stirrer_speed"), run=rid)


def check_density(value: float, where: str) -> None:
    """Raise for a density no material has; warn above :data:`DENSITY_WARN`."""
    if value > DENSITY_MAX:
        raise StudyError(f"{where}: density {value / 1000:.6g} g/cm^3 is above that of osmium "
                         "(22.6 g/cm^3), the densest element; correct the value or its unit")
    if value > DENSITY_WARN:
        warnings.warn(f"{where}: density {value / 1000:.6g} g/cm^3 is above 10 g/cm^3, "
                      "unheard of for a catalyst or a liquid; check the value and its unit",
                      PlausibilityWarning, stacklevel=3)


def uninformative_runs(runs: Sequence[Any]) -> list[str]:
    """Ids of concentration-profile runs that carry no rate information: a single point, or
    points only at t = 0. They stay in the fit (they weigh C0) but not in the transport tests
    that compare runs."""
    out = []
    for r in runs:
        if r.times.size == 0 and r.rates.size:
            continue  # a rate campaign: one measured rate is a measurement
        if r.times.size < 2 or not (r.times > 0).any():
            out.append(r.id)
    return out
