"""``python -m eigengate``: the same command line as the ``eigengate`` console script."""

from .cli import run

run()
