"""kinfit: intrinsic kinetics from porous-catalyst campaigns with transport-aware fitting.

The public API (imported lazily, so that the command line starts fast)::

    from kinfit import load_study, ModelSpec, Model, fit, FitOptions, sample_study, diagnose

Physics knows nothing of fitting; estimation knows nothing of chemistry; reports read results
and never refit (see DEVELOPERS.md).
"""

from __future__ import annotations

from importlib import import_module
from typing import Any

__version__ = "0.1.0"

_API = {
    "load_study": "kinfit.study.load",
    "Study": "kinfit.study.load",
    "Run": "kinfit.study.load",
    "ModelSpec": "kinfit.model.compiled",
    "Model": "kinfit.model.compiled",
    "fit": "kinfit.fitting.fit",
    "FitOptions": "kinfit.fitting.fit",
    "FitResult": "kinfit.fitting.results",
    "simulate": "kinfit.model.simulation",
    "sample_study": "kinfit.fitting.posterior",
    "SampleOptions": "kinfit.fitting.posterior",
    "Posterior": "kinfit.estimate.posterior",
    "diagnose": "kinfit.analysis.diagnosis.diagnosis",
    "Thresholds": "kinfit.physics.criteria",
    "build_report": "kinfit.report",
    "KinfitError": "kinfit.errors",
    "StudyError": "kinfit.errors",
    "ModelError": "kinfit.errors",
    "SolverError": "kinfit.errors",
}

__all__ = ["__version__", *_API]


def __getattr__(name: str) -> Any:
    if name in _API:
        return getattr(import_module(_API[name]), name)
    raise AttributeError(f"module 'kinfit' has no attribute '{name}'")


def __dir__() -> list[str]:
    return sorted(__all__)
