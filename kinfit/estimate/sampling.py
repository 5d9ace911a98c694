"""Posterior sampling of a :class:`~kinfit.estimate.problem.Problem` with emcee's ensemble sampler.

The sampler knows no chemistry: it sees a vectorised predictor, the data, the error model and
the parameter space. It walks in the internal (unconstrained) coordinates of
:class:`~kinfit.estimate.problem.Space` plus, when asked, the logarithms of the error-model
scales (the target is :class:`~kinfit.estimate.log_posterior.LogPosterior`). Runs go in chunks,
with an atomic checkpoint after each, until the stopping rule holds (by default every
convergence test of :func:`~kinfit.estimate.convergence.diagnose`) or ``max_steps`` is reached.
"""

from __future__ import annotations

import hashlib
import math
import os
from collections.abc import Mapping
from typing import Any

import numpy as np
from numpy.typing import ArrayLike, NDArray

from kinfit.errors import StudyError
from kinfit.estimate.chain import MOVES, _Run, _StopRule
from kinfit.estimate.checkpoint import Checkpoint, load_checkpoint
from kinfit.estimate.convergence import (
    ESS_MIN,
    RHAT_MAX,
)
from kinfit.estimate.log_posterior import (
    LogPosterior,
    PriorSpec,
    problem_priors,
    scale_estimate,
    scale_values,
)
from kinfit.estimate.moves import WEIGHT as MOVE_WEIGHT
from kinfit.estimate.moves import WIDEN as MOVE_WIDEN
from kinfit.estimate.moves import StudentProposal, laplace_proposal
from kinfit.estimate.posterior import Posterior
from kinfit.estimate.problem import Problem

__all__ = ['sample_problem', 'STOP_RULES', 'LogPosterior', 'scale_estimate']

#: Stopping rules of :func:`sample_problem`.
STOP_RULES = ("converged", "autocorrelation")

def _move_plan(target: LogPosterior, x0: NDArray[np.float64], width: NDArray[np.float64],
               kind: str, stored: dict[str, Any] | None) -> tuple[StudentProposal | None, str]:
    """The independence proposal of ``"de-laplace"`` (the checkpoint's when resuming) and a
    note of what the moves are; no proposal, and the reason, when the curvature fails."""
    if kind != "de-laplace":
        return None, ""
    proposal: StudentProposal | None
    if stored is not None:
        if stored.get("proposal") is None:
            return None, str(stored.get("move_note", ""))
        proposal = StudentProposal.from_dict(stored["proposal"])
    else:
        lo = np.full(target.ndim, -np.inf)
        hi = np.full(target.ndim, np.inf)
        lo[: target.p], hi[: target.p] = target.space.internal_bounds()
        proposal, reason = laplace_proposal(target, target.to_internal(x0), lo, hi, width)
        if proposal is None:
            return None, f"DE alone: no independence move because {reason}"
    return proposal, (f"DE {1 - MOVE_WEIGHT:.0%} mixed with an independence move "
                      f"{MOVE_WEIGHT:.0%}: multivariate t (nu {proposal.nu:g}) centred on the "
                      f"least-squares optimum, Laplace covariance x {MOVE_WIDEN:g}")


def _int_option(name: str, value: object, low: int) -> int:
    if isinstance(value, bool) or not isinstance(value, int | np.integer) or value < low:
        raise StudyError(
            f"the '{name}' option of sample_problem() must be an int in [{low}, inf). "
            f"Got {value!r} instead."
        )
    return int(value)


def _opt_int_option(name: str, value: object, low: int) -> int | None:
    if value is None:
        return None
    if isinstance(value, bool) or not isinstance(value, int | np.integer) or value < low:
        raise StudyError(
            f"the '{name}' option of sample_problem() must be None or an int in [{low}, inf). "
            f"Got {value!r} instead."
        )
    return int(value)


def _check_start(problem: Problem, start: ArrayLike) -> NDArray[np.float64]:
    space = problem.space
    x = np.asarray(start, dtype=float).reshape(-1)
    if x.size != space.n:
        raise StudyError(
            f"start has {x.size} values but the problem has {space.n} varying parameters "
            f"{list(space.names)}"
        )
    for j, name in enumerate(space.names):
        if not math.isfinite(x[j]) or not space.lower[j] <= x[j] <= space.upper[j]:
            raise StudyError(
                f"parameter '{name}': start value {x[j]:g} is not finite or lies outside its "
                f"bounds [{space.lower[j]:g}, {space.upper[j]:g}]; start from the least-squares "
                "optimum"
            )
        if space.is_log[j] and not x[j] > 0:
            raise StudyError(
                f"parameter '{name}': start value {x[j]:g} is on the zero bound of a "
                "log-transformed parameter; start at a small positive value"
            )
    return x


