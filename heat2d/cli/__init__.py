"""The ``heat2d`` command: the only place that parses arguments, prints and picks exit
codes. ``main(argv)`` runs it in-process and returns the exit status."""

from .common import (
    EXIT_BAD_INPUT,
    EXIT_FAILURE,
    EXIT_INTERRUPTED,
    EXIT_LIMIT,
    EXIT_OK,
    EXIT_TERMINATED,
)
from .main import COMMANDS, build_parser, console, main

__all__ = ["COMMANDS", "EXIT_BAD_INPUT", "EXIT_FAILURE", "EXIT_INTERRUPTED", "EXIT_LIMIT",
           "EXIT_OK", "EXIT_TERMINATED", "build_parser", "console", "main"]
