"""The parameter table as LaTeX for a manuscript: booktabs rules, symbols, SI units written
out with negative exponents, estimates with their 95 % intervals (and posterior medians with
90 % intervals when sampled). Needs only the ``booktabs`` package.
"""

from __future__ import annotations

import math
import re
from collections.abc import Mapping, Sequence
from typing import Any

from kinfit.estimate.convergence import supported_digits

__all__ = ["PARAMETER_SYMBOLS", "latex_escape", "latex_unit", "latex_number",
           "parameters_table"]

#: mathtext/LaTeX symbol of each parameter of the study vocabulary
PARAMETER_SYMBOLS = {
    "k_ref": r"k_\mathrm{ref}",
    "activation_energy": r"E_\mathrm{a}",
    "order": r"n",
    "effective_diffusivity": r"D_\mathrm{e}",
    "tortuosity": r"\tau",
    "kc_ref": r"k_{c,\mathrm{ref}}",
    "agitation_exponent": r"a",
    "size_exponent": r"b",
    "adsorption_constant": r"K_\mathrm{ref}",
    "adsorption_enthalpy": r"\Delta H_\mathrm{ads}",
    "equilibrium_constant": r"K_\mathrm{eq,ref}",
    "reaction_enthalpy": r"\Delta H_\mathrm{r}",
    "sigma": r"\sigma",
    "sigma_rel": r"\sigma_\mathrm{rel}",
}
_ESCAPES = {"&": r"\&", "%": r"\%", "$": r"\$", "#": r"\#", "_": r"\_", "{": r"\{",
            "}": r"\}", "~": r"\textasciitilde{}", "^": r"\textasciicircum{}",
            "\\": r"\textbackslash{}"}


def latex_escape(text: str) -> str:
    """Escape LaTeX's special characters in plain text."""
    return "".join(_ESCAPES.get(c, c) for c in str(text))


def _unit_factors(unit: str) -> list[tuple[str, int]]:
    """``mol/(kg*s)`` -> [(mol, 1), (kg, -1), (s, -1)]; handles ``*``, ``/``, ``^``, ``**``
    and one level of parentheses."""
    text = unit.replace("**", "^").replace(" ", "")
    out: list[tuple[str, int]] = []
    sign = 1
    i = 0
    while i < len(text):
        c = text[i]
        if c == "/":
            sign = -1
            i += 1
            continue
        if c == "*" or c == ".":
            i += 1
            continue
        if c == "(":
            j = text.index(")", i)
            for name, power in _unit_factors(text[i + 1:j]):
                out.append((name, sign * power))
            i = j + 1
            sign = 1
            continue
        m = re.match(r"([A-Za-zµ]+)(?:\^(-?\d+))?", text[i:])
        if not m:
            raise ValueError(f"cannot read unit '{unit}'")
        out.append((m.group(1), sign * int(m.group(2) or 1)))
        i += m.end()
        sign = 1
    return out


def latex_unit(unit: str | None) -> str:
    r"""An SI unit in LaTeX math: ``mol/(kg*s)`` -> ``\mathrm{mol\,kg^{-1}\,s^{-1}}``;
    dimensionless units (``1``, ``-``, empty) -> ``--``."""
    u = (unit or "").strip()
    if u in ("", "1", "-", "dimensionless"):
        return "--"
    try:
        factors = _unit_factors(u)
    except (ValueError, IndexError):
        return latex_escape(u)
    parts = [name if p == 1 else f"{name}^{{{p}}}" for name, p in factors]
    return "$\\mathrm{" + r"\,".join(parts) + "}$"


def latex_number(value: Any, sig: int = 4, *, exponent: int | None = None) -> str:
    r"""A number in math mode: ``$5.327\times10^{-2}$``; ``exponent`` forces a common power of
    ten (for an interval written like its estimate); None -> ``--``."""
    if value is None:
        return "--"
    f = float(value)
    if not math.isfinite(f):
        return "--"
    e = exponent
    if e is None:
        e = 0 if f == 0 else math.floor(math.log10(abs(f)))
        if -2 <= e < 5:
            e = 0
    if f == 0:
        return "$0$"
    if e == 0:
        digits = 0 if f == 0 else math.floor(math.log10(abs(f)))
        decimals = max(sig - 1 - digits, 0)
        return f"${f:.{decimals}f}$"
    m = f / 10**e
    decimals = max(sig - 1 - (math.floor(math.log10(abs(m))) if m else 0), 0)
    return f"${m:.{decimals}f}\\times10^{{{e}}}$"


