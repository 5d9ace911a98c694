"""Study input: loader round trips, unit conversions, and every validation case at the boundary
(each bad input exits 2 with a one-line message naming the culprit and no traceback)."""

from __future__ import annotations

import textwrap
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
import studies
from studies import runs_csv, study_text

from kinfit.cli import main
from kinfit.errors import StudyError
from kinfit.study import comparison_sets, load_study
from kinfit.units import parse_quantity, to_si

STUDY = study_text(
    {"k_ref": "0.05 mol/(kg*s)", "activation_energy": "60 kJ/mol", "order": 1.0,
     "effective_diffusivity": "1e-9 m^2/s", "kc_ref": "1e-4 m/s", "agitation_exponent": 0.5,
     "size_exponent": 0.5},
    reference_temperature="50 degC", reference_diameter="50 um",
)

RUNS = runs_csv([("A1", 45, 300, 50, 2, 0.5), ("A2", 45, 900, 50, 2, 0.5),
                 ("A3", 45, 900, 150, 2, 0.5)])

OBS = """\
run,time [min],concentration [mol/L]
A1,0,0.5
A1,10,0.4
A1,20,0.33
A2,0,0.5
A2,10,0.41
A2,20,0.34
A3,0,0.5
A3,10,0.45
A3,20,0.41
"""


def write_study(folder: Path, *, study: str = STUDY, runs: str = RUNS, obs: str = OBS) -> Path:
    return studies.write_study(folder, study, runs, obs)


def test_loads_and_converts_to_si(tmp_path):
    s = load_study(write_study(tmp_path))
    r = s.run("A1")
    # definitions of the SI units (BIPM SI Brochure, 9th ed., 2019): 0 degC = 273.15 K,
    # 1 min = 60 s, 1 L = 1e-3 m^3; 1 rpm = 1/60 revolution per second
    assert r.temperature == pytest.approx(318.15)
    assert r.stirrer_speed == pytest.approx(5.0)
    assert r.particle_diameter == pytest.approx(5e-5)
    assert r.catalyst_loading == pytest.approx(2.0)
    assert r.initial_concentration == pytest.approx(500.0)
    np.testing.assert_allclose(r.times, [0, 600, 1200])
    np.testing.assert_allclose(r.concentrations, [500, 400, 330])
    assert s.kinetics["reference_temperature"] == pytest.approx(323.15)
    assert s.parameters["activation_energy"].value == pytest.approx(6e4)
    assert s.parameters["k_ref"].transform == "log"
    assert not r.times.flags.writeable


@pytest.mark.parametrize(
    ("text", "kind", "si"),
    [
        # definitions of the SI units (BIPM SI Brochure, 9th ed., 2019)
        ("45 degC", "temperature", 318.15),
        ("600 rpm", "speed", 10.0),
        ("75 um", "length", 7.5e-5),
        ("60 kJ/mol", "energy_per_mol", 6e4),
        ("77 degF", "temperature", 298.15),
        ("1 mol/L", "concentration", 1000.0),
        ("2 g/L", "loading", 2.0),
        ("0.5 h", "time", 1800.0),
        ("1.5 g/cm^3", "density", 1500.0),
    ],
)
def test_unit_definitions(text, kind, si):
    assert parse_quantity(text, kind) == pytest.approx(si, rel=1e-12)


def test_rpm_is_revolutions_not_radians():
    # pint's rpm is an angular speed; 600 rpm must be 10 revolutions per second, not 62.8 rad/s
    assert to_si(600.0, "rpm", "speed") == pytest.approx(10.0)
    assert to_si(10.0, "1/s", "speed") == pytest.approx(10.0)


