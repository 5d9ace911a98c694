"""Rate laws behind a name registry, and the safe expression compiler."""

__all__: list[str] = []
