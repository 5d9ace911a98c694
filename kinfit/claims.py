"""Claim files for ``kinfit audit``: a supplier's claimed power law (k or k_ref with its reference
temperature, Ea, order, perhaps De) or Langmuir-Hinshelwood law (k_ref, Ea, K, dH_ads, m,
perhaps De), the test conditions or data it came from, the catalyst and what is known of the
film and the pellet; read, validated and turned into kinfit studies.
"""

from __future__ import annotations

import hashlib
import json
import math
import tempfile
import tomllib
from collections.abc import Mapping, Sequence
from dataclasses import dataclass, replace
from itertools import product
from pathlib import Path
from typing import Any

import numpy as np
from numpy.typing import NDArray

from kinfit.errors import StudyError
from kinfit.parameters import parameter_table_from_toml
from kinfit.study import FACTORS, Study, load_study
from kinfit.units import parse_quantity, ureg

__all__ = ["Claim", "ClaimFile", "BASES", "RATE_LAWS", "load_claims"]

Array = NDArray[np.float64]
BASES = ("as measured", "transport-corrected")
#: rate laws a claim may state (kinfit names)
RATE_LAWS = ("power", "langmuir_hinshelwood")
_COMMON_KEYS = {"name", "source", "basis", "rate_law", "k_ref", "pre_exponential_factor",
                "reference_temperature", "activation_energy", "effective_diffusivity", "note"}
_LAW_KEYS = {"power": _COMMON_KEYS | {"rate_constant", "reference_concentration", "order"},
             "langmuir_hinshelwood": _COMMON_KEYS | {"adsorption_constant",
                                                     "adsorption_enthalpy", "m"}}
_CLAIM_KEYS = _LAW_KEYS["power"] | _LAW_KEYS["langmuir_hinshelwood"]
_FILM_KC_KEYS = {"kc", "speed", "diameter", "agitation_exponent", "size_exponent"}


# ------------------------------------------------------------------------------ the claim file
@dataclass(frozen=True)
class Claim:
    """One claimed rate law (power law or Langmuir-Hinshelwood), SI units.

    Attributes
    ----------
    name, source, note : str
    basis : {"as measured", "transport-corrected"}
        Whether the values are the measured kinetics as such (the usual claim) or were
        extracted with film and pore corrections (with the file's kc and De).
    k_ref : float
        Power law: rate at ``reference_concentration`` and ``reference_temperature``;
        Langmuir-Hinshelwood: k(T_ref) of r = k K C/(1 + K C)^m; mol/(kg s).
    reference_temperature : float
        K.
    reference_concentration : float
        mol/m^3 (power law; unused by a Langmuir-Hinshelwood claim).
    activation_energy : float
        J/mol.
    order : float or None
        Power-law order; None for a Langmuir-Hinshelwood claim.
    effective_diffusivity : float or None
        m^2/s, when the claim states one.
    rate_law : {"power", "langmuir_hinshelwood"}
    adsorption_constant : float or None
        K(T_ref), m^3/mol (Langmuir-Hinshelwood only).
    adsorption_enthalpy : float
        J/mol, van 't Hoff enthalpy of K (Langmuir-Hinshelwood only).
    m : int
        Denominator power, 1 or 2 (Langmuir-Hinshelwood only).
    """

    name: str
    basis: str
    k_ref: float
    reference_temperature: float
    reference_concentration: float
    activation_energy: float
    order: float | None
    effective_diffusivity: float | None = None
    source: str = ""
    note: str = ""
    rate_law: str = "power"
    adsorption_constant: float | None = None
    adsorption_enthalpy: float = 0.0
    m: int = 1

    @property
    def is_lh(self) -> bool:
        """Whether the claim is a Langmuir-Hinshelwood law."""
        return self.rate_law == "langmuir_hinshelwood"

    def values(self) -> dict[str, float]:
        """The kinetic parameters by their kinfit names (three for a power law, four for a
        Langmuir-Hinshelwood law)."""
        if self.is_lh:
            assert self.adsorption_constant is not None
            return {"k_ref": self.k_ref, "activation_energy": self.activation_energy,
                    "adsorption_constant": self.adsorption_constant,
                    "adsorption_enthalpy": self.adsorption_enthalpy}
        assert self.order is not None
        return {"k_ref": self.k_ref, "activation_energy": self.activation_energy,
                "order": self.order}

    def kinetics_section(self) -> dict[str, Any]:
        """The ``[kinetics]`` section of the claim's study."""
        if self.is_lh:
            return {"rate_law": self.rate_law,
                    "reference_temperature": f"{self.reference_temperature!r} K", "m": self.m}
        return {"rate_law": "power",
                "reference_temperature": f"{self.reference_temperature!r} K",
                "reference_concentration": f"{self.reference_concentration!r} mol/m^3"}

    def parameter_section(self) -> dict[str, dict[str, Any]]:
        """``[parameters.NAME]`` blocks at the claimed values (study vocabulary)."""
        units = {"k_ref": "mol/(kg*s)", "activation_energy": "J/mol",
                 "adsorption_constant": "m^3/mol", "adsorption_enthalpy": "J/mol"}
        return {k: {"value": f"{v!r} {units[k]}" if k in units else v}
                for k, v in self.values().items()}


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
    law = sec.get("rate_law", "power")
    unknown = sorted(set(sec) - _CLAIM_KEYS)
    if unknown:
        raise StudyError(f"{where}: unknown key(s) {unknown}; allowed keys are "
                         f"{sorted(_LAW_KEYS.get(law, _CLAIM_KEYS) if isinstance(law, str) else _CLAIM_KEYS)}")
    if law not in RATE_LAWS:
        raise StudyError(f"{where}: rate_law = {law!r} is not supported by the audit; write "
                         "rate_law = \"power\" or rate_law = \"langmuir_hinshelwood\"")
    foreign = sorted(set(sec) - _LAW_KEYS[law])
    if foreign:
        other = next(x for x in RATE_LAWS if x != law)
        raise StudyError(f"{where}: key(s) {foreign} belong to rate_law = \"{other}\", not to "
                         f"rate_law = \"{law}\"; remove them or change rate_law")
    basis = sec.get("basis", "as measured")
    if basis not in BASES:
        raise StudyError(f"{where}: basis = {basis!r} is not recognised; use one of {list(BASES)}")
    if law == "langmuir_hinshelwood":
        return _lh_claim(sec, i, path, where, basis)
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
    De = _claimed_diffusivity(sec, where)
    return Claim(str(sec.get("name", f"claim {i + 1}")), basis, float(k_ref), T_ref, C_ref, Ea,
                 n, De, str(sec.get("source", "")), str(sec.get("note", "")))


