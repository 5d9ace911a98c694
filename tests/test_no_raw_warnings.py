"""Every command on the demo campaign and the example claim, with every warning that is not
kinfit's own turned into an error: no raw numpy, scipy, pandas or matplotlib warning reaches
the user. Behaviour check (no outside source applies); short options keep it bounded."""

from __future__ import annotations

import warnings
from pathlib import Path

import pytest

from kinfit.cli import KINFIT_WARNINGS, main

ROOT = Path(__file__).resolve().parents[1]
DEMO = str(ROOT / "examples" / "demo" / "study.toml")
CLAIM = str(ROOT / "examples" / "claim" / "claim.toml")


def _commands(out: Path) -> list[list[str]]:
    fit = str(out / "fit")
    return [
        ["check", DEMO],
        ["simulate", DEMO, "--out", str(out / "sim")],
        ["fit", DEMO, "--out", fit, "--no-profile", "--quiet"],
        ["fit", DEMO, "--out", str(out / "cmp"), "--no-profile", "--quiet", "--compare",
         "power/none/direct"],
        ["sample", DEMO, "--fit", fit, "--steps", "60", "--chunk", "30", "--walkers", "16",
         "--quiet"],
        ["diagnose", DEMO, "--fit", fit, "--out", str(out / "diag")],
        ["criteria", "--rate", "0.05 mol/(kg*s)", "--diameter", "100 um", "--density",
         "1500 kg/m^3", "--concentration", "0.5 mol/L", "--diffusivity", "1e-9 m^2/s"],
        ["report", DEMO, "--fit", fit, "--out", fit],
        ["audit", CLAIM, "--out", str(out / "audit")],
        ["predict", DEMO, "--fit", fit, "--at", "T=60 degC", "--draws", "40",
         "--out", str(out / "pred")],
        ["predict", DEMO, "--fit", fit, "--at", "dp=2000 um, N=100 rpm, T=120 degC",
         "--draws", "40", "--out", str(out / "pred2")],
        ["predict", DEMO, "--fit", fit, "--at", "dp=2000 um, N=100 rpm, T=120 degC",
         "--draws", "40", "--extrapolate", "--out", str(out / "pred3")],
        ["plan", DEMO, "--fit", fit, "--runs", "3", "--out", str(out / "plan")],
        ["run", DEMO, "--out", str(out / "run"), "--steps", "0", "--quiet"],
    ]


@pytest.mark.slow
def test_every_command_on_the_demo_lets_no_library_warning_through(tmp_path, capsys):
    codes = {}
    for argv in _commands(tmp_path):
        with warnings.catch_warnings():
            warnings.simplefilter("error")
            for category in KINFIT_WARNINGS:
                warnings.filterwarnings("default", category=category)
            codes[" ".join(argv[:1] + argv[-2:])] = main(argv)
        err = capsys.readouterr().err
        assert "Traceback" not in err, argv
        assert "RuntimeWarning" not in err and "encountered in" not in err, argv
    # the refused prediction far outside the campaign exits 1; everything else succeeds
    assert [c for c in codes.values() if c != 0] == [1], codes
