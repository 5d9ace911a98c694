"""Nothing lost: an interrupted bootstrap keeps the replicates it finished and says so, and a
results file is read only with the predictions written with it.

Behaviour checks of kinfit's own promises (README: exit codes, nothing lost); no outside
source applies. The decay data are invented."""

from __future__ import annotations

import numpy as np

from kinfit.estimate.least_squares import fit_problem
from kinfit.estimate.problem import Problem, Space
from kinfit.estimate.bootstrap import bootstrap


class InterruptAfter:
    """A first-order decay predictor that raises KeyboardInterrupt after ``calls`` calls,
    as Ctrl-C would in the middle of a long bootstrap."""

    def __init__(self, t, calls):
        self.t, self.calls, self.armed = t, calls, False

    def __call__(self, theta):
        if self.armed:
            self.calls -= 1
            if self.calls < 0:
                raise KeyboardInterrupt
        return theta[:, :1] * np.exp(-theta[:, 1:2] * self.t[None, :])


def test_interrupted_bootstrap_keeps_finished_replicates():
    rng = np.random.default_rng(3)
    t = np.linspace(0.0, 5.0, 30)
    y = 2.0 * np.exp(-0.7 * t) + rng.normal(scale=0.02, size=t.size)
    predictor = InterruptAfter(t, calls=10**9)
    space = Space(("a", "k"), np.array([0.0, 0.0]), np.array([np.inf, np.inf]), ("log", "log"))
    problem = Problem(predict=predictor, y=y, space=space, x0=np.array([1.0, 1.0]))
    est = fit_problem(problem)
    # allow a few replicates' worth of calls, then "press Ctrl-C"
    predictor.calls, predictor.armed = 120, True
    result = bootstrap(problem, est, n_boot=50, seed=1, progress=False)
    assert result.interrupted
    assert 0 < result.n_done < 50
    assert np.all(np.isfinite(result.replicates[: result.n_done - 1]))
    assert np.all(np.isnan(result.replicates[result.n_done:]))
    assert any("interrupted after" in note for note in result.intervals.notes)


def _result(values):
    import pandas as pd

    from kinfit.fitting.results import FitResult

    return FitResult(study="s", model={}, parameters={}, runs={}, correlation={},
                     fit={"converged": True, "n_obs": 2, "n_params": 1, "sse": 0.0,
                          "aic": 0.0, "bic": 0.0, "message": ""},
                     predictions=pd.DataFrame({"run": ["A", "A"], "fitted": values}))


def test_results_and_predictions_are_read_only_as_a_pair(tmp_path):
    # results.json records the hash of the predictions.csv written with it; a predictions
    # file from another run (or left by an interruption between the two writes) is refused
    import json

    import pytest

    from kinfit.errors import StudyError
    from kinfit.fitting.results import FitResult

    _result([1.0, 2.0]).save(tmp_path)
    back = FitResult.load(tmp_path)
    assert list(back.predictions["fitted"]) == [1.0, 2.0]
    saved = json.loads((tmp_path / "results.json").read_text())
    assert set(saved["manifest"]["outputs"]) == {"predictions.csv"}
    # a second run that stopped after writing predictions.csv but before results.json
    from kinfit.core.files import write_frame_atomic

    write_frame_atomic(tmp_path / "predictions.csv", _result([3.0, 4.0]).predictions)
    with pytest.raises(StudyError, match="does not belong to results.json"):
        FitResult.load(tmp_path)
    # a result without predictions ignores a stale file; old results (no record) read it as is
    import dataclasses

    dataclasses.replace(_result([0.0, 0.0]), predictions=None).save(tmp_path)
    assert FitResult.load(tmp_path).predictions is None
    del saved["manifest"]["outputs"]
    (tmp_path / "results.json").write_text(json.dumps(saved))
    assert list(FitResult.load(tmp_path).predictions["fitted"]) == [3.0, 4.0]
