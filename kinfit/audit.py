"""Audit of a claimed rate law: can it be intrinsic at the test conditions it came from, do the
data (when given) reproduce it, and does it carry the signatures of film or pore control.

A claim file (TOML) holds one or more claims (power-law k, Ea, order, perhaps De), the test
conditions or a runs/observations table pair in the study vocabulary, the catalyst, and what
is known of the film coefficient and the effective diffusivity (format: :func:`load_claims`).

Per claim:

1. Criteria at the test conditions with the claim's own parameters, two ways: *observable*
   (the claimed rate taken as the observed rate: Carberry, Weisz-Prater, Mears) and *as
   intrinsic* (the claim pushed through kinfit's film and pellet model: eta, Thiele modulus,
   regime). Conventions and thresholds: :mod:`kinfit.criteria`.
2. With data: a refit of the claim's power law ignoring transport ("as observed") and one with
   the stated film coefficient and effective diffusivity ("transport-aware"), each with the
   likelihood-ratio test of the claimed values, ``LR = n ln(S(theta_c)/S_hat) ~ chi2_p``, and the
   joint 95 % region ``S(theta) <= S_hat [1 + p/(n-p) F(p, n-p; 0.95)]`` (Beale 1960; Bates &
   Watts 1988, ch. 6).
3. Signatures: strong pore diffusion halves the activation energy and takes the order to
   (n + 1)/2 (Weisz & Prater 1954; Satterfield 1970); film control gives an apparent
   activation energy near zero (below about 15 kJ/mol, common practice) and first apparent
   order.

Verdicts: "consistent with intrinsic kinetics", "transport-contaminated" (with the evidence),
"not reproduced by the data" (the data reject the claimed values without a transport
signature), "not testable with these data" (with what is missing).
"""

from __future__ import annotations

import argparse
import hashlib
import json
import math
import sys
import tempfile
import tomllib
import warnings
from collections.abc import Mapping, Sequence
from dataclasses import dataclass, field, replace
from itertools import product
from pathlib import Path
from typing import Any

import numpy as np
from numpy.typing import NDArray
from scipy import stats

from kinfit.criteria import THRESHOLD_SOURCES, Thresholds, compute_criteria
from kinfit.errors import StudyError
from kinfit.model import Model, ModelSpec
from kinfit.parameters import parameter_table_from_toml
from kinfit.study import FACTORS, Study, load_study
from kinfit.units import parse_quantity, ureg

__all__ = ["Claim", "ClaimFile", "ClaimAudit", "AuditResult", "VERDICTS", "SOURCES",
           "FILM_EA_LIMIT", "load_claims", "audit_claims", "add_audit_arguments",
           "run_audit_command"]

Array = NDArray[np.float64]
VERDICTS = ("consistent with intrinsic kinetics", "transport-contaminated",
            "not reproduced by the data", "not testable with these data")
BASES = ("as measured", "transport-corrected")
#: apparent activation energy below which film control is suspected, J/mol (common practice)
FILM_EA_LIMIT = 15e3
#: claimed/intrinsic activation-energy ratio counted as "about half"
PORE_EA_RATIO = (0.35, 0.70)
#: tolerance on the apparent order (n + 1)/2 and on "first order"
ORDER_TOLERANCE = 0.15
LEVEL = 0.95
SOURCES = {
    **THRESHOLD_SOURCES,
    "likelihood_ratio": "LR = n ln(S(theta_claim)/S_hat) against chi2 with p degrees of "
                        "freedom, Gaussian errors with the variance profiled out (Bates & Watts "
                        "1988, ch. 6)",
    "joint_region": "S(theta) <= S_hat [1 + p/(n-p) F(p, n-p; 0.95)] (Beale 1960; Bates & "
                    "Watts 1988)",
    "pore_signature": "strong pore diffusion: E_app = (E + E_D)/2, apparent order (n + 1)/2 "
                      "(Weisz & Prater 1954; Satterfield 1970)",
    "film_signature": "film control: apparent activation energy near zero (below about "
                      "15 kJ/mol) and first apparent order (common practice)",
}
_CLAIM_KEYS = {"name", "source", "basis", "rate_law", "k_ref", "rate_constant",
               "pre_exponential_factor", "reference_temperature", "reference_concentration",
               "activation_energy", "order", "effective_diffusivity", "note"}
_FILM_KC_KEYS = {"kc", "speed", "diameter", "agitation_exponent", "size_exponent"}


# ------------------------------------------------------------------------------ the claim file
@dataclass(frozen=True)
class Claim:
    """One claimed power law, SI units.

    Attributes
    ----------
    name, source, note : str
    basis : {"as measured", "transport-corrected"}
        Whether the values are the measured kinetics as such (the usual claim) or were
        extracted with film and pore corrections (with the file's kc and De).
    k_ref : float
        Rate at ``reference_concentration`` and ``reference_temperature``, mol/(kg s).
    reference_temperature : float
        K.
    reference_concentration : float
        mol/m^3.
    activation_energy : float
        J/mol.
    order : float
    effective_diffusivity : float or None
        m^2/s, when the claim states one.
    """

    name: str
    basis: str
    k_ref: float
    reference_temperature: float
    reference_concentration: float
    activation_energy: float
    order: float
    effective_diffusivity: float | None = None
    source: str = ""
    note: str = ""

    def values(self) -> dict[str, float]:
        """The three kinetic parameters by their kinfit names."""
        return {"k_ref": self.k_ref, "activation_energy": self.activation_energy,
                "order": self.order}


@dataclass(frozen=True)
class ClaimFile:
    """A parsed claim file.

    Attributes
    ----------
    path : Path
    title : str
    claims : tuple of Claim
    doc : dict
        The parsed TOML.
    conditions : list of dict or None
        Test conditions (factor -> SI value) from ``[conditions]``; None when ``[data]`` gives
        the runs table.
    data : tuple of (Path, Path) or None
        Runs and observations tables.
    kc : dict or None
        ``kc`` (m/s) at ``speed`` (rev/s) and ``diameter`` (m) with the exponents, or None.
    film_section : dict or None
        A ``[film]`` section naming a film model (Sherwood correlation), copied into the study.
    pellet_diffusivity : float or None
        De (m^2/s) from ``[pellet]`` (the auditor's value), used when a claim states none.
    """

    path: Path
    title: str
    claims: tuple[Claim, ...]
    doc: Mapping[str, Any]
    conditions: tuple[Mapping[str, float], ...] | None
    data: tuple[Path, Path] | None
    kc: Mapping[str, float] | None
    film_section: Mapping[str, Any] | None
    pellet_diffusivity: float | None


