"""``kinfit report``: build the report of a saved fit and write it (HTML, Markdown, figures as
PNG and SVG, tables as CSV, the parameter table as LaTeX, and the report's own manifest), every
file atomically. The command line registers :func:`add_report_arguments` and calls
:func:`run_report_command`; notebooks call :func:`build_report`.
"""

from __future__ import annotations

import argparse
import sys
from collections.abc import Sequence
from dataclasses import dataclass
from pathlib import Path
from typing import TYPE_CHECKING

if TYPE_CHECKING:  # the heavy modules load when a report is built, not when the CLI starts
    from kinfit.report.content import Report
    from kinfit.study import Study

__all__ = ["ReportResult", "build_report", "add_report_arguments", "run_report_command"]


@dataclass(frozen=True)
class ReportResult:
    """What ``build_report`` wrote.

    Attributes
    ----------
    out_dir : Path
    html : Path
        report.html, self-contained.
    markdown : Path
        report.md (figures linked from ``figures/``).
    figures : tuple of Path
        PNG and SVG files in ``figures/``.
    tables : tuple of Path
        parameters.csv, runs.csv, correlation.csv, comparison.csv (those with data).
    latex : Path
        parameters.tex.
    manifest : Path
        report_manifest.json: the files read with their digests, versions, command line.
    notes : tuple of str
        Sections or figures left out, and why.
    report : Report
        The built content.
    """

    out_dir: Path
    html: Path
    markdown: Path
    figures: tuple[Path, ...]
    tables: tuple[Path, ...]
    latex: Path
    manifest: Path
    notes: tuple[str, ...]
    report: Report

    @property
    def paths(self) -> tuple[Path, ...]:
        """Every file written."""
        return (self.html, self.markdown, *self.figures, *self.tables, self.latex,
                self.manifest)


def build_report(study: Study | str | Path, fit_dir: str | Path, out_dir: str | Path, *,
                 argv: Sequence[str] | None = None) -> ReportResult:
    """Build the report of a saved fit from its folder, without refitting.

    Parameters
    ----------
    study : Study or path
        The study (or its TOML file) the fit was made from.
    fit_dir : path
        Folder of ``kinfit fit`` (results.json, predictions.csv) and, when present, of
        ``kinfit sample`` (posterior.json, posterior_draws.csv, posterior_bands.csv) and of
        the diagnosis (diagnosis.json).
    out_dir : path
        Output folder (created); may be ``fit_dir``.
    argv : sequence of str, optional
        The command line, recorded in the report and its manifest.

    Returns
    -------
    ReportResult

    Raises
    ------
    StudyError
        No results in ``fit_dir``, results of another study, an unreadable file, or an output
        folder that cannot be created.

    Examples
    --------
    >>> build_report("examples/demo/study.toml", "reports/demo", "reports/demo")  # doctest: +SKIP
    """
    from kinfit.outputs import (
        manifest,
        prepare_out_dir,
        recorded_path,
        write_bytes_atomic,
        write_frame_atomic,
        write_json_atomic,
        write_text_atomic,
    )
    from kinfit.report.builder import build_content
    from kinfit.report.inputs import load_inputs
    from kinfit.report.render import FIGURE_DIR, to_html, to_markdown

    inputs = load_inputs(study, fit_dir)
    out = prepare_out_dir(out_dir)
    report = build_content(inputs, argv=argv, out_dir=out)
    figures = []
    for fig in report.figures:
        figures.append(write_bytes_atomic(out / FIGURE_DIR / f"{fig.key}.png", fig.png))
        figures.append(write_text_atomic(out / FIGURE_DIR / f"{fig.key}.svg", fig.svg))
    tables = [write_frame_atomic(out / name, frame) for name, frame in report.csv.items()]
    latex = write_text_atomic(out / "parameters.tex", report.latex)
    markdown = write_text_atomic(out / "report.md", to_markdown(report))
    html = write_text_atomic(out / "report.html", to_html(report))
    man = manifest(files={str(Path(inputs.fit_dir) / k): v
                          for k, v in inputs.input_hashes.items()},
                   seed=inputs.result.manifest.get("seed"), argv=argv, base=inputs.study.path,
                   extra={"study": recorded_path(inputs.study.path, inputs.study.path),
                          "notes": list(report.notes),
                          "written": [str(p.relative_to(out)) for p in
                                      (html, markdown, *figures, *tables, latex)]})
    man_path = write_json_atomic(out / "report_manifest.json", man)
    return ReportResult(out_dir=out, html=html, markdown=markdown, figures=tuple(figures),
                        tables=tuple(tables), latex=latex, manifest=man_path,
                        notes=report.notes, report=report)


def add_report_arguments(parser: argparse.ArgumentParser) -> None:
    """Arguments of ``kinfit report STUDY [--fit DIR] --out DIR``."""
    parser.add_argument("study", type=Path, help="the study file (TOML) the fit was made from")
    parser.add_argument("--fit", type=Path, default=None, metavar="DIR",
                        help="folder with results.json from 'kinfit fit' (default: --out)")
    parser.add_argument("--out", type=Path, default=Path("reports"), metavar="DIR",
                        help="output folder of the report (default: reports)")
    parser.add_argument("--allow-changed-data", action="store_true",
                        help="write the report even though the study's files changed since "
                             "the fit (the report then says so)")


def _refuse_changed_data(study_path: Path, fit_dir: Path, *, allow: bool) -> None:
    """Bad input (exit 2): a report would show results of other data than the study names."""
    from kinfit.errors import StudyError
    from kinfit.freshness import changed_inputs
    from kinfit.results import FitResult
    from kinfit.study import load_study

    changed = changed_inputs(load_study(study_path), FitResult.load(fit_dir).manifest)
    if changed and not allow:
        raise StudyError(f"{', '.join(changed)} changed since the fit in {fit_dir}, so the "
                         "report would show results of other data; refit with 'kinfit fit "
                         f"{study_path} --out {fit_dir}', or pass --allow-changed-data")


def run_report_command(args: argparse.Namespace) -> int:
    """Run ``kinfit report`` from parsed arguments; returns the exit code (0 when the report
    was written; errors of input raise StudyError, which the command line maps to exit 2)."""
    from kinfit.report.render import FIGURE_DIR

    fit_dir = args.fit if args.fit is not None else args.out
    _refuse_changed_data(args.study, fit_dir, allow=args.allow_changed_data)
    result = build_report(args.study, fit_dir, args.out, argv=sys.argv)
    print(f"wrote {result.html}, {result.markdown}, {len(result.figures)} figure files in "
          f"{result.out_dir / FIGURE_DIR}, {len(result.tables)} CSV tables, {result.latex.name}")
    for note in result.notes:
        print(f"kinfit: note: {note}", file=sys.stderr)
    if not result.report.status_ok:
        print("kinfit: the report documents a fit that did not converge", file=sys.stderr)
    return 0
