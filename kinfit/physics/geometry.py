"""The pellet's shape: the names kinfit understands, the shape index of the pellet equation,
the characteristic length L = V_p/S_p and the external area per kg a_m = 1/(rho_p L).

One list of shapes serves the study loader, the film models, the pellet solutions, the
criteria and the report. Shapes: sphere of diameter dp, infinite cylinder of diameter dp, slab
of thickness dp with sealed edges (volumes and areas from elementary geometry).
"""

from __future__ import annotations

import numpy as np
from numpy.typing import ArrayLike, NDArray

from kinfit.errors import StudyError

__all__ = ["GEOMETRIES", "shape_index", "characteristic_length", "external_area"]

FloatArray = NDArray[np.float64]

#: Pellet shapes understood everywhere in kinfit, in the order of their shape index.
GEOMETRIES = ("slab", "cylinder", "sphere")

#: V_p / S_p divided by dp for each shape (derived from the volumes and areas).
_LENGTH_FRACTION = {"slab": 1.0 / 2.0, "cylinder": 1.0 / 4.0, "sphere": 1.0 / 6.0}


def shape_index(geometry: str) -> int:
    """Exponent ``a`` of the pellet equation ``C'' + (a/r) C' = r_v/De``: 0 slab, 1 cylinder,
    2 sphere.

    Raises
    ------
    StudyError
        For a name other than ``'slab'``, ``'cylinder'`` or ``'sphere'`` (the message lists
        them).

    Examples
    --------
    >>> shape_index("sphere")
    2
    """
    if not isinstance(geometry, str) or geometry not in GEOMETRIES:
        raise StudyError(f"geometry {geometry!r} is not a recognised pellet shape; expected one "
                         f"of {list(GEOMETRIES)}")
    return GEOMETRIES.index(geometry)


def characteristic_length(geometry: str, dp: ArrayLike) -> FloatArray:
    """Characteristic length L = V_p / S_p [m].

    Parameters
    ----------
    geometry : {'slab', 'cylinder', 'sphere'}
        Sphere of diameter dp (L = dp/6), infinite cylinder of diameter dp (L = dp/4), slab of
        thickness dp with sealed edges (L = dp/2).
    dp : array_like
        Particle diameter or slab thickness [m], any shape.

    Returns
    -------
    ndarray
        L [m], shape of ``dp``.

    Raises
    ------
    StudyError
        Unknown geometry (the message lists the valid ones).

    Examples
    --------
    >>> round(float(characteristic_length("sphere", 60e-6)), 12)
    1e-05
    """
    return _LENGTH_FRACTION[GEOMETRIES[shape_index(geometry)]] * np.asarray(dp, dtype=float)


def external_area(geometry: str, dp: ArrayLike, rho_p: ArrayLike) -> FloatArray:
    """External surface area per kg of catalyst, a_m = S_p / (rho_p V_p) = 1 / (rho_p L) [m^2/kg].

    Parameters
    ----------
    geometry : {'slab', 'cylinder', 'sphere'}
    dp : array_like
        Particle diameter or slab thickness [m].
    rho_p : array_like
        Particle (pellet) density [kg/m^3].

    Returns
    -------
    ndarray
        a_m [m^2/kg], broadcast shape of ``dp`` and ``rho_p``.

    Examples
    --------
    >>> round(float(external_area("sphere", 50e-6, 1500.0)), 6)
    80.0
    """
    return 1.0 / (np.asarray(rho_p, dtype=float) * characteristic_length(geometry, dp))
