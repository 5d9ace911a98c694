"""Benchmark: the demo campaign's full prediction (all runs, all points; order-1.5 kinetics +
film + pore) by kinfit's vectorised engine, for 1 and for 32 and 64 parameter sets in one call,
against a naive nested reference written here (solve_ivp per run, a scalar root solve of the
surface concentration in every right-hand-side call, solve_bvp for the effectiveness factor in
every root-function call) on the same inputs.

The naive reference runs at two accuracies: "matched" (about 1e-7 relative, the engine's own
order of accuracy: solve_bvp tol 1e-7, brentq xtol 1e-10 Cb, solve_ivp rtol 1e-9), which is the
honest speed reference and checks EVERY parameter set of the 32-set call; and "tight" (solve_bvp
tol 1e-10, brentq xtol 1e-13 Cb, solve_ivp rtol 1e-11) for the central set. Both on the runs
chosen with --runs (default: 3 runs spread over the campaign; --runs 0 takes every run); the
naive time is scaled to the whole campaign.

A second honest reference, in the same run: the closed-form first-order model in plain numpy
(series resistances, sphere eta, exponential decay) at m = 32, the floor any engine for this
campaign could reach; the engine's time per set at m = 32 is reported as a ratio to it.

Run from the repository root:  python3 tests/benchmarks/bench_model.py [--runs K]
Last line: ms_per_set_32=<t> ratio_to_closed_form=<r> speedup_64=<y> max_rel_diff=<z>
(targets of issue 16: t <= 0.25 ms, r <= 100, z <= 1e-6).
"""

from __future__ import annotations

import sys
import time
from pathlib import Path

import numpy as np
from scipy.integrate import solve_bvp, solve_ivp
from scipy.optimize import brentq

ROOT = Path(__file__).resolve().parents[2]
sys.path.insert(0, str(ROOT))

from kinfit.model.compiled import Model, ModelSpec  # noqa: E402
from kinfit.study.load import load_study  # noqa: E402


class NaivePellet:
    """Effectiveness factor of a sphere by solve_bvp (tol ``tol``) on the scaled pellet equation
    y'' + (2/x) y' = phi2 y^n, y'(0) = 0, y(1) = 1, with y = c/Cs, x = r/R and
    phi2 = R^2 k_v Cs^(n-1) / (De C_ref^n); eta = 3 y'(1) / phi2. Warm-started from the
    previous solution of the same run (the only concession to speed)."""

    def __init__(self, k_v: float, n: float, De: float, R: float, C_ref: float,
                 tol: float = 1e-10) -> None:
        self.k_v, self.n, self.De, self.R, self.C_ref, self.tol = k_v, n, De, R, C_ref, tol
        self.x = np.append(1.0 - np.geomspace(1.0, 1e-5, 80), 1.0)  # clustered at the surface
        self.y = None
        self.last_phi2 = None

    def __call__(self, Cs: float) -> float:
        if Cs <= 0:
            return 1.0
        n = self.n
        phi2 = self.R**2 * self.k_v * Cs ** (n - 1.0) / (self.De * self.C_ref**n)

        def rhs(x, y):
            src = phi2 * np.maximum(y[0], 0.0) ** n
            lap = np.where(x > 0, -2.0 * y[1] / np.maximum(x, 1e-300), 0.0)
            return np.vstack([y[1], np.where(x > 0, src + lap, src / 3.0)])

        def bc(ya, yb):
            return np.array([ya[1], yb[0] - 1.0])

        if self.y is None or not 0.5 < phi2 / self.last_phi2 < 2.0:
            # cold start from the large-modulus profile y = exp(-phi (1 - x))
            self.x = np.append(1.0 - np.geomspace(1.0, 1e-5, 80), 1.0)
            phi = np.sqrt(phi2 * (n + 1.0) / 2.0)
            self.y = np.vstack([np.exp(-phi * (1.0 - self.x)), phi * np.exp(-phi * (1.0 - self.x))])
        sol = solve_bvp(rhs, bc, self.x, self.y, tol=self.tol, max_nodes=200000)
        self.last_phi2 = phi2
        if not sol.success:
            raise RuntimeError(f"solve_bvp failed at phi2 = {phi2:.3g}: {sol.message}")
        self.x, self.y = sol.x, sol.y
        return float(3.0 * sol.y[1, -1] / phi2)


