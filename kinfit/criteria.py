"""Transport criteria: Thiele modulus, effectiveness factor, Weisz-Prater, Mears and Carberry
numbers with the thresholds in use and their sources; the resistance shares and regime label of
the results contract come from :mod:`kinfit.resistances`.

Conventions (stated once, used everywhere). Every limit stands for the same 5 % rate error, in
every geometry:

- Thiele modulus: the generalised modulus in the L = Vp/Sp normalisation (Aris 1965;
  Bischoff 1965), so that eta -> 1/Phi at large modulus for every shape.
- Weisz-Prater number in the same normalisation: Psi_L = r_obs rho_p L^2 / (De Cs), which equals
  eta Phi^2 for first order (Weisz & Prater 1954). The limit is the Psi_L at which the
  first-order effectiveness factor of the run's geometry is 0.95 (derived from the closed forms
  of Thiele 1939 and Aris 1975): 0.0852 for a sphere, 0.1018 for a cylinder and 0.1516 for a
  slab (in the radius form Psi_R = Psi_L (R/L)^2 with R = dp/2: 0.767, 0.407 and 0.1516).
  The radius-form limit 0.3 in common use (common practice) allows eta of about 0.98, 0.96 and
  0.90 in these shapes.
- Carberry number Ca = r_obs / (kc a_m Cb) = 1 - Cs/Cb at a steady film; limit 0.05/|n| for a
  5 % rate error (Carberry 1976; Kapteijn & Moulijn, Handbook of Heterogeneous Catalysis), with
  n the run's local apparent order d ln r / d ln C at Cs.
- Mears number r_obs rho_p R n / (kc Cb) with R = dp/2 and the particle density. Mears (1971)
  wrote it with the bed density for a fixed bed; with the particle density it equals
  n Ca (R/L) (derived: a_m = 1/(rho_p L)), that is 3 n Ca for a sphere, 2 n Ca for a cylinder
  and n Ca for a slab, so the limit 0.15 that Mears gave for spheres becomes 0.05 (R/L): 0.15,
  0.10 and 0.05, the same 5 % error as the Carberry limit.
- Regime (kinfit's results contract): resistances in series per kg, film 1/(kc a_m), reaction
  1/k1, pore (1/eta - 1)/k1 with k1 = r(Cs)/Cs; "kinetic" at a reaction share >= 0.95,
  else the share above one half names the regime, otherwise "mixed".
"""

from __future__ import annotations

import functools
from dataclasses import dataclass, field

import numpy as np
from numpy.typing import NDArray
from scipy import optimize

from kinfit.resistances import REGIMES, Shares, regime_label, resistance_shares

__all__ = ["Thresholds", "Criteria", "compute_criteria", "regime_label", "REGIMES",
           "THRESHOLD_SOURCES", "weisz_prater_limit"]

Array = NDArray[np.float64]

#: R / L with R = dp/2 and L = Vp/Sp (derived from the volumes and areas).
_R_OVER_L = {"sphere": 3.0, "cylinder": 2.0, "slab": 1.0}

THRESHOLD_SOURCES = {
    "carberry": "Ca = r/(kc a_m Cb) < 0.05/|n| for a 5 % rate error, n the run's local "
                "apparent order d ln r/d ln C at Cs (Carberry 1976; Kapteijn & Moulijn, "
                "Handbook of Heterogeneous Catalysis, 2008)",
    "weisz_prater": "Psi_L = r rho_p L^2/(De Cs) below the value at which the first-order "
                    "effectiveness factor of the geometry is 0.95, L = Vp/Sp (derived from the "
                    "closed forms, Thiele 1939; Aris 1975): 0.0852 sphere, 0.1018 cylinder, "
                    "0.1516 slab; the radius-form 0.3 in common use (common practice) allows "
                    "eta 0.98, 0.96, 0.90",
    "mears": "r rho_p R n/(kc Cb) with R = dp/2 and the particle density (Mears 1971 wrote it "
             "with the bed density) below 0.05 R/L: 0.15 sphere, 0.10 cylinder, 0.05 slab, a "
             "5 % rate error (derived: it equals n Ca R/L)",
    "effectiveness_factor": "eta >= 0.95, a 5 % rate error (common practice)",
    "regime": "resistances in series at the run's initial conditions, film 1/(kc a_m), "
              "reaction 1/k1, pore (1/eta - 1)/k1 with k1 = r(Cs)/Cs; 'kinetic' when the "
              "reaction share is >= 0.95 (within 5 % of the intrinsic rate at bulk "
              "conditions), 'film'/'pore' when that share is > 1/2, else 'mixed' (kinfit "
              "results contract)",
}


@functools.cache
def weisz_prater_limit(geometry: str, effectiveness: float = 0.95) -> float:
    """Psi_L at which the first-order effectiveness factor of ``geometry`` equals
    ``effectiveness`` (L = Vp/Sp; Psi_L = eta phi_L^2 for first order).

    Parameters
    ----------
    geometry : {"sphere", "cylinder", "slab"}
    effectiveness : float
        Target eta in (0, 1).

    Examples
    --------
    >>> round(weisz_prater_limit("slab"), 4)
    0.152
    """
    from kinfit.transport.pellet import eta_first_order

    def gap(log_phi: float) -> float:
        return float(eta_first_order(np.exp(log_phi), geometry)) - effectiveness

    phi = float(np.exp(optimize.brentq(gap, np.log(1e-6), np.log(1e3), xtol=1e-14)))
    return effectiveness * phi**2