def _where(path: Path, section: str) -> str:
    return f"{path.name} [{section}]"


def _quantity(sec: Mapping[str, Any], key: str, kind: str, where: str) -> float:
    return parse_quantity(sec[key], kind, where=f"{where}.{key}")


def _claim(sec: Mapping[str, Any], i: int, path: Path, conditions: Sequence[Mapping[str, float]]
           ) -> Claim:
    where = _where(path, f"claim {i + 1}" if "name" not in sec else f"claim '{sec['name']}'")
    unknown = sorted(set(sec) - _CLAIM_KEYS)
    if unknown:
        raise StudyError(f"{where}: unknown key(s) {unknown}; allowed keys are "
                         f"{sorted(_CLAIM_KEYS)}")
    law = sec.get("rate_law", "power")
    if law != "power":
        raise StudyError(f"{where}: rate_law = {law!r} is not supported by the audit; claims are "
                         "power laws (rate_law = \"power\")")
    basis = sec.get("basis", "as measured")
    if basis not in BASES:
        raise StudyError(f"{where}: basis = {basis!r} is not recognised; use one of {list(BASES)}")
    for key in ("activation_energy", "order"):
        if key not in sec:
            raise StudyError(f"{where}: '{key}' is missing; write for example "
                             + ("activation_energy = \"60 kJ/mol\"" if key != "order"
                                else "order = 1.0"))
    Ea = _quantity(sec, "activation_energy", "energy_per_mol", where)
    n = parse_quantity(sec["order"], "dimensionless", where=f"{where}.order")
    if not 0.0 <= n <= 3.0:
        raise StudyError(f"{where}.order = {n:g} lies outside [0, 3], the power-law range of "
                         "kinfit")
    if not 0.0 <= Ea <= 4e5:
        raise StudyError(f"{where}.activation_energy = {Ea:g} J/mol lies outside [0, 400] kJ/mol")
    C_ref = (_quantity(sec, "reference_concentration", "concentration", where)
             if "reference_concentration" in sec else 1000.0)
    given = [k for k in ("k_ref", "rate_constant", "pre_exponential_factor") if k in sec]
    if len(given) != 1:
        raise StudyError(f"{where}: give exactly one of k_ref (rate at the reference "
                         "concentration and temperature), rate_constant (k in r = k C^n, any "
                         "consistent unit) or pre_exponential_factor; found "
                         f"{given or 'none'}")
    if "reference_temperature" in sec:
        T_ref = _quantity(sec, "reference_temperature", "temperature", where)
    elif given[0] == "pre_exponential_factor":
        # 1/T_ref = mean(1/T_i) decorrelates k_ref and Ea (Schwaab & Pinto 2007)
        T_ref = 1.0 / float(np.mean([1.0 / c["temperature"] for c in conditions]))
    else:
        raise StudyError(f"{where}: reference_temperature is missing; k_ref and rate_constant "
                         "hold at a stated temperature, e.g. reference_temperature = \"60 degC\"")
    if given[0] == "rate_constant":
        k_ref = _rate_constant(sec["rate_constant"], n, C_ref, f"{where}.rate_constant")
    elif given[0] == "pre_exponential_factor":
        A = _quantity(sec, "pre_exponential_factor", "rate_per_mass", where)
        k_ref = A * math.exp(-Ea / (8.314462618 * T_ref))
    else:
        k_ref = _quantity(sec, "k_ref", "rate_per_mass", where)
    if not k_ref > 0:
        raise StudyError(f"{where}: the claimed rate constant must be > 0")
    De = (_quantity(sec, "effective_diffusivity", "diffusivity", where)
          if "effective_diffusivity" in sec else None)
    if De is not None and not De > 0:
        raise StudyError(f"{where}.effective_diffusivity must be > 0")
    return Claim(str(sec.get("name", f"claim {i + 1}")), basis, float(k_ref), T_ref, C_ref, Ea,
                 n, De, str(sec.get("source", "")), str(sec.get("note", "")))


def _rate_constant(text: Any, n: float, C_ref: float, where: str) -> float:
    """k' of r = k' C^n in any consistent unit, as k_ref = k' C_ref^n in mol/(kg s)."""
    if not isinstance(text, str):
        raise StudyError(f"{where}: write the rate constant with its unit, e.g. "
                         "\"2e-5 m^3/(kg*s)\" for first order")
    try:
        q = ureg.Quantity(text) * ureg.Quantity(C_ref, "mol/m^3") ** n
        return float(q.to("mol/(kg*s)").magnitude)
    except Exception:  # noqa: BLE001 - pint raises many kinds for bad or inconsistent units
        raise StudyError(f"{where}: '{text}' is not a rate constant of order {n:g} (r = k C^n "
                         "with r in mol/(kg s)); check its unit, e.g. m^3/(kg*s) for first "
                         "order") from None


def _conditions(sec: Mapping[str, Any], path: Path) -> tuple[dict[str, float], ...]:
    where = _where(path, "conditions")
    kinds = {"temperature": "temperature", "stirrer_speed": "speed",
             "particle_diameter": "length", "catalyst_loading": "loading",
             "initial_concentration": "concentration"}
    unknown = sorted(set(sec) - set(kinds))
    if unknown:
        raise StudyError(f"{where}: unknown key(s) {unknown}; the test conditions are "
                         f"{list(kinds)}")
    levels = []
    for f in FACTORS:
        if f not in sec:
            raise StudyError(f"{where}: '{f}' is missing; give the test value(s), e.g. "
                             f"{f} = [\"...\"] or a single quantity string")
        raw = sec[f] if isinstance(sec[f], list) else [sec[f]]
        if not raw:
            raise StudyError(f"{where}.{f}: the list is empty")
        levels.append([parse_quantity(v, kinds[f], where=f"{where}.{f}") for v in raw])
    out = tuple(dict(zip(FACTORS, combo, strict=True)) for combo in product(*levels))
    for c in out:
        bad = [f for f in FACTORS if (c[f] < 0 if f == "stirrer_speed" else not c[f] > 0)]
        if bad:
            raise StudyError(f"{where}.{bad[0]} must be > 0")
    return out


