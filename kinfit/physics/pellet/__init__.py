"""Effectiveness factors: closed forms, shipped tables and the numerical pellet."""

__all__: list[str] = []
