"""Small model texts shared by the tests."""

from __future__ import annotations

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


def board(replace: dict[str, str] | None = None, extra: str = "") -> str:
    """BOARD with literal text replacements and extra TOML appended."""
    text = BOARD
    for old, new in (replace or {}).items():
        assert old in text, old
        text = text.replace(old, new)
    return text + extra