def _claimed_diffusivity(sec: Mapping[str, Any], where: str) -> float | None:
    De = (_quantity(sec, "effective_diffusivity", "diffusivity", where)
          if "effective_diffusivity" in sec else None)
    if De is not None and not De > 0:
        raise StudyError(f"{where}.effective_diffusivity must be > 0")
    return De


def _lh_claim(sec: Mapping[str, Any], i: int, path: Path, where: str, basis: str) -> Claim:
    """A Langmuir-Hinshelwood claim, r = k(T) K(T) C/(1 + K(T) C)^m.

    k_ref (or pre_exponential_factor), reference_temperature, activation_energy,
    adsorption_constant and adsorption_enthalpy are required: K and its temperature dependence
    are part of what is claimed, so the audit does not supply a default enthalpy (write
    "0 kJ/mol" for a K taken independent of temperature). m defaults to 1.
    """
    examples = {"reference_temperature": "reference_temperature = \"60 degC\" (the temperature "
                                         "of k_ref and adsorption_constant)",
                "activation_energy": "activation_energy = \"60 kJ/mol\"",
                "adsorption_constant": "adsorption_constant = \"0.8 L/mol\" (K at the "
                                       "reference temperature)",
                "adsorption_enthalpy": "adsorption_enthalpy = \"-20 kJ/mol\" (write \"0 kJ/mol\" "
                                       "if the claim takes K independent of temperature)"}
    for key, text in examples.items():
        if key not in sec:
            raise StudyError(f"{where}: '{key}' is missing for rate_law = "
                             f"\"langmuir_hinshelwood\"; write for example {text}")
    given = [k for k in ("k_ref", "pre_exponential_factor") if k in sec]
    if len(given) != 1:
        raise StudyError(f"{where}: give exactly one of k_ref (k of r = k K C/(1 + K C)^m at the "
                         "reference temperature, mol/(kg*s)) or pre_exponential_factor; found "
                         f"{given or 'none'}")
    T_ref = _quantity(sec, "reference_temperature", "temperature", where)
    Ea = _quantity(sec, "activation_energy", "energy_per_mol", where)
    if not 0.0 <= Ea <= 4e5:
        raise StudyError(f"{where}.activation_energy = {Ea:g} J/mol lies outside [0, 400] kJ/mol")
    if given[0] == "k_ref":
        k_ref = _quantity(sec, "k_ref", "rate_per_mass", where)
    else:
        A = _quantity(sec, "pre_exponential_factor", "rate_per_mass", where)
        k_ref = A * math.exp(-Ea / (8.314462618 * T_ref))
    if not k_ref > 0:
        raise StudyError(f"{where}: the claimed rate constant must be > 0")
    K = _quantity(sec, "adsorption_constant", "per_concentration", where)
    if not K > 0:
        raise StudyError(f"{where}.adsorption_constant must be > 0, e.g. \"0.8 L/mol\"")
    dH = _quantity(sec, "adsorption_enthalpy", "energy_per_mol", where)
    if not -4e5 <= dH <= 4e5:
        raise StudyError(f"{where}.adsorption_enthalpy = {dH:g} J/mol lies outside "
                         "[-400, 400] kJ/mol")
    m = sec.get("m", 1)
    if isinstance(m, bool) or not isinstance(m, int | float) or m not in (1, 2):
        raise StudyError(f"{where}.m = {m!r}: the denominator power of r = k K C/(1 + K C)^m "
                         "must be 1 (single site) or 2 (dual site); write m = 1 or m = 2")
    return Claim(str(sec.get("name", f"claim {i + 1}")), basis, float(k_ref), T_ref, 1000.0,
                 Ea, None, _claimed_diffusivity(sec, where), str(sec.get("source", "")),
                 str(sec.get("note", "")), rate_law="langmuir_hinshelwood",
                 adsorption_constant=float(K), adsorption_enthalpy=float(dH), m=int(m))


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

        [[claim]]                      # a Langmuir-Hinshelwood claim, r = k K C/(1 + K C)^m
        rate_law = "langmuir_hinshelwood"
        k_ref = "0.05 mol/(kg*s)"      # k at T_ref (or pre_exponential_factor)
        reference_temperature = "60 degC"
        activation_energy = "60 kJ/mol"
        adsorption_constant = "0.8 L/mol"      # K at T_ref
        adsorption_enthalpy = "-20 kJ/mol"     # required ("0 kJ/mol": K independent of T)
        m = 1                          # 1 or 2, default 1

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
                         "with k_ref, reference_temperature, activation_energy and order (or "
                         "rate_law = \"langmuir_hinshelwood\" with adsorption_constant and "
                         "adsorption_enthalpy)")
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
