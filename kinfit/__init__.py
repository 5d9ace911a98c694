"""kinfit: intrinsic kinetics from porous-catalyst campaigns with transport-aware fitting."""

from __future__ import annotations

__version__ = "0.1.0"

__all__ = ["__version__"]
