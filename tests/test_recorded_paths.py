"""No output carries a machine's absolute path, and the written reports carry the cautions: every command is run on a study in a temporary
folder, from another working folder, with absolute paths on its command line, and every file it
writes is searched for the temporary folder's absolute name (the rule of the results contract:
paths relative to the study file, outputs are shared between machines; common practice for
reproducible records).

The campaign is the synthetic one of ``test_report`` (invented test data); the claim file is
the invented one in examples/claim.
"""

from __future__ import annotations

import os
import shutil
import sys
from pathlib import Path

import pytest
from test_report import RUNS, make_study

from kinfit.cli import main
from kinfit.outputs import recorded_command, recorded_path

ROOT = Path(__file__).resolve().parent.parent


def _run(mp: pytest.MonkeyPatch, args: list[str]) -> int:
    mp.setattr(sys, "argv", [str(Path(sys.executable).parent / "kinfit"), *args])
    return main(args)


def _offending(folder: Path, needles: tuple[str, ...]) -> list[str]:
    """Files under folder (text only) that contain any of the needles, with the first hit."""
    bad = []
    for f in sorted(folder.rglob("*")):
        if not f.is_file() or f.suffix in (".png", ".npz", ".nc"):
            continue
        text = f.read_text(encoding="utf-8", errors="replace")
        for n in needles:
            if n in text:
                i = text.index(n)
                bad.append(f"{f.relative_to(folder)}: ...{text[max(0, i - 60):i + 80]!r}")
                break
    return bad


def test_recorded_path_and_command():
    assert recorded_path("/a/b/runs.csv", "/a/b/study.toml") == "runs.csv"
    assert recorded_path("/a/out/x.json", "/a/b/study.toml") == "../out/x.json"
    cmd = recorded_command(["/usr/bin/kinfit", "fit", "/a/b/study.toml", "--out=/a/out", "-q"])
    assert cmd[0] == "kinfit" and not any(os.path.isabs(c.partition("=")[2] or c)
                                          for c in cmd), cmd


@pytest.mark.filterwarnings("ignore")
def test_no_output_contains_an_absolute_path(tmp_path, monkeypatch):
    campaign = tmp_path / "campaign"
    campaign.mkdir()
    study = make_study(campaign)
    work = tmp_path / "elsewhere"
    work.mkdir()
    monkeypatch.chdir(work)
    out = tmp_path / "out"
    s = str(study)
    assert _run(monkeypatch, ["fit", s, "--out", str(out), "--no-profile", "--quiet"]) == 0
    assert _run(monkeypatch, ["sample", s, "--fit", str(out), "--steps", "300",
                              "--walkers", "16", "--chunk", "100", "--quiet",
                              "--seed", "1"]) in (0, 1)
    assert _run(monkeypatch, ["diagnose", s, "--fit", str(out), "--out", str(out),
                              "--n-draws", "20"]) in (0, 1)
    assert _run(monkeypatch, ["report", s, "--fit", str(out), "--out", str(out)]) == 0
    assert _run(monkeypatch, ["simulate", s, "--out", str(tmp_path / "sim")]) == 0
    assert _run(monkeypatch, ["plan", s, "--fit", str(out), "--runs", "2",
                              "--out", str(tmp_path / "plan")]) == 0
    at = tmp_path / "at.csv"
    at.write_text("run,temperature [degC],stirrer_speed [rpm],particle_diameter [um],"
                  "catalyst_loading [g/L],initial_concentration [mol/L]\n"
                  f"P1,55,{RUNS[3][2]},100,2,0.5\n")
    assert _run(monkeypatch, ["predict", s, "--fit", str(out), "--at", str(at),
                              "--draws", "20", "--out", str(tmp_path / "pred")]) == 0
    claim = tmp_path / "claim"
    shutil.copytree(ROOT / "examples" / "claim", claim)
    assert _run(monkeypatch, ["audit", str(claim / "claim.toml"),
                              "--out", str(tmp_path / "audit")]) in (0, 1)
    written = [p for p in tmp_path.rglob("*") if p.is_file()
               and p.parent.name not in ("campaign", "claim")]
    assert any(p.name == "report_manifest.json" for p in written)
    assert any(p.name == "audit.json" for p in written)
    needles = (str(tmp_path), str(tmp_path.resolve()), str(Path(sys.executable).parent))
    bad = []
    for sub in ("out", "sim", "plan", "pred", "audit"):
        bad += _offending(tmp_path / sub, needles)
    assert bad == [], "\n".join(bad)
    # every written output that feeds design or planning carries the cautions (scale-up,
    # runaway, pressure and hydrogen hazards; local codes and licensed engineering practice)
    for md in (out / "report.md", tmp_path / "plan" / "plan.md", tmp_path / "audit" / "audit.md"):
        text = md.read_text(encoding="utf-8")
        for word in ("Scale-up", "thermal runaway", "hydrogen", "licensed engineering practice"):
            assert word in text, (md.name, word)
