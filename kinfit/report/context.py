"""The read-only context the report's sections read (inputs, units, regimes) and the numbering
of their tables and figures; the sections themselves never refit."""

from __future__ import annotations

from collections.abc import Callable, Mapping, Sequence
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd

from kinfit.core.units import parse_header
from kinfit.report import figures as fg
from kinfit.report.content import FACTOR_LABEL, FigureBlock, Table, factor_text, get_path
from kinfit.report.inputs import ReportInputs

__all__ = ["ReportContext"]


def _runs_temperature_unit(study: Any) -> str | None:
    """The unit of the runs table's temperature column as written (None if unreadable)."""

    ref = get_path(getattr(study, "raw", None), "data", "runs")
    if isinstance(ref, Mapping):
        ref = ref.get("file")
    if not isinstance(ref, str):
        return None
    path = Path(study.path).parent / ref
    try:
        if path.suffix.lower() in (".xlsx", ".xls"):
            cols = pd.read_excel(path, nrows=0).columns
        else:
            cols = pd.read_csv(path, nrows=0).columns
        for c in cols:
            h = parse_header(str(c), where=path.name)
            if h.name == "temperature":
                return h.unit
    except Exception:  # noqa: BLE001 - a display preference only; K is the fallback
        return None
    return None


#: a film share at or above this counts as film resistance worth a warning: the 5 % rate error
#: the Carberry criterion allows (Carberry 1976: Ca < 0.05/|n|)


class ReportContext:
    """What every report section reads: the saved inputs (read-only), the units and regimes of
    the fit, and the numbering of tables and figures.

    Parameters
    ----------
    inputs : ReportInputs
    argv : sequence of str, optional
        The report's own command line, for the reproducibility section.
    out_dir : Path, optional
        Where the report goes (for the reproduce command).
    """

    def __init__(self, inputs: ReportInputs, *, argv: Sequence[str] | None = None,
                 out_dir: Path | None = None) -> None:
        self.inp = inputs
        self.res = inputs.result
        self.argv = list(argv) if argv is not None else None
        self.out_dir = out_dir
        self._tables = 0
        self._figures: list[FigureBlock] = []
        self.csv: dict[str, pd.DataFrame] = {}
        self.notes: list[str] = list(inputs.notes)
        self.regimes = {rid: str(r.get("regime", "mixed")) for rid, r in self.res.runs.items()}
        self.units = {n: str(p.get("unit", "")) for n, p in self.res.parameters.items()}
        for name in (self.inp.posterior or {}).get("parameters", {}) or {}:
            self.units.setdefault(name, "mol/m^3" if name == "sigma" else "1")
        self.celsius = _runs_temperature_unit(inputs.study) in ("degC", "°C", "celsius", "C")
        self.varied = tuple(inputs.study.varied_factors())

    def factor_text(self, factor: str, value: float) -> str:
        """A factor's SI value in the unit the reader expects: temperature in °C when the
        runs table gave it in degC, the others as :func:`factor_text`."""
        if factor == "temperature" and self.celsius:
            return f"{float(value) - 273.15:.4g} °C"
        if factor == "catalyst_loading":  # kg/m³ = g/L, the unit a bench chemist writes
            return f"{float(value):.4g} g/L"
        if factor in FACTOR_LABEL:
            _, unit, scale = FACTOR_LABEL[factor]
            return f"{float(value) * scale:.4g} {unit}"
        return factor_text(factor, value)

    @staticmethod
    def shown(value: Any, unit: Any) -> tuple[Any, str]:
        """A value (number, interval or None) and its SI unit as the report shows them:
        energies in kJ/mol, the trade's unit; everything else unchanged. CSV files and JSON
        keep SI."""
        if str(unit) == "J/mol":
            if isinstance(value, int | float) and not isinstance(value, bool):
                return value / 1000.0, "kJ/mol"
            if isinstance(value, list | tuple):
                return [None if v is None else v / 1000.0 for v in value], "kJ/mol"
            return value, "kJ/mol"
        return value, str(unit or "")

    def temperature(self, value: Any, sig: int = 5) -> str:
        """A temperature [K] as the user wrote it (°C when the runs table is in degC)."""
        if not isinstance(value, int | float):
            return "–"
        return (f"{float(value) - 273.15:.{sig - 1}g} °C" if self.celsius
                else f"{float(value):.{sig}g} K")

    # ------------------------------------------------------------------ numbering helpers
    def table(self, caption: str, header: Sequence[str], rows: Sequence[Sequence[str]], *,
              tones: Sequence[Sequence[str | None]] | None = None,
              numeric: Sequence[bool] = (), csv: str | None = None) -> Table:
        """A numbered table."""
        self._tables += 1
        return Table(self._tables, caption, tuple(header), tuple(tuple(r) for r in rows),
                     None if tones is None else tuple(tuple(t) for t in tones),
                     tuple(numeric), csv)

    def figure(self, key: str, caption: str, make: Callable[[], Any], alt: str) -> FigureBlock | None:
        """A numbered figure; a figure that cannot be drawn becomes a note, not a crash."""
        try:
            fig = make()
        except (ValueError, KeyError, IndexError, TypeError, np.linalg.LinAlgError) as exc:
            self.notes.append(f"figure '{key}' was not drawn: {exc}")
            return None
        png, svg = fg.render(fig)
        block = FigureBlock(len(self._figures) + 1, key, caption, png, svg, alt,
                            width_in=float(fig.get_size_inches()[0]))
        self._figures.append(block)
        return block