#: Tolerances of the naive reference: (solve_bvp tol, brentq xtol / Cb, solve_ivp rtol).
ACCURACY = {"matched": (1e-7, 1e-10, 1e-9), "tight": (1e-10, 1e-13, 1e-11)}


def naive_profiles(model: Model, theta: np.ndarray, runs: list[int] | None = None,
                   accuracy: str = "tight") -> np.ndarray:
    """Nested reference: solve_ivp per run, a scalar root solve (brentq) of the surface
    concentration in every right-hand-side call, solve_bvp for eta in every root evaluation,
    at the tolerances ``ACCURACY[accuracy]``; NaN at the points of runs not computed."""
    bvp_tol, root_tol, ivp_rtol = ACCURACY[accuracy]
    vals = {k: v[0] for k, v in model.expand(theta[None, :]).items()}
    spec = model.spec
    law = spec.rate_law
    out = np.full(model.n_obs, np.nan)
    rho = spec.particle_density
    C_ref = law.reference_concentration
    for i in range(len(model.run_ids)) if runs is None else runs:
        T, N, dp, w = model.T[i], model.N[i], model.dp[i], model.w[i]
        k = float(law.rate(C_ref, T, {n: vals[n][i] for n in law.parameter_names}))
        n = float(vals["order"][i])
        De = float(vals["effective_diffusivity"][i])
        kc = float(spec.film.kc(N, dp, T, {p: vals[p][i] for p in spec.film.parameter_names}))
        kfa = kc * model.a_m[i]
        eta = NaivePellet(rho * k, n, De, dp / 2.0, C_ref, bvp_tol)

        def r_obs(Cb: float, eta=eta, k=k, n=n, kfa=kfa) -> float:
            if Cb <= 0:
                return 0.0
            f = lambda Cs: kfa * (Cb - Cs) - eta(Cs) * k * (Cs / C_ref) ** n  # noqa: E731
            Cs = brentq(f, 1e-12 * Cb, Cb, xtol=root_tol * Cb, rtol=max(root_tol, 4.5e-16))
            return eta(Cs) * k * (Cs / C_ref) ** n

        sel = model.run_index == i
        t_eval = model.times[sel]
        sol = solve_ivp(lambda t, c, r_obs=r_obs, w=w: [-w * r_obs(c[0])], (0.0, t_eval[-1]),
                        [model.C0[i]], t_eval=t_eval, rtol=ivp_rtol,
                        atol=ivp_rtol * 1e-3 * model.C0[i])
        out[sel] = sol.y[0]
    return out


def closed_form_first_order(model: Model, theta: np.ndarray):
    """The first-order model in plain numpy for parameter sets ``theta`` (m, p) with the order
    set to 1 (series resistances, sphere eta = (1/phi)[1/tanh(3 phi) - 1/(3 phi)], C = C0
    exp(-w k_obs t); Satterfield 1970, from memory), and the same sets for the engine."""
    th = np.atleast_2d(theta).copy()
    th[:, model.columns.index("order")] = 1.0
    vals = model.expand(th)
    spec, law = model.spec, model.spec.rate_law
    ri, t = model.run_index, model.times

    def closed() -> np.ndarray:
        k1 = vals["k_ref"] * np.exp(-vals["activation_energy"] / 8.314462618 * (
            1.0 / model.T - 1.0 / law.reference_temperature)) / law.reference_concentration
        phi = model.L * np.sqrt(spec.particle_density * k1 / vals["effective_diffusivity"])
        eta = (1.0 / np.tanh(3.0 * phi) - 1.0 / (3.0 * phi)) / phi
        kc = vals["kc_ref"] * (model.N / spec.film.reference_speed) ** vals[
            "agitation_exponent"] * (model.dp / spec.film.reference_diameter) ** (
            -vals["size_exponent"])
        k_obs = 1.0 / (1.0 / (kc * model.a_m) + 1.0 / (eta * k1))
        return model.C0[ri] * np.exp(-model.w[ri] * k_obs[:, ri] * t)

    return closed, th


