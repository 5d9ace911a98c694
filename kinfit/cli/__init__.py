"""Floor 9: the command line; parses arguments, calls the API and prints."""

from kinfit.cli.parser import build_parser, main

__all__ = ["main", "build_parser"]
