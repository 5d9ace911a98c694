"""Checks of the sampler's independence move built from the curvature at the optimum.

Outside references named beside each check:
- scipy.stats.multivariate_t (reference library): the multivariate Student-t density.
- The Mahalanobis distance of a d-dimensional t_nu draw, divided by d, follows the F(d, nu)
  distribution (Kotz & Nadarajah 2004, *Multivariate t Distributions*, sec. 1.6; from memory),
  checked with scipy.stats.f.
- A Gaussian log-density x' A x / 2 has the negative Hessian A exactly, so the Laplace
  covariance is A^-1 (common practice).
- Tierney (1994), Ann. Statist. 22, 1701, sec. 2.3.3: the independence sampler accepts with
  pi(x') q(x) / (pi(x) q(x')); emcee 3.1.6 moves/mh.py adds the returned factor to
  log pi(x') - log pi(x), so the factor is log q(x) - log q(x').
"""

from __future__ import annotations

import numpy as np
import pytest
from scipy import stats

from kinfit.estimate.moves import StudentProposal, independence_move, laplace_proposal
from kinfit.estimate.problem import Problem, Space
from kinfit.estimate.sampling import sample_problem


def _cov(d=4, seed=0):
    rng = np.random.default_rng(seed)
    a = rng.standard_normal((d, d))
    return a @ a.T + 0.5 * np.eye(d)


def test_student_density_matches_scipy():
    cov = _cov()
    mean = np.array([0.5, -1.0, 2.0, 0.0])
    q = StudentProposal(mean, cov, 6.0)
    x = np.random.default_rng(1).standard_normal((50, 4)) * 2
    ref = stats.multivariate_t(loc=mean, shape=cov, df=6.0).logpdf(x)
    np.testing.assert_allclose(q.logpdf(x), ref, rtol=1e-12, atol=1e-12)


def test_student_draws_have_the_f_distributed_mahalanobis_distance():
    cov = _cov()
    q = StudentProposal(np.zeros(4), cov, 6.0)
    x = q.draw(20000, np.random.RandomState(3))
    maha = np.einsum("ij,jk,ik->i", x, np.linalg.inv(cov), x)
    assert stats.kstest(maha / 4, stats.f(4, 6.0).cdf).pvalue > 1e-3


def test_move_factor_is_log_q_old_minus_log_q_new():
    q = StudentProposal(np.zeros(2), np.eye(2), 6.0)
    move = independence_move(q)
    rs = np.random.RandomState(5)
    old = np.array([[0.3, -0.2], [2.0, 1.0]])
    new, factor = move.get_proposal(old, rs)
    np.testing.assert_allclose(factor, q.logpdf(old) - q.logpdf(new), rtol=1e-13)


def test_laplace_covariance_of_a_gaussian_is_exact():
    prec = np.linalg.inv(_cov(3, seed=2))
    mu = np.array([1.0, 2.0, -1.0])

    def logp(u):
        z = np.atleast_2d(u) - mu
        return -0.5 * np.einsum("ij,jk,ik->i", z, prec, z)

    q, reason = laplace_proposal(logp, mu, np.full(3, -np.inf), np.full(3, np.inf),
                                 np.full(3, 1e-2), widen=1.3)
    assert reason is None
    np.testing.assert_allclose(q.cov, 1.3 * np.linalg.inv(prec), rtol=1e-7)
    np.testing.assert_array_equal(q.mean, mu)


def test_no_proposal_on_a_bound_or_for_a_flat_direction():
    def logp(u):
        u = np.atleast_2d(u)
        return -0.5 * u[:, 0] ** 2  # flat in the second coordinate: singular curvature

    q, reason = laplace_proposal(logp, np.zeros(2), np.full(2, -np.inf), np.full(2, np.inf),
                                 np.full(2, 0.1))
    assert q is None and "singular or not positive definite" in reason
    q, reason = laplace_proposal(lambda u: -0.5 * np.sum(np.atleast_2d(u) ** 2, axis=1),
                                 np.array([0.0, 1.0]), np.array([-5.0, -5.0]),
                                 np.array([5.0, 1.0]), np.full(2, 0.1))
    assert q is None and "on a bound" in reason


def test_sampler_records_the_fallback_to_de():
    # y = a x + b x with a and b not separable: the curvature is singular, DE alone is used
    x = np.linspace(0.0, 1.0, 10)
    y = 2.0 * x + 0.01 * np.cos(9 * x)
    space = Space(("a", "b"), np.full(2, -np.inf), np.full(2, np.inf), ("none", "none"))
    prob = Problem(lambda B: (B[:, :1] + B[:, 1:2]) * x, y, space, [1.0, 1.0])
    with pytest.warns(Warning):
        post = sample_problem(prob, start=[1.0, 1.0], scale_start=[0.01], sample_scale=False,
                              max_steps=40, seed=1, progress=False)
    assert post.settings.moves == "de-laplace"
    assert post.settings.move_note.startswith("DE alone: no independence move because")