def _fingerprint(problem: Problem) -> str:
    h = hashlib.sha256()
    h.update(np.ascontiguousarray(problem.y).tobytes())
    h.update(np.ascontiguousarray(problem.w).tobytes())
    h.update(problem.error_model.kind.encode())
    h.update(repr((problem.space.names, problem.space.transform)).encode())
    h.update(np.ascontiguousarray(problem.space.lower).tobytes())
    h.update(np.ascontiguousarray(problem.space.upper).tobytes())
    return h.hexdigest()[:16]


def _initial_ball(
    target: LogPosterior,
    x0: NDArray[np.float64],
    width: NDArray[np.float64],
    n_walkers: int,
    rng: np.random.Generator,
) -> tuple[NDArray[np.float64], NDArray[np.float64]]:
    """Walker positions around physical point ``x0`` with finite log-posterior.

    Internal coordinates are drawn from ``N(u0, width^2)``; positions outside the bounds are
    reflected inside, positions with ``-inf`` log-posterior are redrawn (100 tries).
    """
    u0 = target.to_internal(x0)
    lo_u = np.full(target.ndim, -np.inf)
    hi_u = np.full(target.ndim, np.inf)
    lo_u[: target.p], hi_u[: target.p] = target.space.internal_bounds()
    u = np.empty((n_walkers, target.ndim))
    lp = np.full(n_walkers, -np.inf)
    todo = np.arange(n_walkers)
    for _ in range(100):
        cand = u0 + width * rng.standard_normal(size=(todo.size, target.ndim))
        cand = np.where(cand < lo_u, 2 * lo_u - cand, cand)
        cand = np.where(cand > hi_u, 2 * hi_u - cand, cand)
        cand = np.clip(cand, lo_u, hi_u)
        u[todo] = cand
        lp[todo] = target(cand)
        todo = todo[~np.isfinite(lp[todo])]
        if todo.size == 0:
            return u, lp
    raise StudyError(
        f"{todo.size} of {n_walkers} walkers have zero posterior density near the start "
        f"{dict(zip(target.names, x0.tolist(), strict=True))}: the model fails there or a prior "
        "excludes it; start from the least-squares optimum or check the priors and bounds"
    )