def load_claims(path: str | Path) -> ClaimFile:
    """Read and validate a claim file.

    Format (TOML, quantities as strings with units)::

        [[claim]]                      # one table per claim ([claim] for a single one)
        name = "..."
        basis = "as measured"          # or "transport-corrected"
        k_ref = "0.012 mol/(kg*s)"     # or rate_constant = "2e-5 m^3/(kg*s)",
        reference_temperature = "60 degC"   #  or pre_exponential_factor = "..."
        reference_concentration = "1 mol/L" # optional
        activation_energy = "38 kJ/mol"
        order = 1.0
        effective_diffusivity = "4e-10 m^2/s"   # optional

        [catalyst]                     # as in a study file
        geometry = "sphere"
        particle_density = "1300 kg/m^3"

        [conditions]                   # test conditions (factorial of the values), or [data]
        temperature = ["50 degC", "60 degC", "70 degC"]
        stirrer_speed = "800 rpm"
        particle_diameter = "300 um"
        catalyst_loading = "2 g/L"
        initial_concentration = "0.5 mol/L"

        [film]                         # kc at the test speed and diameter ...
        kc = "4e-5 m/s"
        # speed, diameter, agitation_exponent, size_exponent: needed when the runs differ
        # ... or a film model of the study vocabulary (model = "slurry", ...) with [fluid]

        [pellet]                       # the auditor's De when a claim states none
        effective_diffusivity = "3e-10 m^2/s"
        # or tortuosity = 4 and molecular_diffusivity = "..." with [catalyst].porosity

        [data]                         # optional, study vocabulary
        runs = "runs.csv"
        observations = "observations.csv"

    Raises
    ------
    StudyError
        Naming the file, section and key, what was expected and the fix.
    """
    path = Path(path)
    if not path.is_file():
        raise StudyError(f"claim file '{path}' does not exist; check the path")
    try:
        doc = tomllib.loads(path.read_text(encoding="utf-8"))
    except tomllib.TOMLDecodeError as exc:
        raise StudyError(f"{path}: TOML syntax error: {exc}; fix that line") from None
    except UnicodeDecodeError:
        raise StudyError(f"{path}: not UTF-8 text; save it as UTF-8") from None
    known = {"claim", "audit", "catalyst", "conditions", "film", "fluid", "pellet", "data"}
    unknown = sorted(set(doc) - known)
    if unknown:
        raise StudyError(f"{path.name}: unknown section(s) {unknown}; a claim file has "
                         f"{sorted(known)}")
    meta = doc.get("audit", {})
    if not isinstance(meta, Mapping) or set(meta) - {"title", "note"}:
        raise StudyError(f"{_where(path, 'audit')}: only 'title' and 'note' are allowed")
    raw_claims = doc.get("claim")
    if isinstance(raw_claims, Mapping):
        raw_claims = [raw_claims]
    if not raw_claims or not isinstance(raw_claims, list):
        raise StudyError(f"{path.name}: no claim; add a [claim] table (or [[claim]] tables) "
                         "with k_ref, reference_temperature, activation_energy and order")
    if "catalyst" not in doc:
        raise StudyError(f"{path.name}: the [catalyst] section is missing; give geometry and "
                         "particle_density as in a study file")
    data = None
    conditions = None
    if "data" in doc:
        if "conditions" in doc:
            raise StudyError(f"{path.name}: give either [conditions] or [data], not both: the "
                             "runs table of [data] holds the test conditions")
        sec = doc["data"]
        refs = []
        for key in ("runs", "observations"):
            if not isinstance(sec.get(key), str):
                raise StudyError(f"{_where(path, 'data')}: '{key}' must name a table file, "
                                 f"e.g. {key} = \"{key}.csv\"")
            p = (path.resolve().parent / sec[key]).resolve()
            if not p.is_file():
                raise StudyError(f"{_where(path, 'data')}.{key} names '{sec[key]}', which does "
                                 f"not exist (looked for {p})")
            refs.append(p)
        data = (refs[0], refs[1])
    elif "conditions" in doc:
        conditions = _conditions(doc["conditions"], path)
    else:
        raise StudyError(f"{path.name}: the test conditions are missing; add [conditions] "
                         "(temperature, stirrer_speed, particle_diameter, catalyst_loading, "
                         "initial_concentration) or [data] with runs and observations tables")
    cond_for_claims = conditions or ()
    if data is not None and any("pre_exponential_factor" in c and "reference_temperature"
                                not in c for c in raw_claims):
        raise StudyError(f"{path.name}: with [data], give the reference_temperature of a claim "
                         "stated with pre_exponential_factor")
    claims = tuple(_claim(c, i, path, cond_for_claims) for i, c in enumerate(raw_claims))
    names = [c.name for c in claims]
    if len(set(names)) != len(names):
        raise StudyError(f"{path.name}: claim names must be unique; got {names}")
    kc, film_section = _film(doc.get("film"), path)
    return ClaimFile(path, str(meta.get("title", path.stem)), claims, doc,
                     conditions, data, kc, film_section, _pellet_diffusivity(doc, path))


def _film(sec: Mapping[str, Any] | None, path: Path
          ) -> tuple[dict[str, float] | None, dict[str, Any] | None]:
    if not sec:
        return None, None
    where = _where(path, "film")
    if "model" in sec:
        clash = sorted(set(sec) & _FILM_KC_KEYS - {"agitation_exponent", "size_exponent"})
        if clash:
            raise StudyError(f"{where}: give either kc or a film model, not both (found "
                             f"model and {clash})")
        if sec["model"] in ("agitation", "none"):
            raise StudyError(f"{where}: model = {sec['model']!r}: write kc = \"...\" for a "
                             "known film coefficient, or name a Sherwood correlation model")
        return None, dict(sec)
    unknown = sorted(set(sec) - _FILM_KC_KEYS)
    if unknown or "kc" not in sec:
        raise StudyError(f"{where}: give kc (the film coefficient at the test conditions), "
                         f"optionally speed, diameter, agitation_exponent, size_exponent; "
                         f"found {sorted(sec)}")
    kc = {"kc": _quantity(sec, "kc", "velocity", where)}
    if not kc["kc"] > 0:
        raise StudyError(f"{where}.kc must be > 0")
    for key, kind in (("speed", "speed"), ("diameter", "length")):
        if key in sec:
            kc[key] = _quantity(sec, key, kind, where)
    for key in ("agitation_exponent", "size_exponent"):
        if key in sec:
            kc[key] = parse_quantity(sec[key], "dimensionless", where=f"{where}.{key}")
    return kc, None


