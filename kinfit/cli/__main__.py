"""``python -m kinfit.cli``: the command line."""

import sys

from kinfit.cli.parser import main

__all__: list[str] = []

if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
