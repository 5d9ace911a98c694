"""Standard sieve apertures and practical stirrer speeds: what a lab can actually run.

Particle sizes of a porous catalyst are set by sieving: a fraction is what passes one sieve and
stays on the next finer one. The apertures are those of ASTM E11 (Standard Specification for
Woven Wire Test Sieve Cloth and Test Sieves, Table 1), which from 32 um up follow the R40/3
series of ISO 565 (ISO 3310-1); the list below runs from 20 um (No. 635) to 4.75 mm (No. 4)
(aperture values from memory of that table). Below 20 um no woven sieve exists; such
particles are classified by sedimentation or air classification, and kinfit rounds a size
there down to the R10 preferred numbers (ISO 3: 1, 1.25, 1.6, 2, 2.5, 3.15, 4, 5, 6.3, 8).

Stirrer speeds are proposed on a grid of 50 rpm (common practice: lab stirrer controllers
are set in such steps, and a finer step is within their drift).
"""

from __future__ import annotations

import math

__all__ = ["ASTM_E11_APERTURES", "SPEED_STEP", "sieve_fraction", "practical_speed",
           "speed_grid"]

#: ASTM E11 standard sieve apertures, m (No. 635 to No. 4)
ASTM_E11_APERTURES = tuple(a * 1e-6 for a in (
    20, 25, 32, 38, 45, 53, 63, 75, 90, 106, 125, 150, 180, 212, 250, 300, 355, 425, 500, 600,
    710, 850, 1000, 1180, 1400, 1700, 2000, 2360, 2800, 3350, 4000, 4750))
_R10 = (1.0, 1.25, 1.6, 2.0, 2.5, 3.15, 4.0, 5.0, 6.3, 8.0)
#: stirrer-speed step, rev/s (50 rpm)
SPEED_STEP = 50.0 / 60.0


def sieve_fraction(d_max: float) -> tuple[float, float, str]:
    """The coarsest sieve fraction whose particles are all at most ``d_max`` (m).

    Returns ``(diameter, upper, label)``: the fraction's mean aperture (the diameter the model
    uses, common practice), its upper sieve, and a label such as ``"45-53 um sieve fraction"``.
    Below the finest sieve, a classified fraction at the R10 number at or below ``d_max``.

    Examples
    --------
    >>> sieve_fraction(60e-6)[2]
    '45-53 um sieve fraction'
    >>> round(sieve_fraction(60e-6)[0] * 1e6, 3)
    49.0
    >>> sieve_fraction(4.145e-6)[2]
    'classified fraction of about 4 um (finer than the finest sieve, 20 um)'
    """
    fits = [i for i, a in enumerate(ASTM_E11_APERTURES) if a <= d_max * (1 + 1e-9)]
    if len(fits) >= 2:
        hi = fits[-1]
        a_lo, a_hi = ASTM_E11_APERTURES[hi - 1], ASTM_E11_APERTURES[hi]
        return (0.5 * (a_lo + a_hi), a_hi,
                f"{a_lo * 1e6:.4g}-{a_hi * 1e6:.4g} um sieve fraction")
    decade = 10.0 ** math.floor(math.log10(d_max))
    r = max(v for v in _R10 if v * decade <= d_max * (1 + 1e-9))
    d = r * decade
    return (d, d, f"classified fraction of about {d * 1e6:.3g} um (finer than the finest "
            f"sieve, {ASTM_E11_APERTURES[0] * 1e6:.0f} um)")


def practical_speed(n: float, *, up: bool = True) -> float:
    """``n`` (rev/s) rounded to the 50 rpm grid, up (default) or down, never below 50 rpm.

    >>> [round(60 * practical_speed(n, up=u), 9) for n, u in ((10.0, True), (11.0, True),
    ...                                                    (11.0, False))]
    [600.0, 700.0, 650.0]
    """
    k = n / SPEED_STEP
    steps = math.ceil(k - 1e-9) if up else math.floor(k + 1e-9)
    return max(1, steps) * SPEED_STEP


def speed_grid(lo: float, hi: float) -> tuple[float, ...]:
    """Speeds on the 50 rpm grid from ``lo`` up to ``hi`` (rev/s), both rounded inward."""
    a, b = practical_speed(lo, up=True), practical_speed(hi, up=False)
    n = int(round((b - a) / SPEED_STEP))
    return tuple(a + i * SPEED_STEP for i in range(n + 1))
