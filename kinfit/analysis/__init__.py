"""Floor 7: analyses that read a model and results: diagnosis, audit, predict, plan."""

__all__: list[str] = []
