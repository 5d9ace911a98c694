"""Floor 1: units at the boundary, atomic files and manifests, executors; no physics."""

__all__: list[str] = []
