"""Nothing lost: an interrupted bootstrap keeps the replicates it finished and says so."""

from __future__ import annotations

import numpy as np

from kinfit.estimate.least_squares import fit_problem
from kinfit.estimate.problem import Problem, Space
from kinfit.estimate.uncertainty import bootstrap


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
