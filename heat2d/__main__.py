"""``python -m heat2d``: the command line."""

from .cli import console

console()
