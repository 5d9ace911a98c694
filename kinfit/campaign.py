"""What a campaign can and cannot tell before any fitting: a line per run, the factors varied,
and the classic transport tests the runs support."""

from __future__ import annotations

from kinfit.study import FACTORS, Study, comparison_sets

__all__ = ["campaign_summary", "TEST_MEANING"]

#: what each model-free test shows when the runs agree (the trade's logic, common practice)
TEST_MEANING = {
    "stirrer_speed": "film resistance (the pores are not tested by it)",
    "particle_diameter": "film and pore resistance together (same stirrer speed)",
    "catalyst_loading": "gas-liquid supply (the rate per catalyst mass is unchanged when the "
                        "dissolved-gas supply does not limit; common practice)",
}

_LABEL = {
    "temperature": ("T", "degC", 1.0), "stirrer_speed": ("N", "rpm", 60.0),
    "particle_diameter": ("dp", "um", 1e6), "catalyst_loading": ("w", "g/L", 1.0),
    "initial_concentration": ("C0", "mol/L", 1e-3),
}


def _fmt(factor: str, value: float) -> str:
    sym, unit, scale = _LABEL[factor]
    if factor == "temperature":
        return f"{sym} {value - 273.15:.4g} degC"
    return f"{sym} {value * scale:.4g} {unit}"


def campaign_summary(study: Study) -> str:
    """Plain-text summary of a study for ``kinfit check``."""
    lines = [f"study '{study.name}': {len(study.runs)} runs, {study.n_obs} observations "
             f"({'initial/differential rates' if study.kind == 'rate' else 'batch profiles'})",
             ""]
    head = (f"{'run':<10}{'T [K]':>9}{'N [rpm]':>10}{'dp [um]':>10}{'w [g/L]':>10}"
            f"{'C0 [mol/L]':>12}{'points':>8}{'span [min]':>12}  group")
    lines.append(head)
    for r in study.runs:
        span = (r.times.max() - r.times.min()) / 60.0 if r.times.size else 0.0
        lines.append(
            f"{r.id:<10}{r.temperature:>9.2f}{r.stirrer_speed * 60:>10.0f}"
            f"{r.particle_diameter * 1e6:>10.1f}{r.catalyst_loading:>10.3g}"
            f"{r.initial_concentration / 1000:>12.4g}{r.n_obs:>8d}{span:>12.1f}  {r.group or ''}"
        )
    lines.append("")
    varied = study.varied_factors()
    if varied:
        lines.append("factors varied:")
        for f, vals in varied.items():
            lines.append(f"  {f}: {len(vals)} levels ({', '.join(_fmt(f, v) for v in vals)})")
    else:
        lines.append("factors varied: none (every run at the same conditions)")
    fixed = [f for f in FACTORS if f not in varied]
    if fixed:
        lines.append("factors held constant: " + ", ".join(fixed))
    lines.append("")
    lines.append("transport tests the runs support (runs differing only in one factor):")
    for factor, meaning in TEST_MEANING.items():
        sets = comparison_sets(study, factor)
        if not sets:
            lines.append(f"  {factor}: none possible; runs equal in every other factor but "
                         f"this one are needed to test {meaning}")
            continue
        lines.append(f"  {factor}: {len(sets)} set(s), tests {meaning}")
        for s in sets:
            at = ", ".join(_fmt(f, v) for f, v in s.fixed.items() if f in varied)
            lines.append(f"    {' vs '.join(_fmt(factor, v) for v in s.values)} at {at}: "
                         f"runs {', '.join(s.runs)}")
    if "temperature" not in varied:
        lines.append("  temperature: one level only; the activation energy is not identified")
    return "\n".join(lines)
