"""Calibration of the model-adequacy tests (not collected as a unit test).

Right model: campaigns simulated from the fitted model itself (the invented 24-run slurry
campaign of ``tests/adequacy_campaign.py``, temperature-blind transport, noise 6 mol/m^3 stated
in the study), each refitted by least squares and tested. Each test's false-alarm rate at its
own nominal level 0.05 is printed with a 95 % Clopper-Pearson interval
(``scipy.stats.binomtest``), and the overall verdict's (Holm's rule, family-wise 0.05).

Negative control: campaigns generated with viscosity-scaled transport (De ~ T/mu(T), kc by the
Sano et al. 1974 slurry form; IAPWS water from the ``chemicals`` library) and fitted with
temperature-blind transport; the verdict must alarm, and its message should name temperature.

Run from the repository root: ``python tests/benchmarks/bench_adequacy.py --campaigns 200``.
Last line: ``campaigns=N false_alarm_max=... control_alarm=...``.
"""

from __future__ import annotations

import argparse
import sys
import tempfile
import time
from collections import defaultdict
from dataclasses import replace
from pathlib import Path

import numpy as np
from scipy import stats

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))

from adequacy_campaign import NOISE, truth_profiles, write_campaign  # noqa: E402

from kinfit.estimate.least_squares import fit_problem  # noqa: E402
from kinfit.model import Model  # noqa: E402
from kinfit.model_checks import fit_adequacy  # noqa: E402
from kinfit.simulate import run_table  # noqa: E402
from kinfit.study import load_study  # noqa: E402

__all__ = ["main"]


def _campaigns(folder: Path, transport: str, n: int, rng: np.random.Generator):
    """(model, study, problem, Y) with Y the (n, n_obs) simulated observations (one draw)."""
    gen_model, f_true = truth_profiles(folder / transport, transport=transport)
    path = write_campaign(folder / transport / "fit", f_true, gen_model)
    study = load_study(path)
    from kinfit.fitting import main_spec

    model = Model(main_spec(study), study)
    Y = f_true[None, :] + rng.normal(loc=0.0, scale=NOISE, size=(n, f_true.size))
    return model, study, model.problem(), Y


def _run(model, study, problem, Y):
    out = []
    for y in Y:
        est = fit_problem(replace(problem, y=y), warn=False)
        runs = run_table(model, est.x)
        out.append((est.converged, fit_adequacy(model, study, est, runs,
                                                weights=problem.weights)))
    return out


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--campaigns", type=int, default=200)
    ap.add_argument("--controls", type=int, default=50)
    ap.add_argument("--seed", type=int, default=20261204)
    args = ap.parse_args()
    rng = np.random.default_rng(args.seed)
    t0 = time.perf_counter()
    with tempfile.TemporaryDirectory() as tmp:
        right = _run(*_campaigns(Path(tmp), "blind", args.campaigns, rng))
        control = _run(*_campaigns(Path(tmp), "viscosity", args.controls, rng))
    alarms: dict[str, int] = defaultdict(int)
    seen: dict[str, int] = defaultdict(int)
    verdict_alarms = 0
    n_conv = sum(c for c, _ in right)
    for _conv, a in right:
        verdict_alarms += not a["adequate"]
        for t in a["tests"]:
            key = t["name"] + (f" [{t['factor']}" + (f", {t['subset']}" if t["subset"] else "")
                               + "]" if t["factor"] else "")
            seen[key] += 1
            alarms[key] += t["p"] is not None and t["p"] <= 0.05
    n = len(right)
    print(f"right model: {n} campaigns ({n_conv} converged), {time.perf_counter() - t0:.0f} s")
    print(f"  {'test':<86}{'rate':>7}   95 % interval (nominal 0.05)")
    rates = []
    for key in seen:
        k, m = alarms[key], seen[key]
        ci = stats.binomtest(k, m, 0.05).proportion_ci(confidence_level=0.95)
        rates.append(k / m)
        print(f"  {key:<86}{k / m:>7.3f}   [{ci.low:.3f}, {ci.high:.3f}]")
    ci = stats.binomtest(verdict_alarms, n, 0.05).proportion_ci(confidence_level=0.95)
    print(f"  overall verdict (Holm, family-wise 0.05): {verdict_alarms / n:.3f} "
          f"[{ci.low:.3f}, {ci.high:.3f}]")
    c_alarm = sum(not a["adequate"] for _, a in control)
    c_temp = sum((not a["adequate"]) and "temperature" in a["message"] for _, a in control)
    print(f"negative control (viscosity-scaled transport fitted temperature-blind): "
          f"{c_alarm}/{len(control)} alarmed, {c_temp}/{len(control)} name temperature")
    print(f"campaigns={n} false_alarm_max={max(rates):.3f} "
          f"false_alarm_verdict={verdict_alarms / n:.3f} control_alarm={c_alarm / len(control):.3f} "
          f"control_names_temperature={c_temp / len(control):.3f}")


if __name__ == "__main__":
    main()
