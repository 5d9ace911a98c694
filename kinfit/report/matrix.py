"""Sets of runs that differ in one factor only, laid out as a compact matrix: one row per
factor tested (with its levels) and the other varied conditions it was held at, one column per
level of the column factor (temperature when it varies), one short cell per set. The report
uses it for the comparison sets of the campaign and for the model-free tests, so a reader sees
at a glance at which conditions speed or size changes the rate.
"""

from __future__ import annotations

from collections.abc import Callable, Mapping, Sequence
from dataclasses import dataclass
from typing import Any

from kinfit.report.content import FACTOR_LABEL

__all__ = ["SetCell", "Matrix", "set_matrix"]

#: a column for sets that do not hold the column factor (they vary it)
ACROSS = "across levels"


@dataclass(frozen=True)
class SetCell:
    """One set of runs: the factor it varies, its levels, the other factors held (SI) and the
    cell's text, tone and footnote (what lies behind the cell)."""

    factor: str
    values: tuple[float, ...]
    fixed: Mapping[str, float]
    text: str
    tone: str | None = None
    note: str = ""


@dataclass(frozen=True)
class Matrix:
    """Header, rows and per-cell tones for a :class:`~kinfit.report.content.Table`, and the
    footnotes ``(row label, column label, note)`` of the filled cells, in row order."""

    header: tuple[str, ...]
    rows: tuple[tuple[str, ...], ...]
    tones: tuple[tuple[str | None, ...], ...]
    notes: tuple[tuple[str, str, str], ...]


def _key(factor: str, value: Any) -> Any:
    """A level rounded to 4 significant digits, so levels equal within 0.1 % share a column."""
    try:
        return (factor, float(f"{float(value):.4g}"))
    except (TypeError, ValueError):
        return (factor, str(value))


def _levels(texts: Sequence[str]) -> str:
    """``["300 rpm", "1200 rpm"]`` -> ``"300 vs 1200 rpm"`` (the unit once when shared)."""
    units = {t.partition(" ")[2] for t in texts}
    if len(units) == 1 and next(iter(units)):
        unit = next(iter(units))
        return " vs ".join(t.partition(" ")[0] for t in texts) + f" {unit}"
    return " vs ".join(texts)


def set_matrix(cells: Sequence[SetCell], varied: Sequence[str],
               text: Callable[[str, float], str], *, column: str = "temperature",
               empty: str = "·") -> Matrix:
    """Lay out ``cells`` as rows (factor and levels, other varied conditions held) by columns
    (levels of ``column`` held constant; :data:`ACROSS` for sets varying it).

    Parameters
    ----------
    cells : sequence of SetCell
    varied : sequence of str
        Factors that vary in the campaign; only these are named in the "held at" column.
    text : callable
        ``text(factor, si_value)`` -> display string with unit.
    column : str
        Factor whose held levels give the columns; when it does not vary there is one column.
    empty : str
        Text of a cell with no set.
    """
    use_col = column in varied
    col_keys: dict[Any, str] = {}
    row_keys: dict[Any, tuple[str, str]] = {}
    grid: dict[tuple[Any, Any], SetCell] = {}
    for c in cells:
        if use_col and column in c.fixed:
            ck = _key(column, c.fixed[column])
            col_keys.setdefault(ck, text(column, c.fixed[column]))
        else:
            ck = ("", ACROSS if use_col else "")
            col_keys.setdefault(ck, ACROSS if use_col else "result")
        levels = _levels([text(c.factor, v) if c.factor in FACTOR_LABEL else str(v)
                          for v in c.values])
        held = [(f, c.fixed[f]) for f in varied
                if f in c.fixed and f != c.factor and not (use_col and f == column)]
        rk = (c.factor, tuple(_key(c.factor, v) for v in c.values),
              tuple(_key(f, v) for f, v in held))
        label = f"{FACTOR_LABEL.get(c.factor, (c.factor,))[0]} {levels}"
        row_keys.setdefault(rk, (label, ", ".join(text(f, v) for f, v in held) or "–"))
        grid.setdefault((rk, ck), c)
    cols = sorted(col_keys, key=lambda k: (k[0] == "", k))
    order = {f: i for i, f in enumerate(FACTOR_LABEL)}
    rks = sorted(row_keys, key=lambda k: (order.get(k[0], 99), k[1], k[2]))
    header = ("factor varied", "others held at", *(col_keys[k] for k in cols))
    rows, tones, notes = [], [], []
    for rk in rks:
        label, held = row_keys[rk]
        row, tone = [label, held], [None, None]
        for ck in cols:
            c = grid.get((rk, ck))
            row.append(empty if c is None else c.text)
            tone.append(None if c is None else c.tone)
            if c is not None and c.note:
                notes.append((f"{label}, {held}" if held != "–" else label, col_keys[ck],
                              c.note))
        rows.append(tuple(row))
        tones.append(tuple(tone))
    return Matrix(tuple(header), tuple(rows), tuple(tones), tuple(notes))
