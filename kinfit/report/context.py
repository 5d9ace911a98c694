"""The read-only context the report's sections read (inputs, units, regimes) and the numbering
of their tables and figures; the sections themselves never refit."""

from __future__ import annotations

from collections.abc import Callable, Sequence
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd

from kinfit.report import figures as fg
from kinfit.report.content import FigureBlock, Table
from kinfit.report.inputs import ReportInputs

__all__ = ["ReportContext"]


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