def _pellet_diffusivity(doc: Mapping[str, Any], path: Path) -> float | None:
    sec = doc.get("pellet")
    if not sec:
        return None
    where = _where(path, "pellet")
    unknown = sorted(set(sec) - {"effective_diffusivity", "tortuosity", "molecular_diffusivity"})
    if unknown:
        raise StudyError(f"{where}: unknown key(s) {unknown}; give effective_diffusivity, or "
                         "tortuosity and molecular_diffusivity (with [catalyst].porosity)")
    if "effective_diffusivity" in sec:
        De = _quantity(sec, "effective_diffusivity", "diffusivity", where)
    elif "tortuosity" in sec and "molecular_diffusivity" in sec:
        eps = doc["catalyst"].get("porosity")
        if eps is None:
            raise StudyError(f"{where}: tortuosity needs [catalyst].porosity")
        eps = parse_quantity(eps, "dimensionless", where=f"{_where(path, 'catalyst')}.porosity")
        tau = parse_quantity(sec["tortuosity"], "dimensionless", where=f"{where}.tortuosity")
        Dm = _quantity(sec, "molecular_diffusivity", "diffusivity", where)
        if not (0 < eps < 1 and tau >= 1 and Dm > 0):
            raise StudyError(f"{where}: need 0 < porosity < 1, tortuosity >= 1 and "
                             "molecular_diffusivity > 0")
        De = eps * Dm / tau  # De = eps_p Dm / tau (Satterfield 1970)
    else:
        raise StudyError(f"{where}: give effective_diffusivity, or tortuosity and "
                         "molecular_diffusivity")
    if not De > 0:
        raise StudyError(f"{where}: the effective diffusivity must be > 0")
    return De


# ------------------------------------------------------------------------------ study building
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


def _sha256(path: Path) -> str:
    return hashlib.sha256(path.read_bytes()).hexdigest()


@dataclass(frozen=True)
class _Built:
    study: Study
    transport: Study          # with the known film and pellet
    bare: Study               # no film, no pellet
    has_kc: bool
    De: float | None


def _build(cf: ClaimFile, claim: Claim) -> _Built:
    """The claim's study (validated by :func:`kinfit.study.load_study`)."""
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
            "kinetics": {"rate_law": "power",
                         "reference_temperature": f"{claim.reference_temperature!r} K",
                         "reference_concentration": f"{claim.reference_concentration!r} mol/m^3"},
            "pellet": {"diffusivity": "direct" if De else "none"},
        }
        if cf.film_section is not None:
            doc["film"] = dict(cf.film_section)
        if "fluid" in cf.doc:
            doc["fluid"] = dict(cf.doc["fluid"])
        doc["parameters"] = {
            "k_ref": {"value": f"{claim.k_ref!r} mol/(kg*s)"},
            "activation_energy": {"value": f"{claim.activation_energy!r} J/mol"},
            "order": {"value": claim.order},
        }
        if De:
            doc["parameters"]["effective_diffusivity"] = {"value": f"{De!r} m^2/s",
                                                          "vary": False}
        fake = tmpdir / cf.path.name
        fake.write_text(_toml(doc), encoding="utf-8")
        try:
            study = load_study(fake)
        except StudyError as exc:
            raise StudyError(str(exc).replace(str(tmpdir), str(cf.path.parent))) from None
    files = {str(cf.path): _sha256(cf.path)}
    if cf.data is not None:
        files.update({str(p): _sha256(p) for p in cf.data})
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
    out: dict[str, Any] = {"model": "agitation"}
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
    sec: dict[str, Any] = {
        "k_ref": {"value": f"{claim.k_ref!r} mol/(kg*s)"},
        "activation_energy": {"value": f"{claim.activation_energy!r} J/mol"},
        "order": {"value": claim.order},
    }
    if built.De:
        sec["effective_diffusivity"] = {"value": f"{built.De!r} m^2/s", "vary": False}
    if cf.kc is not None:
        sec["kc_ref"] = {"value": f"{cf.kc['kc']!r} m/s", "vary": False}
        sec["agitation_exponent"] = {"value": cf.kc.get("agitation_exponent", 0.0),
                                     "vary": False}
        sec["size_exponent"] = {"value": cf.kc.get("size_exponent", 0.0), "vary": False}
    return parameter_table_from_toml(sec, cf.path.name)


# ------------------------------------------------------------------------------ the audit
@dataclass(frozen=True)
class ClaimAudit:
    """The audit of one claim.

    Attributes
    ----------
    name, basis : str
    values : dict
        The claimed values (SI) with units.
    verdict : str
        One of :data:`VERDICTS`.
    evidence : tuple of str
        Why the claim counts as transport-contaminated (or not reproduced).
    missing : tuple of str
        What would be needed to test what could not be tested.
    notes : tuple of str
    conditions : dict
        Test condition (run id) -> factors, ``observable`` criteria (claimed rate as observed)
        and ``as_intrinsic`` state (eta, Thiele modulus, regime, shares, criteria).
    reproduction : dict
        ``as_observed`` and ``transport_aware`` refits (when data were given): estimates,
        intervals, S_hat, S_claim, likelihood ratio, p value, joint-region bound and inside.
    signatures : dict
        ``film``, ``pore_activation_energy``, ``pore_order``: ``found`` (bool or None) and text.
    """

    name: str
    basis: str
    values: Mapping[str, Any]
    verdict: str
    evidence: tuple[str, ...]
    missing: tuple[str, ...]
    notes: tuple[str, ...]
    conditions: Mapping[str, Any]
    reproduction: Mapping[str, Any]
    signatures: Mapping[str, Any]

    def to_dict(self) -> dict[str, Any]:
        """Plain-Python form."""
        return {"name": self.name, "basis": self.basis, "values": self.values,
                "verdict": self.verdict, "evidence": list(self.evidence),
                "missing": list(self.missing), "notes": list(self.notes),
                "conditions": self.conditions, "reproduction": self.reproduction,
                "signatures": self.signatures}