def test_csv_and_xlsx_give_the_same_study(tmp_path):
    csv_study = load_study(write_study(tmp_path))
    xdir = tmp_path / "x"
    xdir.mkdir()
    with pd.ExcelWriter(xdir / "campaign.xlsx") as xw:
        pd.read_csv(tmp_path / "runs.csv").to_excel(xw, sheet_name="runs", index=False)
        pd.read_csv(tmp_path / "obs.csv").to_excel(xw, sheet_name="observations", index=False)
    text = STUDY.replace('runs = "runs.csv"', 'runs = { file = "campaign.xlsx", sheet = "runs" }')
    text = text.replace('observations = "obs.csv"',
                        'observations = { file = "campaign.xlsx", sheet = "observations" }')
    (xdir / "study.toml").write_text(text)
    xlsx_study = load_study(xdir / "study.toml")
    assert csv_study.run_ids == xlsx_study.run_ids
    for a, b in zip(csv_study.runs, xlsx_study.runs, strict=True):
        for f in ("temperature", "stirrer_speed", "particle_diameter", "catalyst_loading",
                  "initial_concentration"):
            assert getattr(a, f) == pytest.approx(getattr(b, f))
        np.testing.assert_allclose(a.times, b.times)
        np.testing.assert_allclose(a.concentrations, b.concentrations)


def test_conversion_column_uses_initial_concentration(tmp_path):
    obs = OBS.replace("concentration [mol/L]", "conversion [-]")
    obs = "\n".join(
        line if i == 0 else ",".join(line.split(",")[:2] + [str(1 - float(line.split(",")[2]) / 0.5)])
        for i, line in enumerate(obs.strip().splitlines())
    )
    s = load_study(write_study(tmp_path, obs=obs + "\n"))
    np.testing.assert_allclose(s.run("A1").concentrations, [500, 400, 330])


def test_rate_campaign(tmp_path):
    obs = "run,rate [mmol/(g*min)]\nA1,0.6\nA1,0.62\nA2,0.7\nA3,0.5\n"
    s = load_study(write_study(tmp_path, obs=obs))
    assert s.kind == "rate"
    np.testing.assert_allclose(s.run("A1").rates, [0.01, 0.62 / 60])


def test_comparison_sets(tmp_path):
    s = load_study(write_study(tmp_path))
    speed = comparison_sets(s, "stirrer_speed")
    size = comparison_sets(s, "particle_diameter")
    assert [c.runs for c in speed] == [("A1", "A2")]
    assert [c.runs for c in size] == [("A2", "A3")]
    assert comparison_sets(s, "catalyst_loading") == []


def _edit(text: str, old: str, new: str) -> str:
    assert old in text, old
    return text.replace(old, new, 1)


