"""One sampling run: the chain so far, the emcee sampler, its checkpoints and the stopping rule."""

from __future__ import annotations

import dataclasses
import math
import os
import warnings
from typing import Any

import numpy as np
from numpy.typing import NDArray

from kinfit.errors import ConvergenceWarning
from kinfit.estimate.checkpoint import Checkpoint, save_checkpoint
from kinfit.estimate.convergence import (
    autocorr_time,
    diagnose,
    ess_bulk,
    ess_tail,
    split_rhat,
)
from kinfit.estimate.log_posterior import (
    LogPosterior,
)
from kinfit.estimate.moves import WEIGHT as MOVE_WEIGHT
from kinfit.estimate.moves import StudentProposal, independence_move
from kinfit.estimate.posterior import Posterior, SamplerSettings
from kinfit.estimate.problem import Problem

__all__ = []


#: Proposal moves of :func:`sample_problem`: ``"de-laplace"``, emcee's differential-evolution
#: move (DEMove; ter Braak 2006) mixed half and half with an independence move from the
#: Laplace approximation at the optimum (:mod:`kinfit.estimate.moves`); ``"de"``, DEMove alone;
#: ``"stretch"``, the affine-invariant stretch move (Goodman & Weare 2010; emcee's default).
#: emcee's DESnookerMove is left out on purpose: on a 3-D standard normal (24 walkers, 20000
#: steps, emcee 3.1.6) it gave standard deviations of 0.89 instead of 1 (measured here; DEMove
#: 0.998, stretch 1.00).
MOVES = ("de-laplace", "de", "stretch")


def _emcee_moves(kind: str, proposal: StudentProposal | None = None) -> Any:
    import emcee

    if kind == "de-laplace" and proposal is not None:
        return [(emcee.moves.DEMove(), 1.0 - MOVE_WEIGHT),
                (independence_move(proposal), MOVE_WEIGHT)]
    if kind in ("de", "de-laplace"):
        return emcee.moves.DEMove()
    return emcee.moves.StretchMove()


