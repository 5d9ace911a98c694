"""Plausibility of study values and the wording of input messages: impossible values exit 2
with file, row and column; implausible ones warn; rows are the file lines a person sees; a
workbook's sheets, a file's encoding and a semicolon separator are named. Behaviour checks:
the limits are common practice, except the densest element (osmium, 22.59 g/cm^3, CRC
Handbook of Chemistry and Physics)."""

from __future__ import annotations

import warnings
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
from test_study import OBS, RUNS, STUDY, write_study

from kinfit.cli.parser import main
from kinfit.errors import PlausibilityWarning, StudyError
from kinfit.study.load import load_study
from kinfit.study.runs import comparison_sets


@pytest.mark.parametrize(("edit", "pattern"), [
    (("A2,45,", "A2,4000000,"), r"runs\.csv, run 'A2', row 3, column 'temperature \[degC\]': "
                                r"temperature .* outside 150 K to 1500 K"),
    (("A1,45,300,", "A1,45,0,"), r"runs\.csv, run 'A1', row 2, column 'stirrer_speed \[rpm\]': "
                                 r"stirrer speed 0 under the agitation law"),
])
def test_impossible_run_values_exit_2(tmp_path, capsys, edit, pattern):
    path = write_study(tmp_path, runs=RUNS.replace(*edit))
    with pytest.raises(StudyError, match=pattern):
        load_study(path)
    assert main(["check", str(path)]) == 2
    assert "Traceback" not in capsys.readouterr().err


def test_density_limits(tmp_path):
    path = write_study(tmp_path, study=STUDY.replace('particle_density = "1500 kg/m^3"',
                                                     'particle_density = "1500 g/cm^3"'))
    with pytest.raises(StudyError, match=r"density 1500 g/cm\^3 is above that of osmium"):
        load_study(path)
    path = write_study(tmp_path, study=STUDY.replace('particle_density = "1500 kg/m^3"',
                                                     'particle_density = "12 g/cm^3"'))
    with pytest.warns(PlausibilityWarning, match=r"density 12 g/cm\^3 is above 10 g/cm\^3"):
        load_study(path)


def test_hot_liquid_warns(tmp_path):
    path = write_study(tmp_path, runs=RUNS.replace("A2,45,", "A2,450,"))
    with pytest.warns(PlausibilityWarning, match=r"run 'A2', row 3: temperature 723.15 K is "
                                                 r"above 700 K"):
        load_study(path)


def test_one_point_and_t0_runs_stay_out_of_comparison_sets(tmp_path):
    # A1 (300 rpm) and A2 (900 rpm) form the speed test; with A1 cut to its t = 0 point and
    # A4 (A1's conditions) holding one point, neither carries a rate to compare
    runs = RUNS + "A4,45,300,50,2,0.5\n"
    obs = OBS.replace("A1,0,0.5\nA1,10,0.4\nA1,20,0.33\n", "A1,0,0.5\n") + "A4,0,0.5\n"
    path = write_study(tmp_path, runs=runs, obs=obs)
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        study = load_study(path)
    sets = comparison_sets(study, "stirrer_speed")
    assert all("A1" not in s.runs and "A4" not in s.runs for s in sets)
    full = comparison_sets(load_study(write_study(tmp_path / "full")), "stirrer_speed")
    assert any("A1" in s.runs for s in full)


def test_rows_are_file_lines_with_comments_counted(tmp_path):
    obs = OBS.replace("A2,10,0.41", "A2,10,abc").replace("run,time", "# lab export\nrun,time")
    with pytest.raises(StudyError, match=r"run 'A2', row 7, column 'concentration"):
        load_study(write_study(tmp_path, obs=obs))


