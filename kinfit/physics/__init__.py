"""Transport physics: film mass transfer, pellet diffusion and their coupling."""

__all__: list[str] = []
