"""Floor 5: the model specification, the compiled vectorised model, simulation."""

__all__: list[str] = []
