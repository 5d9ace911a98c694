"""The report's model-adequacy section (from ``fit.adequacy`` in results.json and ``adequacy``
in posterior.json) and the warning the summary carries, before the estimates, when a test
fails. Nothing is recomputed here.
"""

from __future__ import annotations

from collections.abc import Mapping
from typing import TYPE_CHECKING, Any

from kinfit.report.content import FACTOR_LABEL, Items, Section, Text, fmt, fmt_p

if TYPE_CHECKING:
    from kinfit.report.builder import ReportBuilder

__all__ = ["adequacy_section", "adequacy_summary"]

_TEST_WORDS = {
    "residual_scale": "residual scale against the stated noise (chi-square)",
    "lack_of_fit": "lack of fit against pure error (F)",
    "serial": "serial structure within runs (runs test, Fisher)",
    "trend": "trend of run-mean residuals",
}


def _failed(block: Mapping[str, Any] | None) -> bool:
    return block is not None and block.get("adequate") is False


def adequacy_summary(fit: Mapping[str, Any], posterior: Mapping[str, Any] | None
                     ) -> list[Any]:
    """Blocks for the summary: a warning when a least-squares or posterior predictive test
    fails (empty list otherwise)."""
    blocks: list[Any] = []
    for label, block in (("least-squares", fit.get("adequacy")),
                         ("posterior predictive", (posterior or {}).get("adequacy"))):
        if block is not None and _failed(block):
            blocks.append(Text(
                f"The data reject the model ({label} adequacy tests): the intervals below "
                "hold only if the model is right. " + "; ".join(block.get("failed") or [])
                + ". See the section on model adequacy.", "warning"))
    return blocks


def _rows(block: Mapping[str, Any]) -> list[list[str]]:
    rows = []
    for t in block.get("tests", []):
        factor = t.get("factor")
        what = _TEST_WORDS.get(t.get("name", ""), t.get("name", ""))
        if factor:
            what += f" with {FACTOR_LABEL.get(factor, (factor,))[0]}"
        if t.get("subset"):
            what += f", {t['subset']}"
        rows.append([what, fmt(t.get("statistic")), fmt_p(t.get("p")),
                     "fails" if t.get("rejected") else "passes"])
    return rows


def adequacy_section(b: ReportBuilder) -> Section:
    """Always present: every test with its statistic, p-value and verdict, and the rule."""
    blocks: list[Any] = []
    for label, block in (("Least squares", b.res.fit.get("adequacy")),
                         ("Posterior predictive", (b.inp.posterior or {}).get("adequacy"))):
        if not block:
            if label == "Least squares":
                blocks.append(Text("These results carry no adequacy tests (written by an "
                                   "older kinfit); refit to get them.", "note"))
            continue
        tone = "warning" if _failed(block) else "ok"
        blocks.append(Text(f"{label}: {block.get('message', '')}", tone))
        rows = _rows(block)
        if rows:
            tones = [[None, None, None, "fail" if r[3] == "fails" else "ok"] for r in rows]
            blocks.append(b.table(f"{label} adequacy tests ({block.get('rule', '')})",
                                  ["test", "statistic", "p", "verdict"], rows, tones=tones,
                                  numeric=[False, True, True, False]))
        notes = [f"noise: {block['noise']}"] if block.get("noise") else []
        if block.get("method"):
            notes.append(str(block["method"]))
        if notes:
            blocks.append(Items(tuple(notes), "note"))
    blocks.append(Text(
        "Tests: residual scale against a stated noise (chi-square on n - p degrees of "
        "freedom); lack of fit against pure error where replicates exist (Draper & Smith "
        "1998, ch. 2); Wald-Wolfowitz runs test of residual signs within each run (exact "
        "mid-p), combined over runs by Fisher's method; ordinary least-squares slopes of "
        "run-mean standardised residuals on each factor, overall and within the pore- and "
        "film-affected runs (stratified by stirrer speed and particle size). Posterior "
        "predictive p-values follow Gelman et al. (2013, ch. 6).", "plain"))
    return Section("adequacy", "Model adequacy", tuple(blocks))