def sample_problem(
    problem: Problem,
    *,
    start: ArrayLike,
    priors: Mapping[str, PriorSpec] | None = None,
    scale_start: Mapping[str, float] | ArrayLike | None = None,
    sample_scale: bool = True,
    n_walkers: int | None = None,
    max_steps: int = 20000,
    chunk: int = 500,
    tau_multiple: float = 50.0,
    burn_in: int | None = None,
    thin: int = 1,
    seed: int | None = None,
    checkpoint: str | os.PathLike[str] | None = None,
    resume: bool = False,
    progress: bool = True,
    start_sd: ArrayLike | None = None,
    ball: float | None = None,
    rhat_max: float = RHAT_MAX,
    ess_min: float = ESS_MIN,
    stop_rule: str = "converged",
    moves: str = "de-laplace",
) -> Posterior:
    """Sample the posterior of a problem's parameters (and error scales) with emcee.

    Parameters
    ----------
    problem : Problem
        Predictor, data, error model and parameter space.
    start : array_like, shape (p,)
        Physical starting values, inside the bounds (the least-squares optimum).
    priors : mapping of str to prior spec, optional
        ``{name: Prior | "normal(60000, 5000)" | {kind = ..., ...}}`` on physical values;
        parameters not named get a flat prior inside their bounds, error scales ``p(s) ~ 1/s``.
    scale_start : mapping, float or array_like, optional
        Error-model scale(s) (``sigma`` in observation units, ``sigma_rel`` dimensionless):
        centre of the walkers' start when sampled, the fixed values otherwise. Default: the
        residual estimate at ``start`` (:func:`scale_estimate`).
    sample_scale : bool
        Sample the error scales in log space (True) or hold them at ``scale_start``.
    n_walkers : int, optional
        Ensemble size, at least ``2 * ndim``; default ``max(24, 4 * ndim)``.
    max_steps : int
        Longest chain, steps.
    chunk : int
        Steps between checkpoints and autocorrelation checks.
    tau_multiple : float
        The chain must be longer than ``tau_multiple`` times the largest integrated
        autocorrelation time (checked after each chunk).
    burn_in : int, optional
        Steps discarded at the start; default ``ceil(2 * max tau)``, at most half the chain.
    thin : int
        Keep every ``thin``-th step after burn-in.
    seed : int, optional
        Seed of all randomness (walker ball and emcee's moves). None draws fresh entropy, which
        is recorded in the result so the run can be repeated.
    checkpoint : path-like, optional
        ``.npz`` file rewritten atomically after every chunk and on interruption.
    resume : bool
        Continue the chain stored in ``checkpoint`` (see Notes).
    progress : bool
        Show a tqdm progress bar on stderr.
    start_sd : array_like, shape (p,) or (ndim,), optional
        Physical standard errors (linearised, from least squares) to size the walker ball.
    ball : float, optional
        Walkers start at ``N(u0, width^2)`` in internal coordinates with ``width = ball * sd``
        (``sd`` from ``start_sd`` in internal units; default ``ball`` 0.1) or, without
        ``start_sd``, ``ball * |x|`` for linear and ``ball`` for log coordinates (default 1e-3).
    rhat_max, ess_min : float
        Convergence thresholds (see :func:`kinfit.estimate.convergence.diagnose`).
    stop_rule : {"converged", "autocorrelation"}
        When to stop before ``max_steps``: ``"converged"`` once every convergence test passes
        (length, R-hat and ESS); ``"autocorrelation"`` once the length test alone passes
        (emcee's rule; R-hat over walkers then often lies near ``1 + tau / n_steps``, about
        1.02 at 50 tau, and the verdict may say "not converged").
    moves : {"de-laplace", "de", "stretch"}
        Proposal (see :data:`MOVES`): ``"de-laplace"`` (default), emcee's
        differential-evolution move mixed half and half with an independence move from the
        Laplace approximation at ``start`` (:mod:`kinfit.estimate.moves`; DE alone, with the
        reason in ``settings.move_note``, when the optimum is on a bound or the curvature is
        not positive definite); ``"de"``, the differential-evolution move alone;
        ``"stretch"``, the affine-invariant stretch move. DE's autocorrelation times are a
        third to a quarter of the stretch move's on the demo campaign and on Gaussian targets,
        and the mixed move's a fifth of DE's on the demo (measured; see DEVELOPERS.md).

    Returns
    -------
    Posterior
        ``interrupted`` is True when Ctrl-C stopped the run; the draws so far are kept and the
        checkpoint holds them.

    Raises
    ------
    StudyError
        Bad options, start outside the bounds, a checkpoint folder that does not exist, a
        missing checkpoint with ``resume=True``, or a checkpoint from another run (the message
        names each setting that differs).
    Exception
        Any error of the predictor other than those :meth:`Problem.predict_safe` absorbs is
        re-raised after the steps done are checkpointed; a note on the exception says where.

    Warns
    -----
    ConvergenceWarning
        The chain failed a convergence test or was interrupted.

    Notes
    -----
    *Determinism.* The seed feeds a :class:`numpy.random.SeedSequence`, spawned into one
    Generator for the walker ball and one MT19937 ``RandomState`` handed to emcee. Chunking does
    not change the random stream, so the same seed gives the same chain for any ``chunk``.

    *Resume.* The checkpoint stores the chain, log-probabilities, accepted counts and the
    generator state after the last completed step. A resumed run continues from that step with
    that state, keeps chunk boundaries at multiples of ``chunk`` and checks the stopping rule
    where an uninterrupted run would; so with the same seed and settings the resumed chain is
    bit-for-bit identical to an uninterrupted one (tested), and a run interrupted inside a step
    loses only that step. A checkpoint longer than ``max_steps`` is cut to ``max_steps``.

    Examples
    --------
    >>> from kinfit.estimate.problem import Problem, Space
    >>> t = np.linspace(0.0, 1.0, 8)
    >>> space = Space(("a",), np.array([-np.inf]), np.array([np.inf]), ("none",))
    >>> prob = Problem(lambda x: x[:, :1] * t, 2.0 * t + 0.01 * np.cos(7 * t), space, [2.0])
    >>> post = sample_problem(prob, start=[2.0], scale_start=[0.05], sample_scale=False,
    ...                       max_steps=6000, seed=1, progress=False)
    >>> post.converged, post.settings.stopped_by, post.chain_shape[1:]
    (True, 'converged', (24, 1))
    >>> round(post.summary()["a"]["median"], 2)
    2.0
    """
    start_x = _check_start(problem, start)
    if not isinstance(sample_scale, bool | np.bool_):
        raise StudyError(f"sample_scale must be True or False, got {sample_scale!r}")
    prior_list = problem_priors(problem, priors, bool(sample_scale))
    scales = scale_values(problem, scale_start, start_x)
    target = LogPosterior(
        problem, prior_list, sample_scale=bool(sample_scale), scale_values=scales
    )
    ndim = target.ndim
    walkers = _int_option(
        "n_walkers", max(24, 4 * ndim) if n_walkers is None else n_walkers, 2 * ndim
    )
    max_steps = _int_option("max_steps", max_steps, 2)
    chunk = _int_option("chunk", chunk, 1)
    thin = _int_option("thin", thin, 1)
    burn_in = _opt_int_option("burn_in", burn_in, 0)
    seed = _opt_int_option("seed", seed, 0)
    if isinstance(tau_multiple, bool) or not (
        isinstance(tau_multiple, int | float) and tau_multiple > 0
    ):
        raise StudyError(f"tau_multiple must be a number > 0, got {tau_multiple!r}")
    if ball is not None and (
        isinstance(ball, bool) or not (isinstance(ball, int | float) and ball > 0)
    ):
        raise StudyError(f"ball must be None or a number > 0, got {ball!r}")
    for name, value in (("rhat_max", rhat_max), ("ess_min", ess_min)):
        if isinstance(value, bool) or not (isinstance(value, int | float) and value > 0):
            raise StudyError(f"{name} must be a number > 0, got {value!r}")
    if stop_rule not in STOP_RULES:
        raise StudyError(
            f"stop_rule '{stop_rule}' is not recognised; use one of {list(STOP_RULES)}"
        )
    if moves not in MOVES:
        raise StudyError(f"moves '{moves}' is not recognised; use one of {list(MOVES)}")
    if resume and checkpoint is None:
        raise StudyError("resume=True needs checkpoint=PATH, the file of the run to continue")
    if checkpoint is not None:
        folder = os.path.dirname(os.fspath(checkpoint)) or "."
        if not os.path.isdir(folder):
            raise StudyError(
                f"checkpoint '{checkpoint}': folder '{folder}' does not exist; create it first"
            )
    x0 = np.concatenate([start_x, [scales[n] for n in target.scale_names]])[:ndim]
    is_log = np.r_[problem.space.is_log, np.ones(ndim - target.p, dtype=bool)]
    base = np.where(is_log, 1.0, np.where(x0 != 0, np.abs(x0), 1.0))
    if start_sd is not None:
        sd = np.asarray(start_sd, dtype=float).reshape(-1)
        if sd.size not in (target.p, ndim) or not np.all(np.isfinite(sd)) or np.any(sd <= 0):
            raise StudyError(
                f"start_sd must hold {target.p} (or {ndim}) finite values > 0, got {start_sd!r}"
            )
        base[: sd.size] = np.where(is_log[: sd.size], sd / x0[: sd.size], sd)
    width = (ball if ball is not None else (0.1 if start_sd is not None else 1e-3)) * base

    identity: dict[str, Any] = {
        "names": list(target.names),
        "n_walkers": walkers,
        "sample_scale": bool(sample_scale),
        "scale_values": scales,
        "fixed_scales": None if sample_scale else scales,
        "priors": {n: str(p) for n, p in zip(target.names, prior_list, strict=True)},
        "start": start_x.tolist(),
        "problem": _fingerprint(problem),
        "moves": moves,
    }
    ckpt: Checkpoint | None = None
    if resume and checkpoint is not None:
        ckpt = load_checkpoint(checkpoint)
        if seed is None:
            seed = int(ckpt.settings.get("seed", -1))
        ckpt.check_matches({**identity, "seed": seed}, checkpoint)
    seq = np.random.SeedSequence(seed)
    seed = int(seq.entropy)  # type: ignore[arg-type]
    identity["seed"] = seed
    ball_seq, move_seq = seq.spawn(2)
    proposal, move_note = _move_plan(target, x0, width, moves,
                                     ckpt.settings if ckpt is not None else None)
    identity["proposal"] = None if proposal is None else proposal.to_dict()
    identity["move_note"] = move_note
    run = _Run(target, identity, walkers, checkpoint, proposal)
    if ckpt is not None and ckpt.n_steps > 0:
        run.restore(ckpt, max_steps)
    else:
        coords, lp0 = _initial_ball(target, x0, width, walkers, np.random.default_rng(ball_seq))
        rs = np.random.RandomState(np.random.MT19937(move_seq))
        run.begin(coords, lp0, rs.get_state())
    rule = _StopRule(
        stop_rule, float(tau_multiple), float(rhat_max), float(ess_min), burn_in, thin
    )
    stopped_by = run.go(max_steps=max_steps, chunk=chunk, rule=rule, progress=progress)
    return run.result(
        problem=problem,
        burn_in=burn_in,
        thin=thin,
        max_steps=max_steps,
        chunk=chunk,
        tau_multiple=float(tau_multiple),
        stopped_by=stopped_by,
        rhat_max=rhat_max,
        ess_min=ess_min,
        resumed_from=(ckpt.n_steps if ckpt is not None else 0),
    )