@dataclass(frozen=True)
class AuditResult:
    """The audit of a claim file.

    Attributes
    ----------
    path : Path
    title : str
    claims : tuple of ClaimAudit
    thresholds : dict
    manifest : dict
    """

    path: Path
    title: str
    claims: tuple[ClaimAudit, ...]
    thresholds: Mapping[str, Any]
    manifest: Mapping[str, Any] = field(default_factory=dict)

    def to_dict(self) -> dict[str, Any]:
        """Plain-Python content of audit.json."""
        from kinfit.outputs import to_plain

        return to_plain({"kinfit_audit": 1, "claim_file": str(self.path), "title": self.title,
                         "claims": [c.to_dict() for c in self.claims],
                         "thresholds": self.thresholds, "sources": SOURCES,
                         "manifest": self.manifest})

    def markdown(self) -> str:
        """The short audit report (audit.md)."""
        return _markdown(self)

    def save(self, folder: str | Path) -> Path:
        """Write audit.json and audit.md atomically into ``folder``."""
        from kinfit.outputs import write_json_atomic, write_text_atomic

        folder = Path(folder)
        write_text_atomic(folder / "audit.md", _markdown(self))
        return write_json_atomic(folder / "audit.json", self.to_dict())


def _fixed(table):
    from kinfit.parameters import ParameterTable

    return ParameterTable([replace(table[n], vary=False) for n in table])


def _spec(study: Study, table, *, check: bool = True) -> ModelSpec:
    return ModelSpec.from_study(study, parameters=table, check=check)


def _criteria_at_conditions(built: _Built, cf: ClaimFile, claim: Claim,
                            thresholds: Thresholds) -> dict[str, Any]:
    """Observable criteria (from the observed rate the claim implies: the claimed rate itself
    for a claim "as measured", the rate through the stated film and pellet for a
    "transport-corrected" one) and the state with the claim taken as intrinsic, at every test
    condition."""
    table = _fixed(_transport_table(built, cf, claim))
    spec = _spec(built.transport, table, check=False)
    model = Model(spec, built.transport)
    state = model.run_states(np.zeros(0), thresholds=thresholds)
    if claim.basis == "as measured":
        # the claim describes what was observed
        p = {k: np.asarray(v) for k, v in claim.values().items()}
        r = np.asarray(spec.rate_law.rate(model.C0, model.T, p), dtype=float)
    else:
        # a transport-corrected claim implies the observed rate through the film and pellet
        r = np.asarray(state.observed.rate, dtype=float)
    kc = np.asarray(state.kc, dtype=float)
    with np.errstate(divide="ignore", invalid="ignore"):
        ca = np.where(np.isfinite(kc), r / (kc * model.a_m * model.C0), 0.0)
    cs = model.C0 * np.clip(1.0 - ca, 1e-12, 1.0)
    De = None if built.De is None else np.full(r.shape, built.De)
    obs = compute_criteria(
        observed_rate=r, bulk_concentration=model.C0, surface_concentration=cs,
        intrinsic_rate=r, effectiveness=np.ones_like(r), thiele_modulus=np.full_like(r, np.nan),
        kc=kc, particle_diameter=model.dp, particle_density=spec.particle_density,
        effective_diffusivity=De, geometry=spec.geometry, order=claim.order,
        thresholds=thresholds)
    c = state.criteria
    limits = obs.thresholds
    out: dict[str, Any] = {}
    for i, rid in enumerate(model.run_ids):
        run = built.study.run(rid)
        out[rid] = {
            **{f: run.factor(f) for f in FACTORS},
            "claimed_rate": float(r[i]),
            "observable": {
                "carberry": float(ca[i]) if built.has_kc else None,
                "weisz_prater": float(obs.weisz_prater[i]) if built.De else None,
                "mears": float(obs.mears[i]) if built.has_kc else None,
                "kc": float(kc[i]) if built.has_kc else None,
            },
            "as_intrinsic": {
                "effectiveness_factor": float(c.effectiveness_factor[i]),
                "thiele_modulus": float(c.thiele_modulus[i]),
                "regime": str(c.regime[i]),
                "shares": {"film": float(c.film_share[i]), "pore": float(c.pore_share[i]),
                           "reaction": float(c.reaction_share[i])},
                "observed_rate": float(state.observed.rate[i]),
                "carberry": float(c.carberry[i]) if built.has_kc else None,
                "weisz_prater": float(c.weisz_prater[i]) if built.De else None,
            },
        }
    return {"runs": out, "limits": limits}


def _refit(study: Study, table, claim: Claim, label: str) -> dict[str, Any]:
    """Refit the kinetics of one model and test the claimed values against the optimum."""
    from kinfit.fitting import FitOptions, fit_model

    names = [n for n in ("k_ref", "activation_energy", "order") if table[n].vary]
    spec = _spec(study, table)
    model = Model(spec, study)
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        res = fit_model(spec, study, FitOptions(profile=False, max_nfev=400))
    theta_c = np.array([claim.values()[c] for c in model.columns])
    with np.errstate(all="ignore"):
        f = model.predict(theta_c[None, :])[0]
    s_claim = float(np.sum(model.weights * (model.y - f) ** 2))
    n, p = model.n_obs, len(model.columns)
    s_hat = min(float(res.fit["sse"]), s_claim)
    lr = max(n * math.log(s_claim / s_hat), 0.0) if s_hat > 0 else math.inf
    bound = s_hat * (1.0 + p / (n - p) * stats.f.ppf(LEVEL, p, n - p)) if n > p else math.inf
    p_value = float(stats.chi2.sf(lr, p))
    estimates = {}
    for c in ("k_ref", "activation_energy", "order"):
        e = res.parameters[c]
        estimates[c] = {"estimate": float(e["estimate"]), "unit": e["unit"],
                        "stderr": e.get("stderr"), "ci95": e.get("ci95"), "vary": e["vary"]}
    rejected = bool(p_value < 1 - LEVEL or s_claim > bound)
    return {
        "model": label, "film": spec.film.name, "pellet": spec.pellet,
        "tested": names, "converged": bool(res.converged), "message": res.fit["message"],
        "n_obs": n, "n_params": p, "estimates": estimates, "sse_optimum": s_hat,
        "sse_claim": s_claim, "likelihood_ratio": lr, "p_value": p_value,
        "joint_region_bound": bound, "inside_joint_region": bool(s_claim <= bound),
        "rejected": rejected, "regimes": {rid: r["regime"] for rid, r in res.runs.items()},
        "warnings": sorted({str(w.message) for w in caught}),
    }


