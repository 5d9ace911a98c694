"""Audit of a supplier's kinetic claim against transport criteria and data."""

__all__: list[str] = []