def test_semicolon_separated_csv_with_decimal_commas(tmp_path):
    ref = load_study(write_study(tmp_path / "a"))
    runs = RUNS.replace(",", ";")
    runs = "\n".join(";".join(c.replace(".", ",") for c in ln.split(";"))
                     for ln in runs.splitlines()) + "\n"
    obs = "\n".join(ln.replace(",", ";").replace(".", ",") for ln in OBS.splitlines()) + "\n"
    study = load_study(write_study(tmp_path / "b", runs=runs, obs=obs))
    for a, b in zip(ref.runs, study.runs, strict=True):
        np.testing.assert_allclose(a.concentrations, b.concentrations)
        assert a.initial_concentration == pytest.approx(b.initial_concentration)


def test_non_utf8_file_names_the_encoding(tmp_path):
    path = write_study(tmp_path)
    text = (tmp_path / "runs.csv").read_text().replace("[degC]", "[\u00b0C]")
    (tmp_path / "runs.csv").write_bytes(text.encode("cp1252"))
    with pytest.raises(StudyError, match=r"runs\.csv, line 1: the file is not UTF-8 text "
                                         r"\(byte 0xb0.*Windows-1252.*'CSV UTF-8'"):
        load_study(path)


def _workbook(folder, sheets):
    folder.mkdir(parents=True, exist_ok=True)
    with pd.ExcelWriter(folder / "book.xlsx") as xw:
        for name, frame in sheets.items():
            frame.to_excel(xw, sheet_name=name, index=False)


def test_workbook_sheet_messages(tmp_path):
    write_study(tmp_path)
    runs = pd.read_csv(tmp_path / "runs.csv")
    cover = pd.DataFrame({"Lab notebook export": ["campaign 7"]})
    _workbook(tmp_path, {"cover": cover, "runs": runs})
    text = STUDY.replace('runs = "runs.csv"', 'runs = "book.xlsx"')
    (tmp_path / "study.toml").write_text(text)
    with pytest.raises(StudyError, match=r"sheet 'cover' of a workbook with sheets \['cover', "
                                         r"'runs'\].*\{file = \"book.xlsx\", sheet = "):
        load_study(tmp_path / "study.toml")
    (tmp_path / "study.toml").write_text(
        STUDY.replace('runs = "runs.csv"', 'runs = { file = "book.xlsx", sheet = "Runs" }'))
    with pytest.raises(StudyError, match=r"no sheet 'Runs'; its sheets are 'cover', 'runs'"):
        load_study(tmp_path / "study.toml")
    (tmp_path / "study.toml").write_text(
        STUDY.replace('runs = "runs.csv"', 'runs = { file = "book.xlsx", sheet = "runs" }'))
    assert load_study(tmp_path / "study.toml").run_ids == ("A1", "A2", "A3")


def test_simulate_runs_at_the_study_values_with_every_parameter_fixed(tmp_path):
    # behaviour: 'vary' matters to fitting only; the simulated profiles are the same whether
    # the parameters are fixed or free
    from kinfit.model.simulation import simulate

    free = load_study(write_study(tmp_path / "free"))
    fixed_text = STUDY
    for name in ("k_ref", "activation_energy", "order", "effective_diffusivity", "kc_ref",
                 "agitation_exponent", "size_exponent"):
        fixed_text = fixed_text.replace(f"[parameters.{name}]\n",
                                        f"[parameters.{name}]\nvary = false\n")
    fixed = load_study(write_study(tmp_path / "fixed", study=fixed_text))
    assert not fixed.parameters.varying()
    a, b = simulate(free), simulate(fixed)
    pd.testing.assert_frame_equal(a.predictions, b.predictions)
    assert main(["simulate", str(tmp_path / "fixed" / "study.toml"), "--out",
                 str(tmp_path / "out")]) == 0


