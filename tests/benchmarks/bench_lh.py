"""Benchmark: Model.predict of a Langmuir-Hinshelwood (m = 1) campaign, 24 runs, with the
tabulated effectiveness factor against the numerical pellet solver (the path every LH
evaluation took before the table), same inputs, same run (not collected as a unit test).

The study is the demo campaign with an LH rate law (invented data, generated below: the
concentrations are placeholders, predict does not read them). The numerical path is obtained by
switching the law's Langmuir-Hinshelwood form off on the instance, so every surface iteration
calls ``pellet_eta``.

Run from the repository root:  python3 tests/benchmarks/bench_lh.py [--sets 64] [--m 1]
Last line: speedup_1=<x> speedup_<sets>=<y> max_rel_diff=<z>
"""

from __future__ import annotations

import argparse
import itertools
import sys
import tempfile
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parents[2]
sys.path.insert(0, str(ROOT))

from bench_pellet import best_of  # noqa: E402

from kinfit.model import Model, ModelSpec  # noqa: E402
from kinfit.study import load_study  # noqa: E402

__all__ = ["main", "write_study"]

STUDY = """\
# INVENTED DATA: the demo slurry-hydrogenation campaign with a Langmuir-Hinshelwood rate law
[study]
name = "benchmark: invented LH slurry campaign"

[data]
runs = "runs.csv"
observations = "observations.csv"

[catalyst]
geometry = "{geometry}"
particle_density = "1500 kg/m^3"

[kinetics]
rate_law = "langmuir_hinshelwood"
reference_temperature = "55 degC"
m = {m}

[film]
model = "agitation"
reference_speed = "600 rpm"
reference_diameter = "100 um"

[pellet]
diffusivity = "direct"

[error]
model = "constant"

[parameters.k_ref]
value = "1 mol/(kg*s)"
min = "1e-4 mol/(kg*s)"
max = "100 mol/(kg*s)"

[parameters.activation_energy]
value = "50 kJ/mol"
min = "5 kJ/mol"
max = "200 kJ/mol"

[parameters.adsorption_constant]
value = "1 L/mol"
min = "1e-3 L/mol"
max = "1e3 L/mol"

[parameters.effective_diffusivity]
value = "3e-10 m^2/s"
min = "1e-12 m^2/s"
max = "1e-8 m^2/s"

[parameters.kc_ref]
value = "5e-5 m/s"
min = "1e-7 m/s"
max = "1e-2 m/s"

[parameters.agitation_exponent]
value = 0.5
min = 0.0
max = 1.5

[parameters.size_exponent]
value = 0.7
min = -0.5
max = 2.0

[parameters.adsorption_enthalpy]
value = "-20 kJ/mol"
min = "-100 kJ/mol"
max = "0 kJ/mol"
"""


def write_study(folder: Path, *, m: int = 1, geometry: str = "sphere") -> Path:
    """Write the invented 24-run campaign (3 temperatures x 2 speeds x 2 sizes x 2 loadings,
    15 sampling times over 100 min) into ``folder``; returns the study file."""
    runs = ["run,temperature [degC],stirrer_speed [rpm],particle_diameter [um],"
            "catalyst_loading [g/L],initial_concentration [mol/L]"]
    obs = ["run,time [min],concentration [mol/m^3]"]
    times = np.linspace(0.0, 100.0, 15)
    grid = itertools.product((40.0, 55.0, 70.0), (300.0, 1200.0), (10.0, 250.0), (1.0, 2.5))
    for i, (T, N, dp, w) in enumerate(grid, start=1):
        runs.append(f"R{i:02d},{T},{N},{dp},{w},0.8")
        obs += [f"R{i:02d},{t:.3f},{800.0 * np.exp(-0.01 * t):.3f}" for t in times]
    (folder / "runs.csv").write_text("\n".join(runs) + "\n")
    (folder / "observations.csv").write_text("\n".join(obs) + "\n")
    path = folder / "study.toml"
    path.write_text(STUDY.format(m=m, geometry=geometry))
    return path


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--sets", type=int, default=64, help="parameter sets in the batched call")
    ap.add_argument("--m", type=int, default=1, choices=(1, 2))
    ap.add_argument("--geometry", default="sphere")
    ap.add_argument("--repeats", type=int, default=5)
    ap.add_argument("--seed", type=int, default=7)
    args = ap.parse_args()
    with tempfile.TemporaryDirectory() as tmp:
        study = load_study(write_study(Path(tmp), m=args.m, geometry=args.geometry))
    model = Model(ModelSpec.from_study(study), study)
    law = model.spec.rate_law
    rng = np.random.default_rng(args.seed)
    one = model.x0[None, :]
    many = one * np.exp(0.3 * rng.standard_normal((args.sets, one.shape[1])))
    print(f"{len(model.run_ids)} runs, {model.n_obs} points, m = {args.m}, {args.geometry}")

    model.predict(one)                                        # table load, warm-up
    t_tab_1 = best_of(lambda: model.predict(one), args.repeats)
    t_tab_n = best_of(lambda: model.predict(many), max(1, args.repeats // 2))
    fast = model.predict(many)

    law.langmuir_hinshelwood_form = lambda T, p: None         # numerical path, this instance
    try:
        model.predict(one)
        # both paths timed alike: best of the same number of repeats
        t_num_1 = best_of(lambda: model.predict(one), args.repeats)
        t_num_n = best_of(lambda: model.predict(many), max(1, args.repeats // 2))
        slow = model.predict(many)
    finally:
        del law.langmuir_hinshelwood_form
    diff = float(np.max(np.abs(fast / slow - 1.0)))
    print(f"  1 set:   table {t_tab_1 * 1e3:8.2f} ms   numerical {t_num_1 * 1e3:9.2f} ms")
    print(f"  {args.sets} sets: table {t_tab_n * 1e3:8.2f} ms   numerical {t_num_n * 1e3:9.2f} ms")
    print(f"  max relative difference of the predictions: {diff:.2e}")
    print(f"speedup_1={t_num_1 / t_tab_1:.1f} speedup_{args.sets}={t_num_n / t_tab_n:.1f} "
          f"max_rel_diff={diff:.2e}")


if __name__ == "__main__":
    main()