def _kinetic_table(built: _Built, cf: ClaimFile, claim: Claim, *, transport: bool,
                   notes: list[str]):
    table = _transport_table(built, cf, claim) if transport else parameter_table_from_toml({
        "k_ref": {"value": f"{claim.k_ref!r} mol/(kg*s)"},
        "activation_energy": {"value": f"{claim.activation_energy!r} J/mol"},
        "order": {"value": claim.order}}, cf.path.name)
    study = built.study
    from kinfit.parameters import ParameterTable

    fix = set()
    if len({round(r.temperature, 6) for r in study.runs}) < 2:
        fix.add("activation_energy")
        notes.append("the data hold one temperature only: the activation energy is held at "
                     "the claimed value in the refits (not tested)")
    if study.kind == "rate" and len({round(r.initial_concentration, 9)
                                     for r in study.runs}) < 2:
        fix.add("order")
        notes.append("the rate data hold one initial concentration only: the order is held at "
                     "the claimed value in the refits (not tested)")
    return ParameterTable([replace(table[n], vary=False) if n in fix else table[n]
                           for n in table])


def _signatures(claim: Claim, transport_fit: dict[str, Any] | None, has_pellet: bool
                ) -> dict[str, Any]:
    Ea, n = claim.activation_energy, claim.order
    out: dict[str, Any] = {}
    film = Ea < FILM_EA_LIMIT
    first = abs(n - 1.0) <= ORDER_TOLERANCE
    out["film"] = {
        "found": bool(film),
        "text": (f"claimed activation energy {Ea / 1e3:.3g} kJ/mol is below "
                 f"{FILM_EA_LIMIT / 1e3:g} kJ/mol" + (" with a first apparent order" if first
                                                      else "")
                 + ": the signature of film control (common practice)") if film else
                (f"claimed activation energy {Ea / 1e3:.3g} kJ/mol is not near zero: no film "
                 "signature"),
    }
    if transport_fit is None or not (transport_fit["converged"] and has_pellet):
        why = ("no effective diffusivity, so no pore-diffusion refit" if not has_pellet else
               "no data" if transport_fit is None else "the transport-aware refit did not "
               "converge")
        out["pore_activation_energy"] = {"found": None, "text": f"not tested: {why}"}
        out["pore_order"] = {"found": None, "text": f"not tested: {why}"}
        return out
    est = transport_fit["estimates"]
    pore_runs = [rid for rid, g in transport_fit["regimes"].items() if g == "pore"]
    if not pore_runs:
        text = ("not expected: at the transport-aware refit no test run is in the pore "
                "regime, where the halving of Ea and the order (n + 1)/2 apply")
        out["pore_activation_energy"] = {"found": False, "text": text}
        out["pore_order"] = {"found": False, "text": text}
        return out
    e_int = est["activation_energy"]
    if e_int["vary"] and e_int["estimate"] > 0:
        ratio = Ea / e_int["estimate"]
        ci = e_int["ci95"] or [None, None]
        found = bool(PORE_EA_RATIO[0] <= ratio <= PORE_EA_RATIO[1] and ci[0] is not None
                     and Ea < ci[0])
        span = ("" if ci[0] is None or ci[1] is None else
                f" (95 % interval {ci[0] / 1e3:.3g} to {ci[1] / 1e3:.3g} kJ/mol)")
        out["pore_activation_energy"] = {
            "found": found, "ratio": ratio, "intrinsic": e_int["estimate"],
            "text": (f"claimed activation energy {Ea / 1e3:.3g} kJ/mol is {ratio:.2f} of the "
                     f"intrinsic {e_int['estimate'] / 1e3:.3g} kJ/mol refitted with pore "
                     f"diffusion{span}"
                     + (": about half, the signature of strong pore-diffusion control "
                        "(Weisz & Prater 1954; Satterfield 1970)" if found else
                        ": not the halving of strong pore-diffusion control")),
        }
    else:
        out["pore_activation_energy"] = {"found": None, "text": "not tested: the activation "
                                         "energy was not refitted"}
    n_int = est["order"]
    se = n_int.get("stderr")
    ci = n_int.get("ci95") or [None, None]
    if n_int["vary"] and se is not None and abs(n_int["estimate"] - 1.0) > max(
            ORDER_TOLERANCE, 2.0 * se):
        expected = 0.5 * (n_int["estimate"] + 1.0)
        outside = ci[0] is not None and ci[1] is not None and not ci[0] <= n <= ci[1]
        found = bool(abs(n - expected) <= max(ORDER_TOLERANCE, 2.0 * se) and outside)
        out["pore_order"] = {
            "found": found, "expected_apparent": expected, "intrinsic": n_int["estimate"],
            "text": (f"claimed order {n:.3g} " + ("equals" if found else "differs from")
                     + f" (n + 1)/2 = {expected:.3g} of the refitted intrinsic order "
                     f"{n_int['estimate']:.3g}" + (": the signature of strong pore diffusion"
                                                   if found else "")),
        }
    else:
        out["pore_order"] = {"found": None, "text": "not informative: the refitted intrinsic "
                             "order is not distinguishable from first order, which stays first "
                             "order under pore diffusion ((n + 1)/2 = n)"
                             if n_int["vary"] else "not tested: the order was not refitted"}
    return out


