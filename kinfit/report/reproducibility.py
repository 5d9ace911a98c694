"""The report's reproducibility section (inputs, their state, the command that remakes the
report) and the LaTeX parameter table."""

from __future__ import annotations

import shlex
from collections.abc import Mapping, Sequence
from pathlib import Path
from typing import Any

from kinfit.core.files import recorded_command, recorded_path
from kinfit.report.content import (
    Code,
    Facts,
    Section,
    get_path,
)
from kinfit.report.context import ReportContext
from kinfit.report.latex import parameters_table

__all__ = ["reproducibility_section", "latex_table"]


def _cmd(argv: Sequence[str]) -> str:
    return shlex.join(recorded_command(argv))


def _short(digest: Any) -> str:
    """A SHA-256 digest as tables show it: its first 16 hex digits (the manifests keep all
    64)."""
    text = str(digest)
    return text[:16] + "…" if len(text) > 16 else text


def reproducibility_section(rb: ReportContext) -> Section:
    man = rb.res.manifest or {}
    blocks: list[Any] = []
    rows = _input_states(rb)
    tones = [[None, None, "ok" if state == "same" else "fail"] for *_, state in rows]
    if rows:
        blocks.append(rb.table("Input files of the fit with their SHA-256 digests, "
                                 "compared with the study files this report read.",
                                 ("file", "SHA-256 at the fit (first 16 digits)", "study read now"), rows,
                                 tones=tones))
        if any(t[2] == "fail" for t in tones):
            rb.notes.append("the study read for this report differs from the files "
                              "that were fitted (see the reproducibility section)")
    read = [(name, _short(digest)) for name, digest in rb.inp.input_hashes.items()]
    blocks.append(rb.table("Files of the fit folder this report was built from.",
                             ("file", "SHA-256 (first 16 digits)"), read))
    versions = man.get("versions") or {}
    if versions:
        blocks.append(Facts(tuple((k, str(v)) for k, v in versions.items())))
    opts = man.get("options") or {}
    blocks.append(Facts((("seed", str(man.get("seed"))), ("platform",
                                                           str(man.get("platform", "?"))))
                        + tuple((f"option {k}", str(v)) for k, v in opts.items())))
    if man.get("command"):
        blocks.append(Code(_cmd(man["command"]), "command line recorded by the fit"))
    post_cmd = get_path(rb.inp.posterior, "manifest", "command")
    if post_cmd:
        blocks.append(Code(_cmd(post_cmd), "command line recorded by the sampler"))
    if rb.argv:
        blocks.append(Code(_cmd(rb.argv), "command line of this report"))
    blocks.append(Code("\n".join(_reproduce(rb, man, opts)),
                       "to reproduce (run from the study file's folder)"))
    return Section("reproducibility", "Reproducibility", tuple(blocks))

def _input_states(rb: ReportContext) -> list[tuple[str, str, str]]:
    """(recorded path, recorded digest, state) of every input the fit recorded, compared
    with the study files read for this report (matched by path, else by file name)."""
    base = Path(rb.inp.study.path).resolve().parent
    now = {str(Path(k).resolve()): v for k, v in rb.inp.study.files.items()}
    by_name = {Path(k).name: v for k, v in rb.inp.study.files.items()}
    rows = []
    for path, info in ((rb.res.manifest or {}).get("inputs") or {}).items():
        digest = info.get("sha256") if isinstance(info, Mapping) else str(info)
        # recorded relative to the study file (older results: as typed or absolute)
        current = now.get(str((base / path).resolve()),
                          now.get(str(Path(path).resolve()), by_name.get(Path(path).name)))
        if current is None:
            state = "not read by this study"
        else:
            state = "same" if current == digest else "DIFFERENT from the fitted file"
        rows.append((_rel(rb, path) if Path(path).is_absolute() else str(path),
                     _short(digest), state))
    return rows

def _rel(rb: ReportContext, path: str | Path) -> str:
    """A path as the report records it: relative to the study file's folder."""
    return recorded_path(path, rb.inp.study.path)

def _reproduce(rb: ReportContext, man: Mapping[str, Any], opts: Mapping[str, Any]) -> list[str]:
    study = Path(rb.inp.study.path).name
    fit_dir = _rel(rb, rb.inp.fit_dir)
    cmd = ["kinfit", "fit", study, "--out", fit_dir]
    if man.get("seed") is not None:
        cmd += ["--seed", str(man["seed"])]
    if opts.get("multistart"):
        cmd += ["--multistart", str(opts["multistart"])]
    if opts.get("profile") is False:
        cmd.append("--no-profile")
    if opts.get("bootstrap"):
        cmd += ["--bootstrap", str(opts["bootstrap"])]
        if opts.get("bootstrap_kind") == "group":
            cmd.append("--bootstrap-runs")
    cands = [str(r.get("model")) for r in list(rb.res.comparison)[1:]]
    if cands:
        cmd += ["--compare", *cands]
    lines = [shlex.join(cmd)]
    sampler = get_path(rb.inp.posterior, "sampler", default={}) or {}
    if sampler:
        s = ["kinfit", "sample", study, "--fit", fit_dir]
        for key, flag in (("seed", "--seed"), ("walkers", "--walkers"),
                          ("max_steps", "--steps"), ("chunk", "--chunk"),
                          ("tau_multiple", "--tau-multiple"), ("moves", "--moves")):
            if sampler.get(key) is not None:
                s += [flag, str(sampler[key])]
        lines.append(shlex.join(s))
    out = _rel(rb, rb.out_dir) if rb.out_dir is not None else fit_dir
    lines.append(shlex.join(["kinfit", "report", study, "--fit", fit_dir, "--out", out]))
    return lines

def latex_table(rb: ReportContext) -> str:
    post = get_path(rb.inp.posterior, "parameters", default=None)
    params = dict(rb.res.parameters)
    scales = rb.res.fit.get("error_scales") or {}
    for name in post or {}:
        if name not in params:
            params[name] = {"estimate": scales.get(name), "unit": rb.units.get(name, ""),
                            "vary": True, "ci95": None, "ci_method": None}
    return parameters_table(
        params, posterior=post,
        caption=f"Parameters of the {rb.res.model.get('label', 'kinetic')} model fitted "
                f"to study {rb.res.study}: least-squares estimates (SI units) with 95 % "
                "intervals" + ("; posterior medians with central 90 % intervals" if post
                               else "") + ".")


