"""Proposal moves of the ensemble sampler that use the curvature of the log-posterior.

The independence move proposes each walker's next position from one fixed multivariate
Student-t density q, centred on the least-squares optimum in the sampler's internal coordinates,
with the Laplace covariance (inverse of the negative Hessian of the log-posterior there) times a
widening factor. It is a Metropolis-Hastings independence sampler (Tierney 1994, Ann. Statist.
22, 1701, section 2.3.3): the acceptance ratio is pi(x') q(x) / (pi(x) q(x')), so the log factor
handed to emcee is ``log q(x) - log q(x')`` (emcee 3.1.6 ``moves/mh.py`` adds the factor to
``log pi(x') - log pi(x)``). A heavy-tailed q (nu about 6) keeps the importance ratio pi/q
bounded in the tails of a posterior close to Gaussian, which an independence sampler needs to be
geometrically ergodic (Mengersen & Tweedie 1996, Ann. Statist. 24, 101, theorem 2.1).

Mixed with the differential-evolution move (each step one of the two, drawn with fixed
weights), the chain keeps pi invariant, since each move alone does. The DE half explores what
the Gaussian picture misses; the independence half makes large, nearly uncorrelated jumps where
that picture holds.

When the curvature cannot be trusted (the optimum lies on a bound, the log-posterior is not
finite around it, or the negative Hessian is singular or not positive definite) no
independence move is built and the sampler falls back to DE alone; the reason is recorded.
"""

from __future__ import annotations

import math
from collections.abc import Callable
from dataclasses import dataclass
from typing import Any

import numpy as np
from numpy.typing import NDArray
from scipy.special import gammaln

__all__ = ["StudentProposal", "laplace_proposal", "independence_move", "NU", "WIDEN", "WEIGHT"]

#: Degrees of freedom of the Student-t proposal.
NU = 6.0
#: Factor on the Laplace covariance.
WIDEN = 1.3
#: Share of steps that use the independence move (the rest use DE).
WEIGHT = 0.5


@dataclass(frozen=True)
class StudentProposal:
    """A multivariate Student-t density in the sampler's internal coordinates.

    Attributes
    ----------
    mean : ndarray, shape (d,)
    cov : ndarray, shape (d, d)
        Scale matrix of the t density (the Laplace covariance times the widening factor).
    nu : float
        Degrees of freedom.
    """

    mean: NDArray[np.float64]
    cov: NDArray[np.float64]
    nu: float = NU

    @property
    def chol(self) -> NDArray[np.float64]:
        return np.asarray(np.linalg.cholesky(self.cov), dtype=float)

    def logpdf(self, x: NDArray[np.float64]) -> NDArray[np.float64]:
        """Log density of each row of ``x`` (normalised)."""
        x = np.atleast_2d(x)
        d = self.mean.size
        z = np.linalg.solve(self.chol, (x - self.mean).T)  # (d, m)
        maha = np.sum(z * z, axis=0)
        log_det = 2.0 * np.sum(np.log(np.diag(self.chol)))
        nu = self.nu
        return (gammaln((nu + d) / 2) - gammaln(nu / 2) - d / 2 * math.log(nu * math.pi)
                - log_det / 2 - (nu + d) / 2 * np.log1p(maha / nu))

    def draw(self, n: int, random: Any) -> NDArray[np.float64]:
        """``n`` draws using a numpy ``RandomState`` (or Generator-like) ``random``."""
        d = self.mean.size
        z = random.standard_normal(size=(n, d))
        w = random.chisquare(self.nu, size=n) / self.nu
        return self.mean + (z @ self.chol.T) / np.sqrt(w)[:, None]

    def to_dict(self) -> dict[str, Any]:
        return {"mean": self.mean.tolist(), "cov": self.cov.tolist(), "nu": float(self.nu)}

    @classmethod
    def from_dict(cls, d: dict[str, Any]) -> StudentProposal:
        return cls(np.asarray(d["mean"], dtype=float), np.asarray(d["cov"], dtype=float),
                   float(d["nu"]))


def independence_move(proposal: StudentProposal) -> Any:
    """An emcee ``MHMove`` that proposes every walker from ``proposal`` independently."""
    import emcee

    def propose(coords: NDArray[np.float64], random: Any) -> tuple[NDArray[np.float64],
                                                                   NDArray[np.float64]]:
        new = proposal.draw(coords.shape[0], random)
        return new, proposal.logpdf(coords) - proposal.logpdf(new)

    return emcee.moves.MHMove(propose)


