"""Immutable, JSON-serialisable fit results: kinfit's results contract (README).

A :class:`FitResult` holds plain data only (dicts of floats and strings, and a predictions
table); it never re-runs a computation. ``to_dict()`` is field for field what
``results.json`` holds, and :meth:`FitResult.load` reads a saved file back, so reports and
other tools work from saved results.
"""

from __future__ import annotations

import hashlib
import json
from collections.abc import Mapping
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import lmfit
import numpy as np
import pandas as pd

from kinfit.errors import StudyError
from kinfit.lmfit_bridge import to_lmfit_parameters

__all__ = ["FitResult", "Estimates", "RESULTS_VERSION"]

RESULTS_VERSION = 1


class Estimates(dict):  # type: ignore[type-arg]
    """Parameter name -> estimate (SI); calling it returns a plain copy, so code written for
    the former method ``FitResult.estimates()`` keeps working."""

    def __call__(self) -> dict[str, float]:
        return dict(self)


@dataclass(frozen=True)
class FitResult:
    """The outcome of ``kinfit fit``.

    Attributes
    ----------
    study : str
        Study name.
    model : dict
        The model choices: rate law and options, film model, pellet mode, geometry, reactor,
        error model, and the equations in words.
    parameters : dict
        name -> {estimate, unit, stderr, ci95, ci_method, vary, ...} for every parameter
        (fixed ones with ``vary = False`` and no interval).
    runs : dict
        run id -> per-run criteria and regime at the estimate.
    fit : dict
        converged, n_obs, n_params, sse, aic, aicc, bic, message and more.
    correlation : dict
        ``names`` and ``matrix`` of the varying parameters.
    identifiability : list of dict
        Warnings, each with ``kind``, ``parameters`` and ``message`` in the trade's words.
    comparison : list of dict
        Model-comparison rows when candidates were fitted.
    manifest : dict
        Input hashes, versions, seed, command line.
    predictions : DataFrame
        Per observation: run, time, observed, fitted, residual and the transport state.
    """

    study: str
    model: Mapping[str, Any]
    parameters: Mapping[str, Mapping[str, Any]]
    runs: Mapping[str, Mapping[str, Any]]
    fit: Mapping[str, Any]
    correlation: Mapping[str, Any]
    identifiability: tuple[Mapping[str, Any], ...] = ()
    comparison: tuple[Mapping[str, Any], ...] = ()
    manifest: Mapping[str, Any] = field(default_factory=dict)
    predictions: pd.DataFrame | None = None
    extras: Mapping[str, Any] = field(default_factory=dict)

    @property
    def converged(self) -> bool:
        """Whether the optimiser converged."""
        return bool(self.fit.get("converged"))

    @property
    def estimates(self) -> Estimates:
        """Parameter (column) name -> estimate (SI). ``result.estimates()``, the former method
        form, still works and returns a plain dict."""
        return Estimates({k: float(v["estimate"]) for k, v in self.parameters.items()})

    def to_parameters(self) -> lmfit.Parameters:
        """The estimates as :class:`lmfit.Parameters`: values, bounds, vary flags, standard
        errors (``stderr``) and correlations (``correl``), SI units in ``user_data``."""
        return to_lmfit_parameters(self.parameters, self.correlation)

    def to_dict(self) -> dict[str, Any]:
        """Plain-Python content of results.json."""
        from kinfit.outputs import to_plain

        return to_plain({
            "kinfit_results": RESULTS_VERSION,
            "study": self.study,
            "model": self.model,
            "parameters": self.parameters,
            "runs": self.runs,
            "fit": self.fit,
            "correlation": self.correlation,
            "identifiability": list(self.identifiability),
            "comparison": list(self.comparison),
            "manifest": self.manifest,
            **({"extras": self.extras} if self.extras else {}),
        })

    def to_frame(self) -> pd.DataFrame:
        """Parameters as a table."""
        rows = []
        for name, p in self.parameters.items():
            ci = p.get("ci95") or [None, None]
            rows.append({"parameter": name, "estimate": p["estimate"], "unit": p["unit"],
                         "stderr": p.get("stderr"), "ci95_lo": ci[0], "ci95_hi": ci[1],
                         "ci_method": p.get("ci_method"), "vary": p["vary"]})
        return pd.DataFrame(rows)

    def save(self, folder: str | Path) -> Path:
        """Write predictions.csv (when present), then results.json, each atomically.

        results.json records the SHA-256 of the predictions.csv written with it
        (``manifest.outputs``), so that :meth:`load` can tell a matching pair from a
        predictions file left by another run or by an interruption between the two writes.
        """
        from kinfit.outputs import write_frame_atomic, write_json_atomic

        folder = Path(folder)
        outputs: dict[str, Any] = {}
        if self.predictions is not None:
            pred = write_frame_atomic(folder / PREDICTIONS_FILE, self.predictions)
            outputs[PREDICTIONS_FILE] = {"sha256": hashlib.sha256(pred.read_bytes()).hexdigest()}
        content = self.to_dict()
        content["manifest"] = {**dict(content.get("manifest") or {}), "outputs": outputs}
        return write_json_atomic(folder / "results.json", content)

    @classmethod
    def load(cls, folder: str | Path) -> FitResult:
        """Read a saved result (results.json, and predictions.csv when present)."""
        folder = Path(folder)
        path = folder / "results.json" if folder.is_dir() else folder
        if not path.is_file():
            raise StudyError(f"no results at '{path}'; run 'kinfit fit STUDY --out {folder}' "
                             "first")
        try:
            data = json.loads(path.read_text(encoding="utf-8"))
        except json.JSONDecodeError as exc:
            raise StudyError(f"{path}: not valid JSON ({exc.msg}, line {exc.lineno})") from None
        for key in ("parameters", "runs", "fit"):
            if key not in data:
                raise StudyError(f"{path}: not a kinfit results file (no '{key}')")
        pred = _matching_predictions(path, data.get("manifest") or {})
        return cls(
            study=data.get("study", ""), model=data.get("model", {}),
            parameters=data["parameters"], runs=data["runs"], fit=data["fit"],
            correlation=data.get("correlation", {}),
            identifiability=tuple(data.get("identifiability", ())),
            comparison=tuple(data.get("comparison", ())), manifest=data.get("manifest", {}),
            predictions=pred, extras=data.get("extras", {}),
        )

    # ------------------------------------------------------------------ text report
    def report(self, *, correlation_cutoff: float = 0.9) -> str:
        """Console summary: statistics, estimates with 95 % intervals, large correlations,
        identifiability warnings and the per-run regime."""
        f = self.fit
        lines = [f"fit of study '{self.study}' ({self.model.get('label', '')})"]
        state = "converged" if f.get("converged") else "DID NOT CONVERGE"
        lines.append(f"  {state}: {f.get('message', '')}")
        lines.append(
            f"  n_obs {f.get('n_obs')}, n_params {f.get('n_params')}, SSE {f.get('sse'):.6g}, "
            f"sigma {f.get('sigma', float('nan')):.4g}, AICc {f.get('aicc', float('nan')):.6g}, "
            f"BIC {f.get('bic', float('nan')):.6g}, function evaluations {f.get('nfev')}"
        )
        if f.get("n_starts", 1) > 1:
            lines.append(f"  multistart: {f.get('n_starts')} starts, "
                         f"{f.get('n_distinct_optima')} distinct optima")
        lines.append("")
        lines.append(f"  {'parameter':<28}{'estimate':>13}  {'unit':<12}{'stderr':>11}"
                     f"   95 % interval (method)")
        for name, p in self.parameters.items():
            if not p["vary"]:
                lines.append(f"  {name:<28}{p['estimate']:>13.6g}  {p['unit']:<12}"
                             f"{'fixed':>11}")
                continue
            ci = p.get("ci95") or [float("nan")] * 2
            lo = "open" if ci[0] is None else f"{ci[0]:.5g}"
            hi = "open" if ci[1] is None else f"{ci[1]:.5g}"
            se = p.get("stderr")
            lines.append(f"  {name:<28}{p['estimate']:>13.6g}  {p['unit']:<12}"
                         f"{(se if se is not None else float('nan')):>11.3g}   [{lo}, {hi}] "
                         f"({p.get('ci_method', 'linear')})")
        corr = self.correlation
        names, mat = corr.get("names", []), np.asarray(corr.get("matrix", []), dtype=float)
        pairs = []
        for i in range(len(names)):
            for j in range(i + 1, len(names)):
                if np.isfinite(mat[i, j]) and abs(mat[i, j]) > correlation_cutoff:
                    pairs.append((abs(mat[i, j]), names[i], names[j], mat[i, j]))
        lines.append("")
        if pairs:
            lines.append(f"  correlations above {correlation_cutoff}:")
            for _, a, b, c in sorted(pairs, reverse=True):
                lines.append(f"    {a} ~ {b}: {c:+.3f}")
        else:
            lines.append(f"  no correlation above {correlation_cutoff}")
        if self.identifiability:
            lines.append("")
            lines.append("  identifiability:")
            for w in self.identifiability:
                lines.append(f"    - {w['message']}")
        lines.append("")
        lines.append(f"  {'run':<10}{'regime':<9}{'eta':>8}{'Thiele':>9}{'W-P':>10}{'Carberry':>10}"
                     f"{'Mears':>9}  intrinsic")
        for rid, r in self.runs.items():
            lines.append(f"  {rid:<10}{r['regime']:<9}{r['effectiveness_factor']:>8.3f}"
                         f"{r['thiele_modulus']:>9.3g}{r['weisz_prater']:>10.3g}"
                         f"{r['carberry']:>10.3g}{r['mears']:>9.3g}  "
                         f"{'yes' if r.get('intrinsic') else 'no'}")
        if self.comparison:
            lines.append("")
            lines.append(f"  {'model':<36}{'SSE':>12}{'AICc':>12}{'BIC':>12}{'weight':>9}")
            for row in self.comparison:
                lines.append(f"  {row['model']:<36}{row['sse']:>12.5g}{row['aicc']:>12.5g}"
                             f"{row['bic']:>12.5g}{row['akaike_weight']:>9.3f}")
        return "\n".join(lines)


#: The per-observation table saved beside results.json.
PREDICTIONS_FILE = "predictions.csv"


def _matching_predictions(path: Path, manifest: Mapping[str, Any]) -> pd.DataFrame | None:
    """predictions.csv beside ``path`` when it belongs to that results.json, else None.

    Results written before the pairing was recorded (no ``manifest.outputs``) take the file
    as it is. A file whose hash differs from the recorded one raises :class:`StudyError`.
    """
    pred_path = path.parent / PREDICTIONS_FILE
    outputs = manifest.get("outputs")
    if outputs is None:
        return pd.read_csv(pred_path) if pred_path.is_file() else None
    entry = outputs.get(PREDICTIONS_FILE) if isinstance(outputs, Mapping) else None
    if entry is None or not pred_path.is_file():
        return None
    digest = hashlib.sha256(pred_path.read_bytes()).hexdigest()
    if digest != entry.get("sha256"):
        raise StudyError(
            f"{pred_path} does not belong to {path.name} beside it (its SHA-256 differs from "
            "the one recorded there): it was written by another run, or a run was interrupted "
            "between the two files; rerun 'kinfit fit' into this folder"
        )
    return pd.read_csv(pred_path)
