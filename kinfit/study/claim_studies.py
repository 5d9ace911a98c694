"""Studies built from a claim file: the claimed model at the test conditions, written as a study."""

from __future__ import annotations

import json
import tempfile
from collections.abc import Mapping, Sequence
from dataclasses import dataclass, replace
from pathlib import Path
from typing import Any

from kinfit.core.files import file_sha256
from kinfit.errors import StudyError
from kinfit.study.claims import Claim, ClaimFile, _where
from kinfit.study.load import load_study
from kinfit.study.parameters import parameter_table_from_toml
from kinfit.study.runs import Study

__all__ = []


def _toml_value(v: Any) -> str:
    if isinstance(v, bool):
        return "true" if v else "false"
    if isinstance(v, int | float):
        return repr(float(v)) if isinstance(v, float) else str(v)
    if isinstance(v, str):
        return json.dumps(v)
    if isinstance(v, list):
        return "[" + ", ".join(_toml_value(x) for x in v) + "]"
    raise StudyError(f"cannot copy the value {v!r} into a study")


def _toml(doc: Mapping[str, Mapping[str, Any]]) -> str:
    """A TOML text of sections of scalars (and [parameters.NAME] sub-tables)."""
    lines = []
    for name, sec in doc.items():
        flat = {k: v for k, v in sec.items() if not isinstance(v, Mapping)}
        lines.append(f"[{name}]")
        lines += [f"{k} = {_toml_value(v)}" for k, v in flat.items()]
        for k, v in sec.items():
            if isinstance(v, Mapping):
                lines.append(f"[{name}.{k}]")
                lines += [f"{kk} = {_toml_value(vv)}" for kk, vv in v.items()]
    return "\n".join(lines) + "\n"


@dataclass(frozen=True)
class _Built:
    study: Study
    transport: Study          # with the known film and pellet
    bare: Study               # no film, no pellet
    has_kc: bool
    De: float | None


def _build(cf: ClaimFile, claim: Claim) -> _Built:
    """The claim's study (validated by :func:`kinfit.study.load.load_study`)."""
    De = claim.effective_diffusivity or cf.pellet_diffusivity
    with tempfile.TemporaryDirectory(prefix="kinfit-audit-") as tmp:
        tmpdir = Path(tmp)
        if cf.data is not None:
            runs, obs = str(cf.data[0]), str(cf.data[1])
        else:
            runs, obs = _write_conditions(tmpdir, cf.conditions or ())
        doc: dict[str, dict[str, Any]] = {
            "study": {"name": f"{cf.title}: {claim.name}"},
            "data": {"runs": runs, "observations": obs},
            "catalyst": dict(cf.doc["catalyst"]),
            "kinetics": claim.kinetics_section(),
            "pellet": {"diffusivity": "direct" if De else "none"},
        }
        if cf.film_section is not None:
            doc["film"] = dict(cf.film_section)
        if "fluid" in cf.doc:
            doc["fluid"] = dict(cf.doc["fluid"])
        doc["parameters"] = claim.parameter_section()
        if De:
            doc["parameters"]["effective_diffusivity"] = {"value": f"{De!r} m^2/s",
                                                          "vary": False}
        fake = tmpdir / cf.path.name
        fake.write_text(_toml(doc), encoding="utf-8")
        try:
            study = load_study(fake)
        except StudyError as exc:
            raise StudyError(str(exc).replace(str(tmpdir), str(cf.path.parent))) from None
    files = {str(cf.path): file_sha256(cf.path)}
    if cf.data is not None:
        files.update({str(p): file_sha256(p) for p in cf.data})
    study = replace(study, path=cf.path, files=files)
    film = _film_dict(cf, study)
    transport = replace(study, film=film)
    bare = replace(study, film={"model": "none"}, pellet={"diffusivity": "none"})
    return _Built(study, transport, bare, cf.kc is not None or cf.film_section is not None, De)


def _write_conditions(tmpdir: Path, conditions: Sequence[Mapping[str, float]]) -> tuple[str, str]:
    runs = ["run,temperature [K],stirrer_speed [rpm],particle_diameter [m],"
            "catalyst_loading [kg/m^3],initial_concentration [mol/m^3]"]
    obs = ["run,rate [mol/(kg*s)]"]
    for i, c in enumerate(conditions):
        rid = f"T{i + 1}"
        runs.append(f"{rid},{c['temperature']!r},{c['stirrer_speed'] * 60!r},"
                    f"{c['particle_diameter']!r},{c['catalyst_loading']!r},"
                    f"{c['initial_concentration']!r}")
        obs.append(f"{rid},0")
    (tmpdir / "runs.csv").write_text("\n".join(runs) + "\n", encoding="utf-8")
    (tmpdir / "observations.csv").write_text("\n".join(obs) + "\n", encoding="utf-8")
    return str(tmpdir / "runs.csv"), str(tmpdir / "observations.csv")


def _film_dict(cf: ClaimFile, study: Study) -> dict[str, Any]:
    if cf.film_section is not None:
        return dict(study.film)
    if cf.kc is None:
        return {"model": "none"}
    where = _where(cf.path, "film")
    # the stated kc holds at the kinetics' reference temperature; it scales with the liquid's
    # viscosity when the claim names its liquid (the study loader's default)
    out: dict[str, Any] = {"model": "agitation",
                           "temperature_scaling": study.film.get("temperature_scaling", "none")}
    for key, factor, exponent in (("speed", "stirrer_speed", "agitation_exponent"),
                                  ("diameter", "particle_diameter", "size_exponent")):
        levels = sorted({round(r.factor(factor), 12) for r in study.runs})
        ref = cf.kc.get(key)
        if ref is None:
            if len(levels) > 1:
                raise StudyError(f"{where}: the runs use several values of {factor}; give the "
                                 f"{key} at which kc holds and the {exponent}")
            ref = levels[0]
        if len(levels) > 1 and exponent not in cf.kc:
            raise StudyError(f"{where}: the runs use several values of {factor}; give "
                             f"{exponent} (kc ~ N^a dp^-b)")
        out[f"reference_{key}"] = float(ref) if ref > 0 else 1.0
    return out


def _transport_table(built: _Built, cf: ClaimFile, claim: Claim):
    """Parameter table of the transport-aware model (kinetics varying, transport fixed)."""
    sec: dict[str, Any] = claim.parameter_section()
    if built.De:
        sec["effective_diffusivity"] = {"value": f"{built.De!r} m^2/s", "vary": False}
    if cf.kc is not None:
        sec["kc_ref"] = {"value": f"{cf.kc['kc']!r} m/s", "vary": False}
        sec["agitation_exponent"] = {"value": cf.kc.get("agitation_exponent", 0.0),
                                     "vary": False}
        sec["size_exponent"] = {"value": cf.kc.get("size_exponent", 0.0), "vary": False}
    return parameter_table_from_toml(sec, cf.path.name)
