"""Resistance shares and the regime label: the one implementation of the results contract.

The observed rate is linearised at the external surface, k1 = r(Cs) / (Cs - C_eq). The
resistances in series per kg of catalyst are then (Satterfield 1970, ch. 3; derived from
r_obs = kc a_m (Cb - Cs) = eta r(Cs)):

- film 1 / (kc a_m),
- reaction 1 / k1,
- pore (1/eta - 1) / k1,

and each share is its fraction of the sum. For a first-order law the reaction share equals
r_obs / r(Cb), the observed rate over the intrinsic rate at bulk conditions (derived: the sum is
(Cb - C_eq) / r_obs). The label:

- ``"kinetic"`` only when the reaction share is at least :data:`KINETIC_SHARE` (0.95): the
  observed rate is within 5 % of the intrinsic rate at bulk conditions, the same 5 % that the
  Carberry, Mears and Weisz-Prater limits of :mod:`kinfit.criteria` stand for;
- ``"film"`` or ``"pore"`` when that share is above one half;
- ``"mixed"`` otherwise.

``controlling`` names the largest share (``"film"``, ``"pore"`` or ``"reaction"``). A resistance
that was not assessed (no film coefficient, no effective diffusivity) makes every share unknown
(``nan`` here, ``None`` in JSON) and the label ``None``: a missing resistance is never counted
as zero.

Every part of kinfit that reports shares or labels (criteria, the quick calculator, the
diagnosis, posterior regime probabilities, reports and the audit) goes through
:func:`resistance_shares`.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

import numpy as np
from numpy.typing import ArrayLike, NDArray

__all__ = ["KINETIC_SHARE", "CONTROLLING_SHARE", "REGIMES", "RESISTANCES", "Shares",
           "resistance_shares", "regime_label", "controlling_resistance"]

Array = NDArray[np.float64]

#: Smallest reaction share labelled "kinetic": r_obs within 5 % of r(Cb).
KINETIC_SHARE = 0.95
#: A resistance whose share exceeds this names the regime.
CONTROLLING_SHARE = 0.5
#: Regime labels of the results contract (a single-phase slurry has no gas-liquid step).
REGIMES = ("kinetic", "film", "pore", "mixed")
#: Names of the resistances, in the order of :class:`Shares`.
RESISTANCES = ("film", "pore", "reaction")


def regime_label(film: ArrayLike, pore: ArrayLike, reaction: ArrayLike) -> NDArray[np.object_]:
    """The regime label from the three shares (``None`` where a share is unknown).

    Parameters
    ----------
    film, pore, reaction : array_like
        Shares of the total resistance, broadcastable; ``nan`` for not assessed.

    Returns
    -------
    ndarray of object
        ``"kinetic"``, ``"film"``, ``"pore"``, ``"mixed"`` or ``None``.

    Examples
    --------
    >>> regime_label([0.03, 0.6, 0.1], [0.02, 0.1, 0.2], [0.95, 0.3, 0.7]).tolist()
    ['kinetic', 'film', 'mixed']
    """
    film, pore, reaction = np.broadcast_arrays(*(np.asarray(a, dtype=float)
                                                 for a in (film, pore, reaction)))
    out = np.full(film.shape, "mixed", dtype=object)
    out[film > CONTROLLING_SHARE] = "film"
    out[pore > CONTROLLING_SHARE] = "pore"
    out[reaction >= KINETIC_SHARE] = "kinetic"
    out[np.isnan(film) | np.isnan(pore) | np.isnan(reaction)] = None
    return out


def controlling_resistance(film: ArrayLike, pore: ArrayLike,
                           reaction: ArrayLike) -> NDArray[np.object_]:
    """The name of the largest share (ties go to film, then pore); ``None`` where unknown."""
    stack = np.stack(np.broadcast_arrays(*(np.asarray(a, dtype=float)
                                           for a in (film, pore, reaction))))
    unknown = np.isnan(stack).any(axis=0)
    idx = np.argmax(np.where(np.isnan(stack), -np.inf, stack), axis=0)
    out = np.asarray(RESISTANCES, dtype=object)[idx]
    out = np.asarray(out, dtype=object)
    out[unknown] = None
    return out


@dataclass(frozen=True)
class Shares:
    """Resistance shares at a set of points (arrays of one shape).

    Attributes
    ----------
    film, pore, reaction : ndarray
        Fractions of the total resistance (sum 1), ``nan`` where not assessed.
    resistances : dict of str to ndarray
        The resistances themselves per kg of catalyst, kg s/m^3 (``nan`` where not assessed).
    regime : ndarray of object
        :func:`regime_label` of the shares.
    controlling : ndarray of object
        :func:`controlling_resistance` of the shares.
    """

    film: Array
    pore: Array
    reaction: Array
    resistances: dict[str, Array]
    regime: NDArray[np.object_]
    controlling: NDArray[np.object_]

    def at(self, i: Any = ()) -> dict[str, Any]:
        """Plain-type shares, label and controlling resistance at one point (JSON ready)."""
        def num(a: Array) -> float | None:
            v = float(np.asarray(a)[i])
            return None if np.isnan(v) else v

        return {"shares": {"film": num(self.film), "pore": num(self.pore),
                           "reaction": num(self.reaction)},
                "regime": np.asarray(self.regime, dtype=object)[i],
                "controlling": np.asarray(self.controlling, dtype=object)[i]}


def resistance_shares(*, intrinsic_rate: ArrayLike, surface_concentration: ArrayLike,
                      effectiveness: ArrayLike | None, conductance: ArrayLike | None,
                      C_eq: ArrayLike = 0.0) -> Shares:
    """Film, pore and reaction shares of the overall resistance (results contract).

    Parameters
    ----------
    intrinsic_rate : array_like
        r(Cs), mol/(kg s).
    surface_concentration : array_like
        Cs, mol/m^3.
    effectiveness : array_like or None
        eta at Cs; ``None`` (or ``nan``) when the pore resistance was not assessed. A model
        without pore resistance passes 1.
    conductance : array_like or None
        kc a_m, m^3/(kg s); ``inf`` for a model without film resistance, ``None`` (or ``nan``)
        when the film was not assessed.
    C_eq : array_like
        Equilibrium concentration, mol/m^3 (0 for an irreversible reaction).

    Returns
    -------
    Shares

    Examples
    --------
    >>> s = resistance_shares(intrinsic_rate=1.0, surface_concentration=1.0,
    ...                       effectiveness=0.5, conductance=1.0)
    >>> [round(float(x), 3) for x in (s.film, s.pore, s.reaction)], s.at()["regime"]
    ([0.333, 0.333, 0.333], 'mixed')
    """
    r = np.asarray(intrinsic_rate, dtype=float)
    Cs = np.asarray(surface_concentration, dtype=float)
    eta = np.asarray(np.nan if effectiveness is None else effectiveness, dtype=float)
    kfa = np.asarray(np.nan if conductance is None else conductance, dtype=float)
    with np.errstate(divide="ignore", invalid="ignore"):
        k1 = r / np.maximum(Cs - np.asarray(C_eq, dtype=float), 1e-300)
        res_film = np.where(np.isinf(kfa), 0.0, 1.0 / kfa)
        res_react = 1.0 / k1
        res_pore = (1.0 / eta - 1.0) / k1
        res_film, res_pore, res_react = np.broadcast_arrays(res_film, res_pore, res_react)
        total = res_film + res_pore + res_react
        film, pore, react = res_film / total, res_pore / total, res_react / total
    return Shares(film=film, pore=pore, reaction=react,
                  resistances={"film": res_film, "pore": res_pore, "reaction": res_react},
                  regime=regime_label(film, pore, react),
                  controlling=controlling_resistance(film, pore, react))
