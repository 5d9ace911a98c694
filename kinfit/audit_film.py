"""The audit's film signature: does a claimed activation energy look like the film's own?

A film-controlled rate is kc a_m Cb, so its apparent activation energy is that of the film
coefficient. In a liquid that is not zero: kc follows the molecular diffusivity and the
viscosity (D ~ T/mu; Sano, Yamaguchi & Adachi 1974 form kc ~ D^(2/3) nu^(-5/12)), about
17 kJ/mol in water at 40-70 degC. When the claim file names its liquid, the claimed (apparent)
activation energy is compared with the film's own from
:func:`kinfit.transport.temperature.film_activation_energy` over the test temperatures, with
the interval that the film laws span, widened by :data:`FILM_EA_ALLOWANCE` for the claim's
own scatter. Without a liquid the common-practice cut "near zero" (below
:data:`FILM_EA_LIMIT`) is used, and said so. When a transport-aware refit exists, the runs it
labels "film" are the second half of the evidence: a film signature needs at least one.
"""

from __future__ import annotations

from collections.abc import Mapping
from typing import Any

import numpy as np
from numpy.typing import ArrayLike

__all__ = ["FILM_EA_LIMIT", "FILM_EA_ALLOWANCE", "film_signature"]

#: apparent activation energy below which film control is suspected when no liquid is known,
#: J/mol (common practice)
FILM_EA_LIMIT = 15e3
#: allowance around the film's own activation energy for the scatter of a claimed value, J/mol
#: (kinfit's choice: about the standard error of Ea from a three-temperature campaign)
FILM_EA_ALLOWANCE = 3e3


def film_signature(E_app: ArrayLike, *, fluid: Mapping[str, Any] | None,
                   temperatures: ArrayLike, transport_fit: Mapping[str, Any] | None,
                   head: str, first_order: bool) -> dict[str, Any]:
    """The film signature of a claim.

    Parameters
    ----------
    E_app : array_like
        The claimed law's apparent activation energy at the test conditions, J/mol (one value
        for a power law, one per run for other laws).
    fluid : mapping or None
        The claim's ``[fluid]`` section (SI), or None when no liquid is named.
    temperatures : array_like
        Test temperatures, K.
    transport_fit : mapping or None
        The transport-aware refit (``regimes`` per run), if any.
    head : str
        Opening of the sentence (what E_app is).
    first_order : bool
        Whether the apparent order is first.

    Returns
    -------
    dict
        ``found``, ``text``, ``film_activation_energy`` (estimate, interval, by law; None
        without a liquid), ``film_runs`` (run ids labelled film by the refit, or None).
    """
    E = np.atleast_1d(np.asarray(E_app, dtype=float))
    film_e: dict[str, Any] | None = None
    T = np.unique(np.asarray(temperatures, dtype=float))
    if fluid and T.size >= 2:
        from kinfit.transport.properties import make_fluid
        from kinfit.transport.temperature import film_activation_energy

        film_e = film_activation_energy(make_fluid(**dict(fluid)), T)
        lo, hi = film_e["interval"]
        lo, hi = lo - FILM_EA_ALLOWANCE, hi + FILM_EA_ALLOWANCE
        match = bool(np.all((E >= lo) & (E <= hi)))
        against = (f"the film's own apparent activation energy in this liquid, "
                   f"{film_e['estimate'] / 1e3:.3g} kJ/mol (film laws "
                   f"{film_e['interval'][0] / 1e3:.3g} to {film_e['interval'][1] / 1e3:.3g} "
                   f"kJ/mol, D ~ T/mu; accepted {lo / 1e3:.3g} to {hi / 1e3:.3g} kJ/mol)")
    else:
        match = bool(np.all(np.abs(E) < FILM_EA_LIMIT))
        against = (f"the common-practice cut for film control, |E_app| below "
                   f"{FILM_EA_LIMIT / 1e3:g} kJ/mol (no liquid named, so the film's own value "
                   "is not computed)")
    film_runs = None
    if transport_fit is not None:
        film_runs = sorted(rid for rid, g in (transport_fit.get("regimes") or {}).items()
                           if g == "film")
    found = match and (film_runs is None or bool(film_runs))
    if match and film_runs is not None and not film_runs:
        tail = ("; but the transport-aware refit labels no run 'film', so no film "
                "signature")
    elif found:
        tail = ((" with a first apparent order" if first_order else "")
                + (f"; the transport-aware refit labels {len(film_runs)} run(s) 'film' "
                   f"({', '.join(film_runs)})" if film_runs else "")
                + ": the signature of film control")
    else:
        tail = ": no film signature"
    text = f"{head} {'matches' if match else 'does not match'} {against}{tail}"
    return {"found": bool(found), "text": text, "film_activation_energy": film_e,
            "film_runs": film_runs}