def _criteria_evidence(crit: dict[str, Any], thresholds: Thresholds) -> tuple[list[str], bool]:
    """Sentences on criteria that fail at the test conditions, and whether any could not be
    computed."""
    runs, lim = crit["runs"], crit["limits"]
    out = []
    uncomputed = False

    def worst(key: str, group: str) -> tuple[str, float] | None:
        vals = [(rid, r[group][key]) for rid, r in runs.items() if r[group][key] is not None]
        return max(vals, key=lambda t: t[1]) if vals else None

    ca = worst("carberry", "observable")
    if ca is None:
        uncomputed = True
    elif ca[1] >= 1.0:
        out.append(f"the claimed rate at run {ca[0]} exceeds the largest rate the film can "
                   f"supply, kc a_m Cb (Carberry number {ca[1]:.3g} >= 1): the claim cannot "
                   "describe these test conditions with the stated kc")
    elif ca[1] >= lim["carberry"]:
        out.append(f"Carberry number up to {ca[1]:.3g} (run {ca[0]}) against the limit "
                   f"{lim['carberry']:.3g} = 0.05/|n|: the film takes more than 5 % of the "
                   "rate (Carberry 1976)")
    wp = worst("weisz_prater", "observable")
    if wp is None:
        uncomputed = True
    elif wp[1] >= lim["weisz_prater"]:
        out.append(f"Weisz-Prater number up to {wp[1]:.3g} (run {wp[0]}) against the limit "
                   f"{lim['weisz_prater']:.3g} (Psi_L; Psi_R < 0.3, Weisz & Prater 1954): "
                   "pore diffusion limits the rate")
    bad = [(rid, r["as_intrinsic"]) for rid, r in runs.items()
           if r["as_intrinsic"]["regime"] != "kinetic"
           or r["as_intrinsic"]["effectiveness_factor"] < thresholds.effectiveness]
    if bad:
        rid, s = min(bad, key=lambda t: t[1]["effectiveness_factor"])
        out.append(f"taken as intrinsic, the claim is not free of transport at its own test "
                   f"conditions: at run {rid} eta = {s['effectiveness_factor']:.3g} (limit "
                   f"{thresholds.effectiveness:g}), regime '{s['regime']}' (film share "
                   f"{s['shares']['film']:.2f}, pore share {s['shares']['pore']:.2f})")
    return out, uncomputed


def _audit_one(cf: ClaimFile, claim: Claim, thresholds: Thresholds) -> ClaimAudit:
    built = _build(cf, claim)
    notes: list[str] = []
    missing: list[str] = []
    if not built.has_kc:
        missing.append("the film coefficient at the test conditions ([film] kc, or a Sherwood "
                       "correlation model with [fluid] properties): without it the Carberry "
                       "and Mears numbers cannot be computed")
    if not built.De:
        missing.append("the effective diffusivity (effective_diffusivity in the claim or "
                       "[pellet]): without it the Weisz-Prater number, eta and the "
                       "pore-diffusion signature cannot be computed")
    crit = _criteria_at_conditions(built, cf, claim, thresholds)
    crit_evidence, uncomputed = _criteria_evidence(crit, thresholds)
    reproduction: dict[str, Any] = {}
    transport_fit = None
    if cf.data is None:
        missing.append("data (a [data] section with runs and observations): without them "
                       "whether the data reproduce the claim cannot be tested")
    else:
        bare = _kinetic_table(built, cf, claim, transport=False, notes=notes)
        reproduction["as_observed"] = _refit(built.bare, bare, claim, "power law, no transport")
        if built.has_kc or built.De:
            table = _kinetic_table(built, cf, claim, transport=True, notes=[])
            transport_fit = _refit(built.transport, table, claim,
                                   "power law with the stated film and pellet")
            reproduction["transport_aware"] = transport_fit
        for key, r in reproduction.items():
            if not r["converged"]:
                notes.append(f"the {key.replace('_', '-')} refit did not converge "
                             f"({r['message']}); its test is indicative only")
    signatures = _signatures(claim, transport_fit, bool(built.De))
    evidence: list[str] = []
    if claim.basis == "as measured":
        evidence += crit_evidence
        evidence += [s["text"] for s in signatures.values() if s["found"]]
        bare_fit = reproduction.get("as_observed")
        if transport_fit and bare_fit and transport_fit["rejected"] and not bare_fit["rejected"]:
            evidence.append(
                "the data follow the claimed values only when transport is ignored: rejected "
                f"with the stated film and pellet (likelihood ratio p = "
                f"{transport_fit['p_value']:.2g}), accepted without them "
                f"(p = {bare_fit['p_value']:.2g})")
    else:
        notes += [f"test conditions: {t}; the claim rests on the stated kc and De"
                  for t in crit_evidence]
    applicable = transport_fit or reproduction.get("as_observed")
    rejected = bool(applicable and applicable["rejected"])
    if evidence:
        verdict = "transport-contaminated"
    elif rejected and applicable is not None:
        verdict = "not reproduced by the data"
        evidence.append(
            f"the data reject the claimed values ({applicable['model']}: likelihood ratio "
            f"{applicable['likelihood_ratio']:.3g}, p = {applicable['p_value']:.2g}; S at the "
            f"claim {applicable['sse_claim']:.4g} against the joint 95 % bound "
            f"{applicable['joint_region_bound']:.4g})")
    elif claim.basis == "as measured" and uncomputed:
        verdict = "not testable with these data"
    elif claim.basis == "transport-corrected" and (crit_evidence or uncomputed) and (
            transport_fit is None):
        verdict = "not testable with these data"
        missing.append("data with the stated film and pellet, to check the transport "
                       "correction the claim rests on")
    else:
        verdict = "consistent with intrinsic kinetics"
    values = {"k_ref": {"value": claim.k_ref, "unit": "mol/(kg*s)"},
              "reference_temperature": {"value": claim.reference_temperature, "unit": "K"},
              "reference_concentration": {"value": claim.reference_concentration,
                                          "unit": "mol/m^3"},
              "activation_energy": {"value": claim.activation_energy, "unit": "J/mol"},
              "order": {"value": claim.order, "unit": "1"},
              "effective_diffusivity": {"value": built.De, "unit": "m^2/s",
                                        "from": "claim" if claim.effective_diffusivity
                                        else ("[pellet]" if built.De else None)}}
    return ClaimAudit(claim.name, claim.basis, values, verdict, tuple(evidence),
                      tuple(missing), tuple(notes), crit, reproduction, signatures)


def audit_claims(path: str | Path | ClaimFile, *, thresholds: Thresholds | None = None
                 ) -> AuditResult:
    """Audit every claim of a claim file.

    Parameters
    ----------
    path : str, Path or ClaimFile
        The claim file (see :func:`load_claims` for the format).
    thresholds : Thresholds, optional
        Criteria limits (default: those of :mod:`kinfit.criteria`).

    Returns
    -------
    AuditResult

    Raises
    ------
    StudyError
        Bad input in the claim file or its tables.
    """
    cf = path if isinstance(path, ClaimFile) else load_claims(path)
    thresholds = thresholds or Thresholds()
    from kinfit.outputs import manifest

    files = {str(cf.path): _sha256(cf.path)}
    if cf.data is not None:
        files.update({str(p): _sha256(p) for p in cf.data})
    claims = tuple(_audit_one(cf, c, thresholds) for c in cf.claims)
    return AuditResult(cf.path, cf.title, claims,
                       {"carberry": f"{thresholds.carberry:g}/|n|",
                        "weisz_prater_radius": thresholds.weisz_prater_radius,
                        "mears": thresholds.mears, "effectiveness": thresholds.effectiveness,
                        "film_activation_energy": FILM_EA_LIMIT,
                        "pore_activation_energy_ratio": list(PORE_EA_RATIO),
                        "order_tolerance": ORDER_TOLERANCE, "level": LEVEL},
                       manifest(files=files, argv=None))


