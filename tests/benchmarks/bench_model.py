"""Benchmark: the demo campaign's full prediction (all runs, all points; order-1.5 kinetics +
film + pore) by kinfit's vectorised engine, for 1 and for 64 parameter sets in one call,
against a naive nested reference written here (solve_ivp per run, a scalar root solve of the
surface concentration in every right-hand-side call, solve_bvp for the effectiveness factor in
every root-function call) on the same inputs.

Run from the repository root:  python3 tests/benchmarks/bench_model.py
Last line: speedup_1=<x> speedup_64=<y> max_rel_diff=<z> (targets >= 1000, >= 20000, <= 1e-5).
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
    """Effectiveness factor of a sphere by solve_bvp (tol 1e-10) on the scaled pellet equation
    y'' + (2/x) y' = phi2 y^n, y'(0) = 0, y(1) = 1, with y = c/Cs, x = r/R and
    phi2 = R^2 k_v Cs^(n-1) / (De C_ref^n); eta = 3 y'(1) / phi2. Warm-started from the
    previous solution of the same run (the only concession to speed)."""

    def __init__(self, k_v: float, n: float, De: float, R: float, C_ref: float) -> None:
        self.k_v, self.n, self.De, self.R, self.C_ref = k_v, n, De, R, C_ref
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
        sol = solve_bvp(rhs, bc, self.x, self.y, tol=1e-10, max_nodes=200000)
        self.last_phi2 = phi2
        if not sol.success:
            raise RuntimeError(f"solve_bvp failed at phi2 = {phi2:.3g}: {sol.message}")
        self.x, self.y = sol.x, sol.y
        return float(3.0 * sol.y[1, -1] / phi2)


def naive_profiles(model: Model, theta: np.ndarray, runs: list[int] | None = None
                   ) -> np.ndarray:
    """Nested reference: solve_ivp per run, a scalar root solve (brentq) of the surface
    concentration in every right-hand-side call, solve_bvp for eta in every root evaluation."""
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
        eta = NaivePellet(rho * k, n, De, dp / 2.0, C_ref)

        def r_obs(Cb: float, eta=eta, k=k, n=n, kfa=kfa) -> float:
            if Cb <= 0:
                return 0.0
            f = lambda Cs: kfa * (Cb - Cs) - eta(Cs) * k * (Cs / C_ref) ** n  # noqa: E731
            Cs = brentq(f, 1e-12 * Cb, Cb, xtol=1e-13 * Cb, rtol=1e-12)
            return eta(Cs) * k * (Cs / C_ref) ** n

        sel = model.run_index == i
        t_eval = model.times[sel]
        sol = solve_ivp(lambda t, c, r_obs=r_obs, w=w: [-w * r_obs(c[0])], (0.0, t_eval[-1]),
                        [model.C0[i]], t_eval=t_eval, rtol=1e-9, atol=1e-9)
        out[sel] = sol.y[0]
    return out


def order1(model: Model, theta: np.ndarray) -> None:
    """First order: the engine against the closed form written out here (series resistances,
    sphere eta = (1/phi)[1/tanh(3 phi) - 1/(3 phi)], C = C0 exp(-w k_obs t))."""
    th = theta.copy()
    th[model.columns.index("order")] = 1.0
    vals = {k: v[0] for k, v in model.expand(th[None, :]).items()}
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
        return model.C0[ri] * np.exp(-model.w[ri] * k_obs[ri] * t)

    reps = 200
    t0 = time.perf_counter()
    for _ in range(reps):
        ref = closed()
    t_closed = (time.perf_counter() - t0) / reps
    t0 = time.perf_counter()
    for _ in range(reps):
        got = model.predict(th[None, :])[0]
    t_engine = (time.perf_counter() - t0) / reps
    print(f"order 1: closed form {t_closed * 1e6:.0f} us, engine {t_engine * 1e6:.0f} us "
          f"(ratio {t_engine / t_closed:.1f}), max rel diff "
          f"{np.max(np.abs(got - ref) / ref):.1e}")


def main() -> None:
    import argparse

    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--runs", type=int, default=None,
                        help="time the naive reference on every k-th run only and scale its "
                        "time to the whole campaign (default: all runs)")
    args = parser.parse_args()
    study = load_study(ROOT / "examples" / "demo" / "truth.toml")
    model = Model(ModelSpec.from_study(study), study)
    theta = model.x0
    n_runs = len(model.run_ids)
    print(f"campaign: {n_runs} runs, {model.n_obs} points, {len(theta)} parameters")
    subset = None if args.runs is None else list(range(0, n_runs, max(1, n_runs // args.runs)))
    t0 = time.perf_counter()
    ref = naive_profiles(model, theta, subset)
    t_naive = time.perf_counter() - t0
    if subset is not None:
        print(f"naive nested reference on runs {[model.run_ids[i] for i in subset]}: "
              f"{t_naive:.1f} s, scaled to {n_runs} runs: {t_naive * n_runs / len(subset):.1f} s")
        t_naive *= n_runs / len(subset)
    else:
        print(f"naive nested reference: {t_naive:.2f} s")
    checked = np.isfinite(ref)

    model.predict(theta[None, :])  # warm up (pellet table load)
    reps = 20
    t0 = time.perf_counter()
    for _ in range(reps):
        fast = model.predict(theta[None, :])[0]
    t1 = (time.perf_counter() - t0) / reps
    rng = np.random.default_rng(1)
    theta64 = theta[None, :] * rng.uniform(0.95, 1.05, size=(64, theta.size))
    theta64[0] = theta
    t0 = time.perf_counter()
    for _ in range(5):
        fast64 = model.predict(theta64)
    t64 = (time.perf_counter() - t0) / 5
    rel = lambda a: np.abs(a[checked] - ref[checked]) / np.abs(ref[checked])  # noqa: E731
    diff = float(max(np.max(rel(fast)), np.max(rel(fast64[0]))))
    print(f"kinfit, 1 parameter set: {t1 * 1e3:.3f} ms")
    print(f"kinfit, 64 parameter sets in one call: {t64 * 1e3:.2f} ms "
          f"({t64 / 64 * 1e3:.3f} ms per set)")
    print(f"max relative difference to the reference over {int(checked.sum())} points: "
          f"{diff:.2e}")
    order1(model, theta)
    print(f"speedup_1={t_naive / t1:.0f} speedup_64={t_naive / (t64 / 64):.0f} "
          f"max_rel_diff={diff:.2e}")


if __name__ == "__main__":
    main()
