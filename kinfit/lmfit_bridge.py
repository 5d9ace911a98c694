"""kinfit parameters to and from lmfit: a fit's estimates as an :class:`lmfit.Parameters`
(values, bounds, standard errors, correlations), and an :class:`lmfit.Parameters` as starting
values and bounds of a study's parameter table.

lmfit names must be Python identifiers, so a per-run or per-group column such as
``k_ref[R1]`` becomes ``k_ref_R1``; the kinfit name and unit travel in ``user_data``.
"""

from __future__ import annotations

import math
import re
from collections.abc import Mapping
from dataclasses import replace
from typing import Any

import lmfit

from kinfit.errors import StudyError, did_you_mean
from kinfit.parameters import ParameterTable

__all__ = ["lmfit_name", "to_lmfit_parameters", "table_from_lmfit"]


def lmfit_name(name: str) -> str:
    """An lmfit-valid name for a kinfit parameter or column.

    >>> lmfit_name("k_ref[R1]")
    'k_ref_R1'
    """
    out = re.sub(r"\W+", "_", name).strip("_")
    return out if out and not out[0].isdigit() else f"p_{out}"


def to_lmfit_parameters(parameters: Mapping[str, Mapping[str, Any]],
                        correlation: Mapping[str, Any] | None = None) -> lmfit.Parameters:
    """The results contract's ``parameters`` (and ``correlation``) as lmfit Parameters."""
    out = lmfit.Parameters()
    for name, p in parameters.items():
        lo, hi = (p.get("bounds") or [-math.inf, math.inf])[:2]
        value = float(p["estimate"])
        out.add(lmfit_name(name), value=value, vary=bool(p.get("vary", True)),
                min=-math.inf if lo is None else float(lo),
                max=math.inf if hi is None else float(hi),
                user_data={"kinfit_name": name, "unit": p.get("unit", "")})
        se = p.get("stderr")
        out[lmfit_name(name)].stderr = None if se is None else float(se)
    names = list((correlation or {}).get("names") or [])
    matrix = (correlation or {}).get("matrix")
    if names and matrix is not None:
        for i, a in enumerate(names):
            if lmfit_name(a) in out:
                out[lmfit_name(a)].correl = {lmfit_name(b): float(matrix[i][j])
                                             for j, b in enumerate(names) if j != i
                                             and matrix[i][j] is not None}
    return out


def table_from_lmfit(table: ParameterTable, params: lmfit.Parameters) -> ParameterTable:
    """The study's parameter table with values, bounds and vary flags taken from ``params``
    (SI values, matched by name); parameters ``params`` lacks keep the table's.

    Raises
    ------
    StudyError
        A name the table lacks, or a value outside its bounds.
    """
    by_lm = {lmfit_name(n): n for n in table}
    items = {n: table[n] for n in table}
    for key, par in params.items():
        name = (par.user_data or {}).get("kinfit_name", key) if isinstance(
            par.user_data, Mapping) else key
        name = name if name in items else by_lm.get(key, name)
        if name not in items:
            raise StudyError(f"lmfit parameter '{key}' is not a parameter of the study"
                             f"{did_you_mean(key, list(items))}; its parameters are "
                             f"{list(items)}")
        old = items[name]
        lo = old.min if par.min is None or not math.isfinite(par.min) and old.min > par.min \
            else float(par.min)
        hi = old.max if par.max is None or not math.isfinite(par.max) and old.max < par.max \
            else float(par.max)
        value = float(par.value)
        if not lo <= value <= hi:
            raise StudyError(f"lmfit parameter '{key}': value {value:g} lies outside its "
                             f"bounds [{lo:g}, {hi:g}]")
        if old.transform == "log" and lo < 0:
            lo = 0.0
        items[name] = replace(old, value=value, min=lo, max=hi, vary=bool(par.vary))
    return ParameterTable(list(items.values()))
