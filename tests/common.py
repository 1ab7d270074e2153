"""Small model texts shared by the tests, and the verification models of heat2d verify."""

from __future__ import annotations

import heat2d
from heat2d.verify import load_model

BOARD = """
[model]
length_unit = "mm"
depth = 10

[params]
t = 1.6
power = 0.5

[materials.fr4]
kx = 1.06
ky = 0.34

[materials.copper]
k = 385

[[shape]]
name = "board"
material = "fr4"
rect = { x = 0, y = 0, width = 20, height = "t" }

[[shape]]
name = "pad"
material = "copper"
rect = { x = 8, y = "t", width = 4, height = 0.07 }
power = "power"

[[boundary]]
name = "rail"
on = "board.left"
temperature = 50

[[boundary]]
name = "air"
on = "exterior"
h = 10
ambient = 40

[[probe]]
name = "centre"
at = [10, 0.8]
"""


def replaced(text: str, replace: dict[str, str] | None = None, extra: str = "") -> str:
    """A model text with literal replacements (each must occur) and extra TOML appended."""
    for old, new in (replace or {}).items():
        assert old in text, old
        text = text.replace(old, new)
    return text + extra


def board(replace: dict[str, str] | None = None, extra: str = "") -> str:
    """BOARD with literal text replacements and extra TOML appended."""
    return replaced(BOARD, replace, extra)


def line_of(source: str, needle: str) -> int:
    """The 1-based number of the first line of ``source`` holding ``needle``."""
    return next(i + 1 for i, ln in enumerate(source.splitlines()) if needle in ln)


def verify_model(name: str, **params: float | str) -> heat2d.Model:
    """The model file of a verification case, heat2d/verify/models/NAME.toml (the file
    ``heat2d verify`` runs; its header names the source), loaded with ``heat2d.load`` and
    ``params`` overriding its [params]."""
    return load_model(name, params)


def verify_params(name: str, **params: float | str) -> dict[str, float]:
    """The [params] of a verification model as numbers (overrides applied)."""
    return dict(verify_model(name, **params).params)


HELD_BLOCK = """
[materials.m]
k = 10
[[shape]]
name = "s"
material = "m"
rect = { x = 0, y = 0, width = 10, height = 5 }
[[boundary]]
name = "held"
on = "s.left"
temperature = 20
"""
"""A block held at 20 °C on its left side, insulated elsewhere, unpowered: 20 °C
everywhere, every heat flow zero up to round-off."""