def _hessian(f: Callable[[NDArray[np.float64]], NDArray[np.float64]], u0: NDArray[np.float64],
             h: NDArray[np.float64]) -> tuple[NDArray[np.float64], bool]:
    """Central-difference Hessian of ``f`` at ``u0`` with steps ``h``, in one batched call.

    Returns the Hessian and whether every value was finite.
    """
    d = u0.size
    pts = [u0]
    eye = np.eye(d) * h
    for i in range(d):
        pts += [u0 + eye[i], u0 - eye[i]]
    pairs = [(i, j) for i in range(d) for j in range(i + 1, d)]
    for i, j in pairs:
        pts += [u0 + eye[i] + eye[j], u0 + eye[i] - eye[j], u0 - eye[i] + eye[j],
                u0 - eye[i] - eye[j]]
    v = np.asarray(f(np.array(pts)), dtype=float)
    if not np.all(np.isfinite(v)):
        return np.full((d, d), np.nan), False
    f0 = v[0]
    hess = np.empty((d, d))
    for i in range(d):
        hess[i, i] = (v[1 + 2 * i] - 2 * f0 + v[2 + 2 * i]) / h[i] ** 2
    base = 1 + 2 * d
    for k, (i, j) in enumerate(pairs):
        a, b, c, e = v[base + 4 * k: base + 4 * k + 4]
        hess[i, j] = hess[j, i] = (a - b - c + e) / (4 * h[i] * h[j])
    return hess, True


def laplace_proposal(
    log_post: Callable[[NDArray[np.float64]], NDArray[np.float64]],
    u0: NDArray[np.float64],
    lower: NDArray[np.float64],
    upper: NDArray[np.float64],
    h0: NDArray[np.float64],
    *,
    widen: float = WIDEN,
    nu: float = NU,
) -> tuple[StudentProposal | None, str | None]:
    """The Student-t proposal from the Laplace approximation at ``u0``, or why there is none.

    Parameters
    ----------
    log_post : callable
        Vectorised log-posterior over internal coordinates, rows in, values out.
    u0 : ndarray, shape (d,)
        The least-squares optimum (and the error scales' estimate) in internal coordinates.
    lower, upper : ndarray, shape (d,)
        Bounds in internal coordinates (infinite when open).
    h0 : ndarray, shape (d,)
        First finite-difference steps (the walker ball's width or a rough standard deviation).
        The Hessian is evaluated again with steps of half the standard deviations it implies,
        so that the curvature is taken over the posterior's own width, not over noise.

    Returns
    -------
    proposal : StudentProposal or None
    reason : str or None
        Why no proposal was built (None when one was).
    """
    u0 = np.asarray(u0, dtype=float)
    span = np.where(np.isfinite(upper - lower), upper - lower, np.inf)
    tol = 1e-6 * np.where(np.isfinite(span), span, 1.0)
    on_bound = (np.abs(u0 - lower) <= tol) | (np.abs(upper - u0) <= tol)
    if np.any(on_bound):
        return None, f"the optimum lies on a bound (coordinates {np.flatnonzero(on_bound).tolist()})"
    room = np.minimum(u0 - lower, upper - u0)
    h = np.minimum(np.asarray(h0, dtype=float), 0.5 * room)
    cov: NDArray[np.float64] | None = None
    reason = ""
    # first passes: the given steps, widened tenfold while the curvature comes out noisy;
    # last pass: steps of half the standard deviations found, kept inside the bounds
    for attempt in range(4):
        hess, finite = _hessian(log_post, u0, h)
        if not finite:
            return None, ("the log-posterior is not finite around the optimum (a bound or a "
                          "model failure within the finite-difference steps)")
        neg = -0.5 * (hess + hess.T)
        try:
            np.linalg.cholesky(neg)
            if np.linalg.cond(neg) > 1e14:
                raise np.linalg.LinAlgError("condition above 1e14")
            c = np.linalg.inv(neg)
            c = 0.5 * (c + c.T)
            np.linalg.cholesky(c)
        except np.linalg.LinAlgError:
            reason = "the negative Hessian at the optimum is singular or not positive definite"
            if cov is not None or attempt == 2:
                return None, reason
            h = np.minimum(10.0 * h, 0.5 * room)
            continue
        if cov is not None:
            cov = c
            break
        cov = c
        h = np.minimum(0.5 * np.sqrt(np.diag(c)), 0.5 * room)
    if cov is None:
        return None, reason
    assert cov is not None
    return StudentProposal(u0.copy(), widen * cov, float(nu)), None