# ------------------------------------------------------------------------------ report
def _fmt(v: float | None, spec: str = ".3g") -> str:
    return "n/a" if v is None else format(v, spec)


def _interval(entry: Mapping[str, Any], scale: float = 1.0) -> str:
    est = entry["estimate"] / scale
    ci = entry["ci95"]
    if not entry["vary"]:
        return f"{est:.4g} (held)"
    if not ci or ci[0] is None or ci[1] is None:
        return f"{est:.4g}"
    return f"{est:.4g} ({ci[0] / scale:.4g} to {ci[1] / scale:.4g})"


def _markdown(result: AuditResult) -> str:
    from kinfit.predict import display

    lines = [f"# Audit of claimed kinetics: {result.title}", "",
             f"Claim file: `{result.path.name}`. Criteria and thresholds as in kinfit's "
             "criteria module; sources at the end.", "",
             "| claim | basis | k_ref [mol/(kg s)] at T_ref | Ea [kJ/mol] | order | verdict |",
             "|---|---|---|---|---|---|"]
    for c in result.claims:
        v = c.values
        lines.append(f"| {c.name} | {c.basis} | {v['k_ref']['value']:.4g} at "
                     f"{v['reference_temperature']['value'] - 273.15:.4g} degC | "
                     f"{v['activation_energy']['value'] / 1e3:.4g} | {v['order']['value']:.3g} "
                     f"| **{c.verdict}** |")
    for c in result.claims:
        lines += ["", f"## {c.name}", "", f"**Verdict: {c.verdict}.**", ""]
        if c.evidence:
            lines += ["Evidence:", ""] + [f"- {e}" for e in c.evidence] + [""]
        if c.missing:
            lines += ["Not tested (missing):", ""] + [f"- {m}" for m in c.missing] + [""]
        lines += ["### Criteria at the test conditions", "",
                  "Carberry, Weisz-Prater and Mears from the observed rate the claim implies "
                  "(the claimed rate itself when claimed as measured). As intrinsic: the claim "
                  "pushed through the stated film and pellet.", "",
                  "| run | conditions | Carberry | Weisz-Prater | Mears | eta as intrinsic | "
                  "regime as intrinsic |", "|---|---|---|---|---|---|---|"]
        lim = c.conditions["limits"]
        for rid, r in c.conditions["runs"].items():
            cond = ", ".join(display(f, r[f]) for f in ("temperature", "stirrer_speed",
                                                       "particle_diameter",
                                                       "initial_concentration"))
            o, s = r["observable"], r["as_intrinsic"]
            lines.append(f"| {rid} | {cond} | {_fmt(o['carberry'])} | "
                         f"{_fmt(o['weisz_prater'])} | {_fmt(o['mears'])} | "
                         f"{s['effectiveness_factor']:.3g} | {s['regime']} |")
        lines += ["", f"Limits: Carberry {lim['carberry']:.3g} (0.05/|n|), Weisz-Prater "
                  f"{lim['weisz_prater']:.3g} (Psi_L), Mears {lim['mears']:.3g}, eta >= "
                  f"{lim['effectiveness_factor']:.3g}.", ""]
        if c.reproduction:
            lines += ["### Do the data reproduce the claim?", "",
                      "| refit | k_ref | Ea [kJ/mol] (95 %) | order (95 %) | LR (p) | S claim / "
                      "joint bound | claim |", "|---|---|---|---|---|---|---|"]
            for r in c.reproduction.values():
                e = r["estimates"]
                lines.append(f"| {r['model']} | {e['k_ref']['estimate']:.4g} | "
                             f"{_interval(e['activation_energy'], 1e3)} | "
                             f"{_interval(e['order'])} | "
                             f"{r['likelihood_ratio']:.3g} ({r['p_value']:.2g}) | "
                             f"{r['sse_claim']:.4g} / {r['joint_region_bound']:.4g} | "
                             f"{'rejected' if r['rejected'] else 'accepted'} |")
            lines.append("")
        lines += ["### Signatures", ""] + [f"- {s['text']}" for s in c.signatures.values()]
        if c.notes:
            lines += ["", "Notes:", ""] + [f"- {n}" for n in c.notes]
    lines += ["", "## Sources", ""] + [f"- {k}: {v}" for k, v in SOURCES.items()]
    return "\n".join(lines) + "\n"


# ------------------------------------------------------------------------------ command line
def add_audit_arguments(parser: argparse.ArgumentParser) -> None:
    """Options of ``kinfit audit CLAIM [--out DIR]``."""
    parser.add_argument("claim", type=Path, help="the claim file (TOML)")
    parser.add_argument("--out", type=Path, default=Path("reports") / "audit",
                        help="output folder (default: reports/audit)")
    parser.add_argument("--require-consistent", action="store_true",
                        help="exit 1 unless every claim is consistent with intrinsic kinetics")


def run_audit_command(args: argparse.Namespace) -> int:
    """Run ``kinfit audit``; returns the exit code."""
    from kinfit.outputs import prepare_out_dir

    result = audit_claims(args.claim)
    result = replace(result, manifest={**result.manifest, "command": list(sys.argv)})
    out = prepare_out_dir(args.out)
    result.save(out)
    for c in result.claims:
        print(f"{c.name}: {c.verdict}")
        for e in c.evidence:
            print(f"  - {e}")
        for m in c.missing:
            print(f"  missing: {m}")
    print(f"\nwrote {out / 'audit.json'} and {out / 'audit.md'}")
    if args.require_consistent and any(c.verdict != VERDICTS[0] for c in result.claims):
        print("kinfit: not every claim is consistent with intrinsic kinetics", file=sys.stderr)
        return 1
    return 0
