"""Transport criteria and regime labels: Thiele modulus, effectiveness factor, Weisz-Prater,
Mears and Carberry numbers with the thresholds in use and their sources, and the regime label
of the results contract.

Conventions (stated once, used everywhere):

- Thiele modulus: the generalised modulus in the L = Vp/Sp normalisation (Aris 1965;
  Bischoff 1965), so that eta -> 1/Phi at large modulus for every shape.
- Weisz-Prater number in the same normalisation: Psi_L = r_obs rho_p L^2 / (De Cs), which equals
  eta Phi^2 for first order (Weisz & Prater 1954). The classic threshold Psi_R < 0.3 is quoted
  for R = dp/2; in the L normalisation it becomes 0.3 (L/R)^2 (0.3/9 for a sphere).
- Carberry number Ca = r_obs / (kc a_m Cb) = 1 - Cs/Cb at a steady film; threshold 0.05/|n|
  for a 5 % rate error (Carberry 1976; Kapteijn & Moulijn, Handbook of Heterogeneous Catalysis).
- Mears number r_obs rho_p R n / (kc Cb) with the particle density and R = dp/2 (Mears 1971);
  threshold 0.15. With the particle density it equals 3 n Ca.
- Regime (kinfit's results contract): resistances in series per kg, film 1/(kc a_m), reaction
  1/k1, pore (1/eta - 1)/k1 with k1 = r(Cs)/Cs; the share above one half names the regime,
  otherwise "mixed".
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
from numpy.typing import NDArray

__all__ = ["Thresholds", "Criteria", "compute_criteria", "regime_label", "REGIMES",
           "THRESHOLD_SOURCES"]

Array = NDArray[np.float64]
REGIMES = ("kinetic", "film", "pore", "mixed")

THRESHOLD_SOURCES = {
    "carberry": "Ca < 0.05/|n| for a 5 % rate error (Carberry 1976; Kapteijn & Moulijn, "
                "Handbook of Heterogeneous Catalysis, 2008)",
    "weisz_prater": "Psi_R = r rho_p R^2/(De Cs) < 0.3 with R = dp/2 (Weisz & Prater 1954), "
                    "reported as Psi_L = Psi_R (L/R)^2",
    "mears": "r rho_p R n/(kc Cb) < 0.15 with the particle density (Mears 1971)",
    "effectiveness_factor": "eta >= 0.95 (common practice)",
}


@dataclass(frozen=True)
class Thresholds:
    """Limits below which a run counts as free of a transport resistance.

    Attributes
    ----------
    carberry : float
        Ca limit times |n| (default 0.05: Ca < 0.05/|n|).
    weisz_prater_radius : float
        Psi_R limit in the radius (R = dp/2) normalisation (default 0.3).
    mears : float
        Default 0.15.
    effectiveness : float
        Smallest eta accepted as kinetic (default 0.95).
    """

    carberry: float = 0.05
    weisz_prater_radius: float = 0.3
    mears: float = 0.15
    effectiveness: float = 0.95

    def weisz_prater(self, geometry: str) -> float:
        """Psi_L limit for a geometry: 0.3 (L/R)^2 with R = dp/2."""
        ratio = {"sphere": 1.0 / 3.0, "cylinder": 0.5, "slab": 1.0}[geometry]
        return self.weisz_prater_radius * ratio**2

    def to_dict(self, geometry: str, order: float) -> dict[str, float]:
        """Numeric limits in use for this geometry and order."""
        return {
            "carberry": self.carberry / max(abs(order), 1e-12),
            "weisz_prater": self.weisz_prater(geometry),
            "mears": self.mears,
            "effectiveness_factor": self.effectiveness,
        }


@dataclass(frozen=True)
class Criteria:
    """Criteria at a set of points (arrays of one shape)."""

    thiele_modulus: Array
    effectiveness_factor: Array
    weisz_prater: Array
    mears: Array
    carberry: Array
    film_share: Array
    pore_share: Array
    reaction_share: Array
    regime: NDArray[np.str_]
    order: Array
    thresholds: dict[str, float] = field(default_factory=dict)

    def passes(self) -> dict[str, NDArray[np.bool_]]:
        """Whether each criterion is met at each point."""
        t = self.thresholds
        return {
            "carberry": self.carberry < t["carberry"],
            "weisz_prater": self.weisz_prater < t["weisz_prater"],
            "mears": self.mears < t["mears"],
            "effectiveness_factor": self.effectiveness_factor >= t["effectiveness_factor"],
        }

    def intrinsic(self) -> NDArray[np.bool_]:
        """Points that qualify as intrinsic kinetic data (all criteria met)."""
        p = self.passes()
        return p["carberry"] & p["weisz_prater"] & p["mears"] & p["effectiveness_factor"]


def regime_label(film: Array, pore: Array, reaction: Array) -> NDArray[np.str_]:
    """The regime label of the results contract from the three resistance shares."""
    film, pore, reaction = np.broadcast_arrays(np.asarray(film), np.asarray(pore),
                                               np.asarray(reaction))
    out = np.full(film.shape, "mixed", dtype="<U7")
    out[film > 0.5] = "film"
    out[pore > 0.5] = "pore"
    out[reaction > 0.5] = "kinetic"
    return out


def compute_criteria(
    *,
    observed_rate: Array,
    bulk_concentration: Array,
    surface_concentration: Array,
    intrinsic_rate: Array,
    effectiveness: Array,
    thiele_modulus: Array,
    kc: Array,
    particle_diameter: Array,
    particle_density: float,
    effective_diffusivity: Array | None,
    geometry: str,
    order: Array | float,
    C_eq: Array | float = 0.0,
    thresholds: Thresholds | None = None,
) -> Criteria:
    """Criteria and regime at points whose transport state is known.

    Parameters
    ----------
    observed_rate : ndarray
        r_obs per catalyst mass, mol/(kg s).
    bulk_concentration, surface_concentration : ndarray
        mol/m^3.
    intrinsic_rate : ndarray
        r(Cs), mol/(kg s).
    effectiveness, thiele_modulus : ndarray
        eta and the generalised modulus at Cs.
    kc : ndarray
        Film coefficient, m/s (``inf`` without a film).
    particle_diameter : ndarray
        m.
    particle_density : float
        kg/m^3.
    effective_diffusivity : ndarray or None
        m^2/s; ``None`` without a pellet model (Weisz-Prater reported as 0).
    geometry : {"sphere", "cylinder", "slab"}
    order : ndarray or float
        Reaction order used by the Mears and Carberry limits (local order for other laws).
    """
    from kinfit.transport.film import characteristic_length, external_area

    thresholds = thresholds or Thresholds()
    r = np.asarray(observed_rate, dtype=float)
    Cb = np.asarray(bulk_concentration, dtype=float)
    Cs = np.asarray(surface_concentration, dtype=float)
    dp = np.asarray(particle_diameter, dtype=float)
    L = characteristic_length(geometry, dp)
    a_m = external_area(geometry, dp, particle_density)
    kc = np.asarray(kc, dtype=float)
    n = np.broadcast_to(np.asarray(order, dtype=float), r.shape)
    with np.errstate(divide="ignore", invalid="ignore"):
        conductance = kc * a_m
        carberry = np.where(np.isfinite(conductance), r / (conductance * Cb), 0.0)
        mears = np.where(np.isfinite(kc), r * particle_density * (dp / 2) * n / (kc * Cb), 0.0)
        if effective_diffusivity is None:
            wp = np.zeros_like(r)
        else:
            wp = r * particle_density * L**2 / (effective_diffusivity * np.maximum(Cs, 1e-300))
        k1 = np.asarray(intrinsic_rate) / np.maximum(Cs - C_eq, 1e-300)
        res_film = np.where(np.isfinite(conductance), 1.0 / conductance, 0.0)
        res_react = 1.0 / k1
        res_pore = (1.0 / np.asarray(effectiveness) - 1.0) / k1
    total = res_film + res_react + res_pore
    film, pore, react = res_film / total, res_pore / total, res_react / total
    order_scalar = float(np.median(n)) if n.size else 1.0
    return Criteria(
        thiele_modulus=np.asarray(thiele_modulus, dtype=float),
        effectiveness_factor=np.asarray(effectiveness, dtype=float),
        weisz_prater=wp, mears=mears, carberry=carberry,
        film_share=film, pore_share=pore, reaction_share=react,
        regime=regime_label(film, pore, react), order=n,
        thresholds=thresholds.to_dict(geometry, order_scalar),
    )
