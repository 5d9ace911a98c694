"""Timing of the pellet effectiveness-factor routes (not collected as a unit test).

Prints, for m parameter sets times n points (default 64 x 5000):

* ``eta_power_law`` (tabulated n-th order) on 1e5 points and on m x n points, for one order,
  one order per parameter set, one order per point and low orders (dead-zone tables), next to
  the closed-form first-order ``eta_first_order`` on the same points;
* ``pellet_eta`` (batched finite-volume Newton) for first-order and Langmuir-Hinshelwood
  kinetics on m x n points;
* a naive reference measured in the same run: one ``solve_bvp`` per point (tol 1e-10, the
  tests' reference solver) on a sample of points, extrapolated to m x n points, with the
  accuracy of both routes on that sample.

Run: ``python tests/benchmarks/bench_pellet.py --m 64 --n 5000``
"""

from __future__ import annotations

import argparse
import sys
import time
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parents[2]
sys.path.insert(0, str(ROOT))
sys.path.insert(0, str(ROOT / "tests"))

from pellet_reference import power_law_reference, reference_eta  # noqa: E402

from kinfit.physics.pellet.effectiveness import eta_first_order, eta_power_law  # noqa: E402

from kinfit.physics.pellet.numerical import pellet_eta

__all__ = ["main"]

DE, LEN = 1e-9, 1e-4


def best_of(fun, repeats: int) -> float:
    """Shortest wall time of ``repeats`` calls, s."""
    times = []
    for _ in range(repeats):
        t0 = time.perf_counter()
        fun()
        times.append(time.perf_counter() - t0)
    return min(times)


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--m", type=int, default=64, help="parameter sets")
    ap.add_argument("--n", type=int, default=5000, help="points per parameter set")
    ap.add_argument("--repeats", type=int, default=7)
    ap.add_argument("--sample", type=int, default=12, help="points for the naive reference")
    ap.add_argument("--geometry", default="sphere")
    ap.add_argument("--seed", type=int, default=2024)
    args = ap.parse_args()
    rng = np.random.default_rng(args.seed)
    geo = args.geometry
    m, n = args.m, args.n

    t0 = time.perf_counter()
    eta_power_law(1.0, 1.0, geo)
    print(f"table load/build for {geo}: {time.perf_counter() - t0:.3f} s (first call)")

    # ---- eta_power_law
    print(f"\neta_power_law ({geo}), Phi log-uniform in [1e-3, 1e3]; best of {args.repeats}")
    for label, size in (("1e5 points", (64, 1563)), (f"{m} x {n}", (m, n))):
        phi = 10 ** rng.uniform(-3, 3, size)
        cases = {
            "one order (1.5)": 1.5,
            "order per set (0.6..3)": rng.uniform(0.6, 3.0, (size[0], 1)),
            "order per point (0.6..3)": rng.uniform(0.6, 3.0, size),
            "order per set (0..0.6)": rng.uniform(0.0, 0.6, (size[0], 1)),
        }
        base = best_of(lambda phi=phi: eta_first_order(phi, geo), args.repeats)
        print(f"  {label}: eta_first_order (closed form) {base * 1e3:8.2f} ms")
        for name, order in cases.items():
            t = best_of(lambda phi=phi, order=order: eta_power_law(phi, order, geo),
                        args.repeats)
            print(f"  {label}: {name:26s} {t * 1e3:8.2f} ms  ({t / base:4.1f} x closed form)")

    # ---- pellet_eta
    print(f"\npellet_eta ({geo}), {m} x {n} points, default grid")
    phi_t = 10 ** rng.uniform(-3, 3, (m, n))
    Cs = rng.uniform(10.0, 1000.0, (m, n))
    K = 10 ** rng.uniform(-4, -2, (m, 1))[..., None]          # m^3/mol, K Cs up to 10
    R = (1 + {"slab": 0, "cylinder": 1, "sphere": 2}[geo]) * LEN
    k = ((phi_t / LEN) ** 2 * DE)[..., None]                   # 1/s
    laws = {
        "first order": (lambda C: k * C, lambda C: k + 0.0 * C),
        "Langmuir-Hinshelwood": (lambda C: k * C / (1 + K * C), lambda C: k / (1 + K * C) ** 2),
    }
    timing = {}
    for name, (rate, drate) in laws.items():
        t0 = time.perf_counter()
        eta, phi = pellet_eta(rate, drate, Cs, DE, LEN, geo)
        timing[name] = time.perf_counter() - t0
        print(f"  {name:22s} {timing[name]:7.2f} s  ({timing[name] / (m * n) * 1e6:.1f} us/point)")
        if name == "first order":
            err = np.max(np.abs(eta / eta_first_order(phi, geo) - 1))
            print(f"  {'':22s} max rel. error vs closed form {err:.1e}")

    # ---- naive reference: one solve_bvp per point, same run
    print(f"\nnaive reference: solve_bvp per point on {args.sample} sampled points")
    idx = rng.choice(m * n, size=args.sample, replace=False)
    a = {"slab": 0, "cylinder": 1, "sphere": 2}[geo]
    t0 = time.perf_counter()
    refs = []
    for i in idx:
        kc = float(K.ravel()[i // n] * Cs.ravel()[i])
        g2 = R**2 * float(k.ravel()[i]) / DE
        refs.append(reference_eta(lambda u, g2=g2, kc=kc: g2 * u / (1 + kc * np.abs(u)),
                                  lambda u, g2=g2, kc=kc: g2 / (1 + kc * np.abs(u)) ** 2, a,
                                  1.0 / np.sqrt(g2 / (1 + kc)), clip=False,
                                  max_nodes=200_000))
    t_ref = (time.perf_counter() - t0) / args.sample
    sub = np.unravel_index(idx, (m, n))
    k_s, K_s = k[sub], K[:, 0, 0][sub[0]][:, None]
    eta, _ = pellet_eta(lambda C: k_s * C / (1 + K_s * C), lambda C: k_s / (1 + K_s * C) ** 2,
                        Cs[sub], DE, LEN, geo)
    err = np.max(np.abs(eta / np.array(refs) - 1))
    print(f"  {t_ref * 1e3:.1f} ms per point -> {t_ref * m * n:.0f} s for {m} x {n} "
          f"(pellet_eta is {t_ref * m * n / timing['Langmuir-Hinshelwood']:.0f} x faster); "
          f"pellet_eta max rel. error on the sample {err:.1e}")
    phis = 10 ** rng.uniform(-3, 3, args.sample)
    orders = rng.uniform(1.0, 3.0, args.sample)
    t0 = time.perf_counter()
    refs = [power_law_reference(p, o, a, max_nodes=200_000) for p, o in zip(phis, orders,
                                                                           strict=True)]
    t_ref = (time.perf_counter() - t0) / args.sample
    err = np.max(np.abs(eta_power_law(phis, orders, geo) / np.array(refs) - 1))
    print(f"  power law: {t_ref * 1e3:.1f} ms per point; eta_power_law max rel. error on the "
          f"sample {err:.1e}")


if __name__ == "__main__":
    main()
