"""The ``tdakit`` command line: argument parsing only; the work is done by the core."""

from tdakit.cli.main import main

__all__ = ["main"]
