"""The report's content model: sections made of a few kinds of block (text, list, facts,
equation, table, figure, code), built once and rendered to Markdown and HTML alike; and the
number formatting both renderings share.
"""

from __future__ import annotations

import math
from collections.abc import Mapping, Sequence
from dataclasses import dataclass, field
from typing import Any

import pandas as pd

__all__ = ["Text", "Items", "Details", "Facts", "Heading", "Equation", "Table", "FigureBlock",
           "Code", "Section", "Report", "fmt", "fmt_interval", "fmt_mc", "fmt_interval_mc", "fmt_p",
           "TONES", "FACTOR_LABEL",
           "CRITERIA_KEYS", "factor_text", "get_path"]

#: tones a block or cell may carry; renderers style them (warning, good news, regime labels)
TONES = ("plain", "note", "warning", "ok", "fail", "kinetic", "film", "pore", "mixed")
_SUPERSCRIPT = str.maketrans("0123456789-", "⁰¹²³⁴⁵⁶⁷⁸⁹⁻")


@dataclass(frozen=True)
class Text:
    """A paragraph."""

    text: str
    tone: str = "plain"
    kind: str = "text"


@dataclass(frozen=True)
class Items:
    """A bulleted list."""

    items: tuple[str, ...]
    tone: str = "plain"
    kind: str = "items"


@dataclass(frozen=True)
class Details:
    """A list folded behind a one-line summary (HTML ``<details>``; a list in Markdown)."""

    summary: str
    items: tuple[str, ...]
    kind: str = "details"


@dataclass(frozen=True)
class Facts:
    """Label-value pairs (a definition list)."""

    pairs: tuple[tuple[str, str], ...]
    kind: str = "facts"


@dataclass(frozen=True)
class Heading:
    """A sub-heading inside a section."""

    text: str
    kind: str = "heading"


@dataclass(frozen=True)
class Equation:
    """A displayed equation in mathtext (a subset of LaTeX) with what it states."""

    latex: str
    what: str
    kind: str = "equation"


@dataclass(frozen=True)
class Table:
    """A numbered table of display strings.

    Attributes
    ----------
    number : int
    caption : str
    header : tuple of str
    rows : tuple of tuple of str
    tones : tuple of tuple of str or None
        Per cell tone (see :data:`TONES`), same shape as ``rows``; ``None`` for none.
    numeric : tuple of bool
        Columns to right-align.
    csv : str or None
        File name of the CSV that holds the same numbers unrounded.
    """

    number: int
    caption: str
    header: tuple[str, ...]
    rows: tuple[tuple[str, ...], ...]
    tones: tuple[tuple[str | None, ...], ...] | None = None
    numeric: tuple[bool, ...] = ()
    csv: str | None = None
    kind: str = "table"

    def cell_tone(self, i: int, j: int) -> str | None:
        """Tone of cell (i, j)."""
        if self.tones is None:
            return None
        return self.tones[i][j]

    def is_numeric(self, j: int) -> bool:
        """Whether column j is right-aligned."""
        return bool(self.numeric[j]) if j < len(self.numeric) else False


@dataclass(frozen=True)
class FigureBlock:
    """A numbered figure with its PNG and SVG renderings; ``width_in`` is its drawn width in
    inches (the HTML shows it at that size, so lettering keeps its point size)."""

    number: int
    key: str
    caption: str
    png: bytes
    svg: str
    alt: str
    width_in: float = 7.0
    kind: str = "figure"


@dataclass(frozen=True)
class Code:
    """Preformatted text (commands, hashes)."""

    text: str
    caption: str = ""
    kind: str = "code"


Block = Text | Items | Facts | Heading | Equation | Table | FigureBlock | Code


@dataclass(frozen=True)
class Section:
    """A numbered section of the report."""

    key: str
    title: str
    blocks: tuple[Any, ...]


@dataclass(frozen=True)
class Report:
    """The whole report, ready to render.

    Attributes
    ----------
    title, subtitle : str
    status_ok : bool
        Whether the fit converged (the banner's colour).
    status : str
        One line on the fit's state.
    sections : tuple of Section
    figures : tuple of FigureBlock
        Every figure, in order.
    csv : dict
        File name -> DataFrame for the tables written as CSV.
    latex : str
        parameters.tex.
    notes : tuple of str
        Sections or figures left out and why.
    """

    title: str
    subtitle: str
    status_ok: bool
    status: str
    sections: tuple[Section, ...]
    figures: tuple[FigureBlock, ...]
    csv: dict[str, pd.DataFrame] = field(default_factory=dict)
    latex: str = ""
    notes: tuple[str, ...] = ()