def best_time(func, reps: int, rounds: int = 5) -> float:
    """Smallest mean CPU time of ``func`` over ``rounds`` rounds of ``reps`` calls (CPU time:
    the machine is shared, and wall time counts the other processes)."""
    best = np.inf
    for _ in range(rounds):
        t0 = time.process_time()
        for _ in range(reps):
            func()
        best = min(best, (time.process_time() - t0) / reps)
    return best


def main() -> None:
    import argparse

    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--runs", type=int, default=3,
                        help="run the naive reference on K runs spread over the campaign and "
                        "scale its time to every run (0: every run; default 3)")
    args = parser.parse_args()
    study = load_study(ROOT / "examples" / "demo" / "truth.toml")
    model = Model(ModelSpec.from_study(study), study)
    theta = model.x0
    n_runs = len(model.run_ids)
    print(f"campaign: {n_runs} runs, {model.n_obs} points, {len(theta)} parameters")
    subset = (list(range(n_runs)) if args.runs <= 0 else
              list(np.unique(np.linspace(0, n_runs - 1, args.runs).round().astype(int))))
    print(f"naive reference on runs {[model.run_ids[i] for i in subset]}")
    rng = np.random.default_rng(1)
    theta64 = theta[None, :] * rng.uniform(0.95, 1.05, size=(64, theta.size))
    theta64[0] = theta
    theta32 = theta64[:32]

    model.predict(theta[None, :])  # warm up (pellet table load)
    t1 = best_time(lambda: model.predict(theta[None, :]), 10)
    t32 = best_time(lambda: model.predict(theta32), 3)
    t64 = best_time(lambda: model.predict(theta64), 2)
    fast32 = model.predict(theta32)
    closed, th1 = closed_form_first_order(model, theta32)
    t_closed = best_time(closed, 50)
    first = np.max(np.abs(model.predict(th1) - closed()) / closed())
    print(f"kinfit, 1 parameter set: {t1 * 1e3:.3f} ms")
    print(f"kinfit, 32 parameter sets in one call: {t32 * 1e3:.2f} ms "
          f"({t32 / 32 * 1e3:.3f} ms per set)")
    print(f"kinfit, 64 parameter sets in one call: {t64 * 1e3:.2f} ms "
          f"({t64 / 64 * 1e3:.3f} ms per set)")
    print(f"closed-form first order, 32 sets: {t_closed * 1e3:.3f} ms "
          f"({t_closed / 32 * 1e3:.4f} ms per set); the engine at first order equals it to "
          f"{first:.1e}")

    c0 = time.process_time()
    tight = naive_profiles(model, theta, subset, "tight")
    t_tight = (time.process_time() - c0) * n_runs / len(subset)
    pts = np.isfinite(tight)
    rel = lambda a, ref: np.abs(a[pts] - ref[pts]) / np.abs(ref[pts])  # noqa: E731
    diff_tight = float(np.max(rel(fast32[0], tight)))
    print(f"tight naive reference, central set: {t_tight:.1f} s CPU scaled to {n_runs} runs; "
          f"max rel diff of kinfit {diff_tight:.2e}")
    c0 = time.process_time()
    worst, diffs = 0.0, []
    for k in range(theta32.shape[0]):
        ref = naive_profiles(model, theta32[k], subset, "matched")
        if k == 0:
            print(f"matched reference against the tight one: "
                  f"{np.max(rel(ref, tight)):.2e}", flush=True)
        diffs.append(float(np.max(rel(fast32[k], ref))))
    t_matched = (time.process_time() - c0) / theta32.shape[0] * n_runs / len(subset)
    worst = max(diffs)
    print(f"matched naive reference: {t_matched:.1f} s CPU per set scaled to {n_runs} runs; "
          f"kinfit against it over all {len(diffs)} sets x {int(pts.sum())} points: max rel "
          f"diff {worst:.2e} (median over sets {np.median(diffs):.1e})")
    diff = max(worst, diff_tight)
    print(f"speedup_1={t_matched / t1:.0f} speedup_32={t_matched / (t32 / 32):.0f} "
          f"(against the matched reference)")
    print(f"ms_per_set_32={t32 / 32 * 1e3:.3f} ratio_to_closed_form={t32 / t_closed:.0f} "
          f"speedup_64={t_matched / (t64 / 64):.0f} max_rel_diff={diff:.2e}")


if __name__ == "__main__":
    main()
