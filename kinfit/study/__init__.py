"""Floor 4: study and claim files, the parameter table, conditions, campaign summary."""

__all__: list[str] = []