def _power_of(value: Any) -> int:
    f = float(value)
    if f == 0 or not math.isfinite(f):
        return 0
    e = math.floor(math.log10(abs(f)))
    return 0 if -2 <= e < 5 else e


def _bound(value: Any, exponent: int, sig: int) -> str:
    """A bound in the estimate's power of ten when that reads well, else in its own."""
    if value is None:
        return "open"
    f = float(value)
    scaled = abs(f) / 10**exponent if math.isfinite(f) else 0.0
    same = f == 0 or 1e-2 <= scaled < 1e3
    return latex_number(f, sig, exponent=exponent if same else None)


def _interval(pair: Sequence[Any] | None, exponent: int, sig: int) -> str:
    if not pair or len(pair) != 2:
        return "--"
    return f"[{_bound(pair[0], exponent, sig)}, {_bound(pair[1], exponent, sig)}]"


def parameters_table(parameters: Mapping[str, Mapping[str, Any]], *,
                     posterior: Mapping[str, Mapping[str, Any]] | None = None,
                     caption: str, label: str = "tab:kinfit-parameters",
                     sig: int = 4) -> str:
    """A booktabs ``table`` of the parameters.

    Parameters
    ----------
    parameters : mapping
        results.json ``parameters``.
    posterior : mapping, optional
        posterior.json ``parameters`` (median, q05, q95 and their ``mcse``).
    caption, label : str
    sig : int
        Significant digits of the estimates.

    Returns
    -------
    str
        LaTeX source, a ``table`` environment with ``tabular``.
    """
    cols = ["Parameter", "Unit", "Estimate", "95\\,\\% interval", "Method"]
    if posterior:
        cols += ["Posterior median", "90\\,\\% interval"]
    lines = [
        "% kinfit parameter table; needs \\usepackage{booktabs}",
        "\\begin{table}[htbp]",
        "  \\centering",
        f"  \\caption{{{latex_escape(caption)}}}",
        f"  \\label{{{label}}}",
        "  \\begin{tabular}{ll" + "r" * (len(cols) - 2) + "}",
        "    \\toprule",
        "    " + " & ".join(cols) + " \\\\",
        "    \\midrule",
    ]
    for name, p in parameters.items():
        base = name.split("[")[0]
        sym = PARAMETER_SYMBOLS.get(base)
        suffix = name[len(base):]
        label_tex = (f"${sym}$" if sym else f"\\texttt{{{latex_escape(base)}}}") + (
            f" {latex_escape(suffix)}" if suffix else "")
        est = p.get("estimate")
        e = _power_of(est) if est is not None else 0
        cells = [label_tex, latex_unit(p.get("unit")), latex_number(est, sig, exponent=e)]
        if p.get("vary", True):
            cells += [_interval(p.get("ci95"), e, sig), latex_escape(p.get("ci_method") or "--")]
        else:
            cells += ["fixed", "--"]
        if posterior:
            q = posterior.get(name) or {}
            if q.get("median") is not None:
                # to the digits the Monte Carlo standard error supports (``sig`` without one)
                se = q.get("mcse") or {}

                def mc(key: str, q: Mapping[str, Any] = q, se: Mapping[str, Any] = se) -> int:
                    return supported_digits(q.get(key), se.get(key)) or sig

                cells += [latex_number(q.get("median"), mc("median"), exponent=e),
                          f"[{_bound(q.get('q05'), e, mc('q05'))}, "
                          f"{_bound(q.get('q95'), e, mc('q95'))}]"]
            else:
                cells += ["--", "--"]
        lines.append("    " + " & ".join(cells) + " \\\\")
    lines += ["    \\bottomrule", "  \\end{tabular}", "\\end{table}", ""]
    return "\n".join(lines)
