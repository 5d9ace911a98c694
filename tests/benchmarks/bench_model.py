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

from kinfit.model import Model, ModelSpec  # noqa: E402
from kinfit.study import load_study  # noqa: E402


class NaivePellet:
    """Effectiveness factor of a sphere by solve_bvp (tol 1e-9) on c'' + 2c'/r = r_v(c)/De,
    warm-started from the previous solution of the same run (the only concession to speed)."""

    def __init__(self, k_v: float, n: float, De: float, R: float, C_ref: float) -> None:
        self.k_v, self.n, self.De, self.R, self.C_ref = k_v, n, De, R, C_ref
        phi = R * np.sqrt(k_v / (De * C_ref))
        self.r = np.append(R * (1.0 - np.geomspace(1.0, 1e-6, 120)), R)  # clustered at R
        self.guess = np.vstack([np.exp(-phi * (1.0 - self.r / R)),
                                phi / R * np.exp(-phi * (1.0 - self.r / R))])
        self.last_cs = 1.0

    def __call__(self, Cs: float) -> float:
        if Cs <= 0:
            return 1.0
        k_v, n, De, R, C_ref = self.k_v, self.n, self.De, self.R, self.C_ref

        def rhs(x, y):
            c = np.maximum(y[0], 0.0)
            src = k_v * (c / C_ref) ** n / De
            lap = np.where(x > 0, -2.0 * y[1] / np.maximum(x, 1e-300), 0.0)
            return np.vstack([y[1], np.where(x > 0, src + lap, src / 3.0)])

        def bc(ya, yb):
            return np.array([ya[1], yb[0] - Cs])

        y0 = self.guess * (Cs / self.last_cs)
        sol = solve_bvp(rhs, bc, self.r, y0, tol=1e-9, max_nodes=100000)
        if not sol.success:
            raise RuntimeError(f"solve_bvp failed: {sol.message}")
        self.r, self.guess, self.last_cs = sol.x, sol.y, Cs
        # eta = surface flux x area / (volume x r_v(Cs)) = 3 De c'(R) / (R r_v(Cs))
        return float(3.0 * De * sol.y[1, -1] / (R * k_v * (Cs / C_ref) ** n))


def naive_profiles(model: Model, theta: np.ndarray) -> np.ndarray:
    """Nested reference: solve_ivp per run, a scalar root solve (brentq) of the surface
    concentration in every right-hand-side call, solve_bvp for eta in every root evaluation."""
    vals = {k: v[0] for k, v in model.expand(theta[None, :]).items()}
    spec = model.spec
    law = spec.rate_law
    out = np.empty(model.n_obs)
    rho = spec.particle_density
    C_ref = law.reference_concentration
    for i in range(len(model.run_ids)):
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


def main() -> None:
    study = load_study(ROOT / "examples" / "demo" / "truth.toml")
    model = Model(ModelSpec.from_study(study), study)
    theta = model.x0
    print(f"campaign: {len(model.run_ids)} runs, {model.n_obs} points, "
          f"{len(theta)} parameters")
    t0 = time.perf_counter()
    ref = naive_profiles(model, theta)
    t_naive = time.perf_counter() - t0
    print(f"naive nested reference: {t_naive:.2f} s")

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
    diff = float(np.max(np.abs(fast - ref) / np.abs(ref)))
    diff64 = float(np.max(np.abs(fast64[0] - ref) / np.abs(ref)))
    print(f"kinfit, 1 parameter set: {t1 * 1e3:.3f} ms")
    print(f"kinfit, 64 parameter sets in one call: {t64 * 1e3:.2f} ms "
          f"({t64 / 64 * 1e3:.3f} ms per set)")
    print(f"max relative difference to the reference: {max(diff, diff64):.2e}")
    print(f"speedup_1={t_naive / t1:.0f} speedup_64={t_naive / (t64 / 64):.0f} "
          f"max_rel_diff={max(diff, diff64):.2e}")


if __name__ == "__main__":
    main()