BAD_CASES = {
    "missing column": (
        dict(runs=_edit(RUNS, ",catalyst_loading [g/L]", "").replace(",2,0.5", ",0.5")),
        r"runs\.csv.*missing column 'catalyst_loading",
    ),
    "unknown column": (
        dict(obs=_edit(OBS, "concentration [mol/L]", "concentration [mol/L],colour")
             .replace("\nA", ",x\nA") + ""),
        r"obs\.csv.*unknown column 'colour'",
    ),
    "unparseable unit": (
        dict(runs=_edit(RUNS, "[degC]", "[degrees celsius please]")),
        r"column 'temperature \[degrees celsius please\]'.*not recognised",
    ),
    "dimensionally wrong unit": (
        dict(runs=_edit(RUNS, "temperature [degC]", "temperature [rpm]")),
        r"temperature \[rpm\].*not a temperature unit",
    ),
    "non-numeric cell": (
        dict(obs=_edit(OBS, "A2,10,0.41", "A2,10,abc")),
        r"obs\.csv, run 'A2', row 6, column 'concentration \[mol/L\]': 'abc' is not a number",
    ),
    "negative where positive required": (
        dict(runs=_edit(RUNS, "A3,45,900,150", "A3,45,900,-150")),
        r"runs\.csv, run 'A3', row 4, column 'particle_diameter \[um\]': .*must be > 0",
    ),
    "zero loading": (
        dict(runs=_edit(RUNS, "A2,45,900,50,2", "A2,45,900,50,0")),
        r"run 'A2', row 3, column 'catalyst_loading \[g/L\]'.*must be > 0",
    ),
    "temperature below absolute zero": (
        dict(runs=_edit(RUNS, "A1,45", "A1,-300")),
        r"run 'A1', row 2, column 'temperature \[degC\]'.*above absolute zero",
    ),
    "empty cell": (
        dict(obs=_edit(OBS, "A3,10,0.45", "A3,10,")),
        r"obs\.csv, run 'A3', row 9, column 'concentration \[mol/L\]': the cell is empty",
    ),
    "NaN cell": (
        dict(obs=_edit(OBS, "A3,10,0.45", "A3,10,nan")),
        r"run 'A3', row 9, column 'concentration \[mol/L\]': 'nan' is not a finite number",
    ),
    "time not increasing": (
        dict(obs=_edit(OBS, "A1,20,0.33", "A1,5,0.33")),
        r"obs\.csv, run 'A1', row 4, column 'time \[min\]': time does not increase",
    ),
    "duplicate run id": (
        dict(runs=_edit(RUNS, "A3,45", "A2,45")),
        r"runs\.csv, run 'A2', row 4, column 'run': run id 'A2' appears twice",
    ),
    "observations for unknown run": (
        dict(obs=OBS + "B9,0,0.5\n"),
        r"obs\.csv, run 'B9', row 11, column 'run'.*runs table lacks",
    ),
    "run without observations": (
        dict(runs=RUNS + "A4,45,900,150,4,0.5\n"),
        r"runs\.csv, run 'A4': run 'A4' has no observations",
    ),
    "concentration above initial": (
        dict(obs=_edit(OBS, "A2,10,0.41", "A2,10,0.71")),
        r"run 'A2', row 6, column 'concentration \[mol/L\]'.*exceeds the run's initial",
    ),
    "TOML syntax error": (
        dict(study=_edit(STUDY, 'geometry = "sphere"', 'geometry = "sphere')),
        r"study\.toml: TOML syntax error.*line 6",
    ),
    "missing table file": (
        dict(study=_edit(STUDY, 'observations = "obs.csv"', 'observations = "nothere.csv"')),
        r"\[data\]\.observations names 'nothere\.csv', which does not exist",
    ),
    "bound excludes value": (
        dict(study=_edit(STUDY, "value = 1.0\n", "value = 1.0\nmax = 0.5\n")),
        r"\[parameters\.order\]: value 1 .*outside its bounds",
    ),
    "prior on fixed parameter": (
        dict(study=_edit(STUDY, "value = 0.5\n[parameters.size_exponent]",
                         "value = 0.5\nvary = false\nprior = \"normal(0.5, 0.1)\"\n"
                         "[parameters.size_exponent]")),
        r"\[parameters\.agitation_exponent\]: a fixed parameter .* cannot have a prior",
    ),
    "unknown geometry": (
        dict(study=_edit(STUDY, '"sphere"', '"cube"')),
        r"\[catalyst\]: geometry = 'cube' is not recognised; use one of \['sphere'",
    ),
    "unknown key in a section": (
        dict(study=_edit(STUDY, 'particle_density = "1500 kg/m^3"',
                         'particle_density = "1500 kg/m^3"\nporosty = 0.5')),
        r"\[catalyst\] has unknown key 'porosty' \(did you mean 'porosity'\?\); allowed keys are",
    ),
    "unknown section": (
        dict(study=STUDY + "\n[pelet]\ndiffusivity = \"direct\"\n"),
        r"unknown section or key 'pelet' at the top level",
    ),
    "quantity without unit": (
        dict(study=_edit(STUDY, 'particle_density = "1500 kg/m^3"', "particle_density = 1500")),
        r"\[catalyst\]\.particle_density: the number 1500 has no unit",
    ),
}


@pytest.mark.parametrize("case", sorted(BAD_CASES))
def test_bad_input_is_named_and_exits_2(case, tmp_path, capsys):
    kwargs, pattern = BAD_CASES[case]
    path = write_study(tmp_path, **kwargs)
    with pytest.raises(StudyError, match=pattern):
        load_study(path)
    code = main(["check", str(path)])
    captured = capsys.readouterr()
    assert code == 2
    assert "Traceback" not in captured.err
    lines = [line for line in captured.err.splitlines() if line.strip()]
    assert len(lines) == 1 and lines[0].startswith("kinfit: error: ")


def test_missing_study_file_exits_2(tmp_path, capsys):
    assert main(["check", str(tmp_path / "none.toml")]) == 2
    assert "does not exist" in capsys.readouterr().err


def test_check_prints_summary(tmp_path, capsys):
    assert main(["check", str(write_study(tmp_path))]) == 0
    out = capsys.readouterr().out
    assert "A1" in out and "stirrer_speed: 1 set(s)" in out
    assert "particle_diameter: 1 set(s)" in out
    assert "catalyst_loading: none possible" in out
    assert textwrap.dedent("study is valid") in out
