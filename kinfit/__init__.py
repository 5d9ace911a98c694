"""kinfit: intrinsic kinetics from porous-catalyst campaigns with transport-aware fitting.

The public API::

    from kinfit import load_study, ModelSpec, Model, fit, FitOptions, sample_study, diagnose

Physics knows nothing of fitting; estimation knows nothing of chemistry; reports read results
and never refit. The package is built in floors, each importing only from those below:
core, physics, estimate, study, model, fitting, analysis, report, and the command line on top
(see DEVELOPERS.md).
"""

from __future__ import annotations

from kinfit.analysis.diagnosis.diagnosis import diagnose
from kinfit.core.version import __version__
from kinfit.errors import KinfitError, ModelError, SolverError, StudyError
from kinfit.estimate.posterior import Posterior
from kinfit.fitting.fit import FitOptions, fit
from kinfit.fitting.posterior import SampleOptions, sample_study
from kinfit.fitting.results import FitResult
from kinfit.model.compiled import Model, ModelSpec
from kinfit.model.simulation import simulate
from kinfit.physics.criteria import Thresholds
from kinfit.report.build import build_report
from kinfit.study.load import load_study
from kinfit.study.runs import Run, Study

__all__ = [
    "__version__", "load_study", "Study", "Run", "ModelSpec", "Model", "fit", "FitOptions",
    "FitResult", "simulate", "sample_study", "SampleOptions", "Posterior", "diagnose",
    "Thresholds", "build_report", "KinfitError", "StudyError", "ModelError", "SolverError",
]