def test_typo_keys_suggest_the_nearest_valid_key(tmp_path):
    text = STUDY.replace("rate_law =", "rate_lw =")
    with pytest.raises(StudyError, match=r"rate_law is missing; 'rate_lw' looks like a "
                                         r"misspelling of 'rate_law'"):
        load_study(write_study(tmp_path / "a", study=text))
    text = STUDY.replace("[catalyst]\n", "[catalyst]\nporosty = 0.5\n")
    with pytest.raises(StudyError, match=r"unknown key 'porosty' \(did you mean 'porosity'\?\)"):
        load_study(write_study(tmp_path / "b", study=text))
    text = STUDY.replace("[parameters.order]", "[parameters.ordr]")
    with pytest.raises(StudyError, match=r"unknown parameter 'ordr' \(did you mean 'order'\?\)"):
        from kinfit.fitting.fit import main_spec

        main_spec(load_study(write_study(tmp_path / "c", study=text)))


def test_unit_kind_wording():
    from kinfit.core.units import parse_quantity

    with pytest.raises(StudyError, match=r"'kg' is not a molar energy unit"):
        parse_quantity("60 kg", "energy_per_mol")


def test_claim_file_given_to_check_or_run_points_to_audit(tmp_path, capsys):
    claim = Path(__file__).resolve().parents[1] / "examples" / "claim" / "claim.toml"
    for command in (["check", str(claim)], ["run", str(claim), "--out", str(tmp_path)]):
        assert main(command) == 2
        err = capsys.readouterr().err
        assert f"is a claim file ([[claim]] tables), not a study; judge it with 'kinfit audit " \
               f"{claim}'" in err


def test_report_refuses_results_of_changed_data(tmp_path, capsys):
    # bad input (exit 2): the study and the fit folder given together no longer match
    path = write_study(tmp_path)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        # saved whether or not this three-run campaign pins every parameter
        assert main(["fit", str(path), "--out", str(tmp_path / "fit"), "--no-profile",
                     "--quiet"]) in (0, 1)
    obs = tmp_path / "obs.csv"
    obs.write_text(obs.read_text().replace("A1,20,0.33", "A1,20,0.34"))
    capsys.readouterr()
    assert main(["report", str(path), "--fit", str(tmp_path / "fit"), "--out",
                 str(tmp_path / "rep")]) == 2
    err = capsys.readouterr().err
    assert "obs.csv changed since the fit" in err and "--allow-changed-data" in err
    assert not (tmp_path / "rep" / "report.html").exists()
    from kinfit.cli.report import _refuse_changed_data

    _refuse_changed_data(path, tmp_path / "fit", allow=True)  # the override lets it through
    obs.write_text(obs.read_text().replace("A1,20,0.34", "A1,20,0.33"))
    _refuse_changed_data(path, tmp_path / "fit", allow=False)  # unchanged data: no refusal


def test_option_messages_name_the_command_line_option(tmp_path):
    from kinfit.analysis.diagnosis.diagnosis import diagnose

    study = load_study(write_study(tmp_path))
    with pytest.raises(StudyError, match=r"the number of draws \(--n-draws, n_draws\)"):
        diagnose(study, n_draws=0)


def test_readme_reference_names_every_section_key_and_parameter():
    # behaviour: the user reference in the README covers every key the loader accepts
    from kinfit.model.candidates import rate_law_options
    from kinfit.physics.kinetics.registry import RATE_LAWS
    from kinfit.study.parameters import _KEYS, PARAMETER_KINDS
    from kinfit.study.load import SECTION_KEYS
    from kinfit.physics.properties import SOLVENTS

    readme = (Path(__file__).resolve().parents[1] / "README.md").read_text(encoding="utf-8")
    ref = readme[readme.index("### Sections and keys"):readme.index("## Cautions")]
    for section, keys in SECTION_KEYS.items():
        assert f"`[{section}]`" in ref, section
        for key in keys:
            assert f"`{key}`" in ref, (section, key)
    for name in [*PARAMETER_KINDS, *_KEYS, *SOLVENTS, *RATE_LAWS]:
        assert f"`{name}`" in ref, name
    for law in RATE_LAWS:
        for option in rate_law_options(law):
            assert f"`{option}`" in ref, (law, option)
    assert "Python 3.11 or newer" in readme
