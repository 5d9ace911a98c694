"""Publication-grade, reproducible reports of a saved fit (``kinfit report``; :mod:`kinfit.report.build`).

One builder (:mod:`kinfit.report.builder`) turns the saved results, and the posterior and the
diagnosis when present, into sections once; :mod:`kinfit.report.render` writes them as a
self-contained HTML file and as Markdown; :mod:`kinfit.report.figures` draws the figures;
:mod:`kinfit.report.latex` writes the parameter table for a manuscript. Reports read results and
never refit.
"""

from __future__ import annotations

from kinfit.report.build import ReportResult, build_report

__all__ = ["ReportResult", "build_report"]
