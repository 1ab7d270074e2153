"""The version of heat2d, on its own so that every stage can record it without a cycle."""

__version__ = "0.1.0"
