"""Floor 6: fit a study, typed results, posterior sampling, identifiability in words."""

__all__: list[str] = []