@dataclass(frozen=True)
class Thresholds:
    """Limits below which a run counts as free of a transport resistance.

    Attributes
    ----------
    carberry : float
        The rate error allowed by the film, Ca |n| (default 0.05: Ca < 0.05/|n|).
    weisz_prater_eta : float
        The first-order effectiveness factor the Weisz-Prater limit stands for (default 0.95).
    weisz_prater_radius : float or None
        An explicit Psi_R limit (R = dp/2) for every geometry instead (None: from
        ``weisz_prater_eta``).
    mears : float
        Mears limit for a sphere with R = dp/2 (default 0.15); other shapes scale by
        (R/L)/3 so that the limit stands for the same rate error.
    effectiveness : float
        Smallest eta accepted as kinetic (default 0.95).
    """

    carberry: float = 0.05
    weisz_prater_eta: float = 0.95
    weisz_prater_radius: float | None = None
    mears: float = 0.15
    effectiveness: float = 0.95

    def weisz_prater(self, geometry: str) -> float:
        """Psi_L limit for a geometry (L = Vp/Sp)."""
        if self.weisz_prater_radius is not None:
            return self.weisz_prater_radius / _R_OVER_L[geometry] ** 2
        return weisz_prater_limit(geometry, self.weisz_prater_eta)

    def weisz_prater_radius_limit(self, geometry: str) -> float:
        """The same limit in the radius form Psi_R = Psi_L (R/L)^2, R = dp/2."""
        return self.weisz_prater(geometry) * _R_OVER_L[geometry] ** 2

    def mears_limit(self, geometry: str) -> float:
        """Mears limit for a geometry (R = dp/2, particle density)."""
        return self.mears * _R_OVER_L[geometry] / 3.0

    def carberry_limit(self, order: float | Array) -> Array:
        """Ca limit for a local order (inf at order 0, where the film drop does not bind)."""
        n = np.abs(np.asarray(order, dtype=float))
        with np.errstate(divide="ignore"):
            return np.where(n > 1e-12, self.carberry / n, np.inf)

    def to_dict(self, geometry: str, order: float) -> dict[str, float]:
        """Numeric limits in use for this geometry and order."""
        return {
            "carberry": float(self.carberry_limit(order)),
            "weisz_prater": self.weisz_prater(geometry),
            "weisz_prater_radius": self.weisz_prater_radius_limit(geometry),
            "mears": self.mears_limit(geometry),
            "effectiveness_factor": self.effectiveness,
        }


@dataclass(frozen=True)
class Criteria:
    """Criteria at a set of points (arrays of one shape).

    ``carberry_limit`` holds each point's own limit (from its local order); ``thresholds``
    the other limits, with ``carberry`` at the median order for summaries.
    """

    thiele_modulus: Array
    effectiveness_factor: Array
    weisz_prater: Array
    mears: Array
    carberry: Array
    film_share: Array
    pore_share: Array
    reaction_share: Array
    regime: NDArray[np.object_]
    order: Array
    thresholds: dict[str, float] = field(default_factory=dict)
    carberry_limit: Array | None = None
    shares: Shares | None = None

    @property
    def controlling(self) -> NDArray[np.object_]:
        """Name of the largest resistance share at each point."""
        assert self.shares is not None
        return self.shares.controlling

    def limits_at(self, i: int) -> dict[str, float]:
        """The limits in use at point ``i`` (its own Carberry limit)."""
        out = dict(self.thresholds)
        if self.carberry_limit is not None:
            out["carberry"] = float(np.asarray(self.carberry_limit)[i])
        return out

    def passes(self) -> dict[str, NDArray[np.bool_]]:
        """Whether each criterion is met at each point."""
        t = self.thresholds
        ca_lim = t["carberry"] if self.carberry_limit is None else self.carberry_limit
        return {
            "carberry": self.carberry < ca_lim,
            "weisz_prater": self.weisz_prater < t["weisz_prater"],
            "mears": (self.mears < t["mears"]) | (np.abs(self.order) <= 1e-12),
            "effectiveness_factor": self.effectiveness_factor >= t["effectiveness_factor"],
        }

    def intrinsic(self) -> NDArray[np.bool_]:
        """Points that qualify as intrinsic kinetic data (all criteria met)."""
        p = self.passes()
        return p["carberry"] & p["weisz_prater"] & p["mears"] & p["effectiveness_factor"]


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
    shares = resistance_shares(intrinsic_rate=intrinsic_rate, surface_concentration=Cs,
                               effectiveness=effectiveness, conductance=conductance, C_eq=C_eq)
    order_scalar = float(np.median(n)) if n.size else 1.0
    return Criteria(
        thiele_modulus=np.asarray(thiele_modulus, dtype=float),
        effectiveness_factor=np.asarray(effectiveness, dtype=float),
        weisz_prater=wp, mears=mears, carberry=carberry,
        film_share=shares.film, pore_share=shares.pore, reaction_share=shares.reaction,
        regime=shares.regime, order=n,
        thresholds=thresholds.to_dict(geometry, order_scalar),
        carberry_limit=np.broadcast_to(thresholds.carberry_limit(n), r.shape), shares=shares,
    )