# ---------------------------------------------------------------------------------- numbers
def fmt(value: Any, sig: int = 4) -> str:
    """A number with ``sig`` significant digits, in scientific form (``1.23×10⁻⁴``) outside
    [1e-3, 1e5); ``–`` for missing or NaN."""
    if value is None:
        return "–"
    if isinstance(value, bool):
        return "yes" if value else "no"
    try:
        f = float(value)
    except (TypeError, ValueError):
        return str(value)
    if math.isnan(f):
        return "–"
    if math.isinf(f):
        return "∞" if f > 0 else "−∞"
    if f == 0:
        return "0"
    e = math.floor(math.log10(abs(f)))
    if -3 <= e < 5:
        decimals = max(sig - 1 - e, 0)
        text = f"{f:.{decimals}f}"
    else:
        m = f / 10**e
        mant = f"{m:.{sig - 1}f}"
        if mant.lstrip("-").startswith("10"):
            e += 1
            mant = f"{f / 10**e:.{sig - 1}f}"
        text = f"{mant}×10{str(e).translate(_SUPERSCRIPT)}"
    return text.replace("-", "−") if text.startswith("-") else text


def fmt_interval(pair: Sequence[Any] | None, sig: int = 4) -> str:
    """``[lo, hi]``; an open end (None) is written ``open``; no interval is ``–``."""
    if pair is None or len(pair) != 2:
        return "–"
    lo = "open" if pair[0] is None else fmt(pair[0], sig)
    hi = "open" if pair[1] is None else fmt(pair[1], sig)
    return f"[{lo}, {hi}]"


def fmt_mc(value: Any, mcse: Any, default: int = 4) -> str:
    """A posterior summary to the digits its Monte Carlo standard error supports
    (:func:`kinfit.estimate.convergence.supported_digits`: last digit the power of ten at or
    above 2 MCSE, 2 to 6 significant digits); ``default`` digits when no MCSE is given."""
    from kinfit.estimate.convergence import supported_digits

    try:
        sig = supported_digits(value, mcse)
    except (TypeError, ValueError):
        sig = None
    if sig is None:
        return fmt(value, default)
    # rounded first, so that digits left of the point beyond ``sig`` print as zeros
    return fmt(float(f"{float(value):.{sig - 1}e}"), sig)


def fmt_interval_mc(pair: Sequence[Any] | None, mcse: Sequence[Any] | None,
                    default: int = 4) -> str:
    """``[lo, hi]`` with each end to the digits its own MCSE supports (see :func:`fmt_mc`)."""
    if pair is None or len(pair) != 2:
        return "–"
    se = list(mcse) if mcse is not None and len(mcse) == 2 else [None, None]
    ends = ["open" if v is None else fmt_mc(v, s, default) for v, s in zip(pair, se, strict=True)]
    return f"[{ends[0]}, {ends[1]}]"


def fmt_p(p: Any) -> str:
    """A p-value: three significant digits, ``< 1×10⁻⁶`` below that."""
    if p is None:
        return "–"
    try:
        f = float(p)
    except (TypeError, ValueError):
        return str(p)
    if math.isnan(f):
        return "–"
    return "< 1×10⁻⁶" if f < 1e-6 else fmt(f, 3)


# ---------------------------------------------------------------------------------- campaign
#: factor -> (words, display unit, factor from SI to the display unit)
FACTOR_LABEL = {
    "temperature": ("temperature", "K", 1.0), "stirrer_speed": ("stirrer speed", "rpm", 60.0),
    "particle_diameter": ("particle diameter", "µm", 1e6),
    "catalyst_loading": ("catalyst loading", "kg/m³", 1.0),
    "initial_concentration": ("initial concentration", "mol/m³", 1.0),
}
#: per-run criteria of the results contract, in table order, with their symbols
CRITERIA_KEYS = (("thiele_modulus", "Φ"), ("effectiveness_factor", "η"),
                 ("weisz_prater", "Ψ_L"), ("mears", "Mears"), ("carberry", "Ca"))


def factor_text(factor: str, value: float) -> str:
    """A factor's SI value in its display unit: ``factor_text("stirrer_speed", 10.0)`` ->
    ``600.0 rpm``."""
    _, unit, scale = FACTOR_LABEL[factor]
    return f"{fmt(value * scale, 4)} {unit}"


def get_path(d: Any, *keys: str, default: Any = None) -> Any:
    """Nested ``.get`` that tolerates missing levels and non-mapping values (for files whose
    writers may change)."""
    for k in keys:
        if not isinstance(d, Mapping):
            return default
        d = d.get(k)
        if d is None:
            return default
    return d