class _Run:
    """The mutable state of one sampling run: the chain so far and the emcee sampler."""

    def __init__(
        self,
        target: LogPosterior,
        identity: dict[str, Any],
        n_walkers: int,
        checkpoint: str | os.PathLike[str] | None,
        proposal: StudentProposal | None = None,
    ) -> None:
        import emcee

        self.target = target
        self.identity = identity
        self.path = checkpoint
        self.sampler = emcee.EnsembleSampler(
            n_walkers, target.ndim, target, vectorize=True,
            moves=_emcee_moves(str(identity.get("moves", "stretch")), proposal),
        )
        self.prev_chain = np.empty((0, n_walkers, target.ndim))
        self.prev_lp = np.empty((0, n_walkers))
        self.prev_acc = np.zeros(n_walkers)
        self.state: Any = None
        self.saved_steps = 0
        self.interrupted = False

    def begin(self, coords: NDArray[np.float64], lp: NDArray[np.float64], rstate: Any) -> None:
        from emcee import State

        self.state = State(coords, log_prob=lp, random_state=rstate)
        self.first = True

    def restore(self, ckpt: Checkpoint, max_steps: int) -> None:
        from emcee import State

        n = min(ckpt.n_steps, max_steps)
        if n < ckpt.n_steps:
            # a prefix of a longer checkpoint: nothing more is sampled (n == max_steps) and the
            # file is not rewritten; accepted counts per step are not stored, so the prefix
            # gets the mean rate of the whole stored chain
            acc = ckpt.accepted * (n / ckpt.n_steps)
        else:
            acc = ckpt.accepted
        self.prev_chain, self.prev_lp, self.prev_acc = ckpt.chain[:n], ckpt.log_prob[:n], acc
        self.saved_steps = n
        self.state = State(
            self.prev_chain[-1], log_prob=self.prev_lp[-1], random_state=ckpt.random_state
        )
        self.first = False

    @property
    def n_steps(self) -> int:
        return self.prev_chain.shape[0] + self.sampler.iteration

    def chain(self) -> NDArray[np.float64]:
        if self.sampler.iteration == 0:
            return self.prev_chain
        return np.concatenate([self.prev_chain, self.sampler.get_chain()])

    def log_prob(self) -> NDArray[np.float64]:
        if self.sampler.iteration == 0:
            return self.prev_lp
        return np.concatenate([self.prev_lp, self.sampler.get_log_prob()])

    def accepted(self) -> NDArray[np.float64]:
        return self.prev_acc + (self.sampler.backend.accepted if self.sampler.iteration else 0.0)

    def save(self) -> None:
        if self.path is None or self.n_steps == self.saved_steps:
            return
        rstate = (
            self.sampler.backend.random_state
            if self.sampler.iteration
            else self.state.random_state
        )
        save_checkpoint(
            self.path,
            Checkpoint(self.chain(), self.log_prob(), self.accepted(), rstate, self.identity),
        )
        self.saved_steps = self.n_steps

    def _should_stop(self, rule: _StopRule) -> bool:
        """Whether the chain so far passes the stopping rule (cheap test first)."""
        chain = self.chain()
        tau = autocorr_time(chain)
        if not (np.all(np.isfinite(tau)) and self.n_steps >= rule.tau_multiple * np.max(tau)):
            return False
        if rule.kind == "autocorrelation":
            return True
        burn = _auto_burn_in(tau, self.n_steps) if rule.burn_in is None else rule.burn_in
        burn = min(burn, self.n_steps // 2)
        kept = chain[burn :: rule.thin]
        if kept.shape[0] < 4:
            return False
        if not np.all(split_rhat(kept) < rule.rhat_max):
            return False
        return bool(np.all(np.minimum(ess_bulk(kept), ess_tail(kept)) >= rule.ess_min))

    def _projected_length(self, rule: _StopRule, chunk: int, max_steps: int) -> int:
        """Where the chain is expected to stop: the length the autocorrelation rule asks for
        (at least the next check), rounded up to a check, at most the cap."""
        tau = autocorr_time(self.chain())
        need = self.n_steps + chunk
        if np.all(np.isfinite(tau)):
            need = max(need, int(math.ceil(rule.tau_multiple * float(np.max(tau)))))
        need = int(math.ceil(need / chunk) * chunk)
        return min(max_steps, need)

    def go(self, *, max_steps: int, chunk: int, rule: _StopRule, progress: bool) -> str:
        """Sample chunk by chunk; returns why it stopped."""
        n0 = self.n_steps
        if n0 >= max_steps:
            return "max_steps"
        if n0 > 0 and n0 % chunk == 0 and self._should_stop(rule):
            return rule.kind
        # the bar counts to the next convergence check, then to the length the autocorrelation
        # time asks for (tau_multiple x tau), not to the step cap
        bar = _progress_bar(progress, min(max_steps, n0 + chunk - n0 % chunk), n0)
        try:
            while self.n_steps < max_steps:
                n = min(chunk - self.n_steps % chunk, max_steps - self.n_steps)
                for state in self.sampler.sample(
                    self.state, iterations=n, skip_initial_state_check=not self.first
                ):
                    self.state = state
                    if bar is not None:
                        bar.update(1)
                self.first = False
                self.save()
                if self._should_stop(rule):
                    return rule.kind
                if bar is not None:
                    bar.total = self._projected_length(rule, chunk, max_steps)
                    bar.refresh()
            return "max_steps"
        except KeyboardInterrupt:
            self.interrupted = True
            self.save()
            if self.n_steps < 2:
                raise
            return "interrupted"
        except Exception as exc:
            self.save()
            where = (
                f"{self.saved_steps} steps are saved in '{self.path}'; rerun with resume=True"
                if self.path is not None
                else f"{self.n_steps} steps are lost; pass checkpoint=PATH to keep them"
            )
            exc.add_note(f"kinfit sampling stopped after {self.n_steps} steps: {where}")
            raise
        finally:
            if bar is not None:
                bar.close()

    def result(
        self,
        *,
        problem: Problem,
        burn_in: int | None,
        thin: int,
        max_steps: int,
        chunk: int,
        tau_multiple: float,
        stopped_by: str,
        rhat_max: float,
        ess_min: float,
        resumed_from: int,
    ) -> Posterior:
        chain_u = self.chain()
        n = chain_u.shape[0]
        chain_x = self.target.to_physical(chain_u)
        tau = autocorr_time(chain_u)
        half = n // 2
        notes = []
        if burn_in is None:
            burn = min(_auto_burn_in(tau, n), half)
        elif burn_in > half:
            burn = half
            notes.append(
                f"burn_in {burn_in} asked but the chain has {n} steps; {burn} discarded instead."
            )
            warnings.warn(
                f"sample_problem: burn_in {burn_in} exceeds half the chain ({n} steps); "
                f"discarding {burn}",
                ConvergenceWarning,
                stacklevel=3,
            )
        else:
            burn = burn_in
        acc = float(np.mean(self.accepted() / max(n, 1)))
        diag = diagnose(
            chain_u,
            names=self.target.names,
            burn_in=burn,
            thin=thin,
            acceptance_fraction=acc,
            tau_multiple=tau_multiple,
            rhat_max=rhat_max,
            ess_min=ess_min,
            interrupted=self.interrupted,
        )
        if notes:
            diag = dataclasses.replace(diag, notes=diag.notes + tuple(notes))
        kept = chain_x[burn::thin]
        settings = SamplerSettings(
            n_walkers=int(chain_u.shape[1]),
            n_steps=int(n),
            burn_in=int(burn),
            thin=int(thin),
            seed=int(self.identity["seed"]),
            max_steps=int(max_steps),
            chunk=int(chunk),
            tau_multiple=float(tau_multiple),
            sample_scale=bool(self.identity["sample_scale"]),
            scale_values=dict(self.identity["scale_values"]),
            priors=dict(self.identity["priors"]),
            checkpoint=None if self.path is None else str(self.path),
            resumed_from=int(resumed_from),
            stopped_by=stopped_by,
            moves=str(self.identity.get("moves", "stretch")),
            move_note=str(self.identity.get("move_note", "")),
        )
        post = Posterior(
            names=self.target.names,
            n_model=self.target.p,
            draws=kept.reshape(-1, chain_x.shape[2]),
            log_prob=self.log_prob()[burn::thin].reshape(-1),
            chain_shape=(int(n), int(chain_u.shape[1]), int(chain_u.shape[2])),
            acceptance_fraction=acc,
            diagnostics=diag,
            interrupted=self.interrupted,
            settings=settings,
            error_model=problem.error_model,
        )
        if not post.converged:
            warnings.warn(f"sample_problem: {diag.verdict}", ConvergenceWarning, stacklevel=3)
        return post


@dataclasses.dataclass(frozen=True)
class _StopRule:
    kind: str
    tau_multiple: float
    rhat_max: float
    ess_min: float
    burn_in: int | None
    thin: int


def _auto_burn_in(tau: NDArray[np.float64], n_steps: int) -> int:
    """Default burn-in: twice the largest autocorrelation time (emcee's documentation,
    common practice), or half the chain when tau is unknown."""
    if np.all(np.isfinite(tau)):
        return int(np.ceil(2.0 * np.max(tau)))
    return n_steps // 2


def _progress_bar(progress: bool, total: int, initial: int) -> Any:
    if not progress:
        return None
    from tqdm.auto import tqdm

    return tqdm(total=total, initial=initial, desc="sampling", unit="step", leave=False)
