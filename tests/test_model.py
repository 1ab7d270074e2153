"""The model reader: values, units, params, and one clear error per bad input (model-format.md)."""

from __future__ import annotations

import pytest

import heat2d
from heat2d import ModelError
from tests.common import board


def test_values_units_and_defaults():
    model = heat2d.parse(board())
    assert model.length_unit == "mm" and model.unit_m == 1e-3
    assert model.depth_m == pytest.approx(0.01)
    assert model.material("fr4").kx == 1.06 and model.material("fr4").ky == 0.34
    assert model.shape("board").rect == (0.0, 0.0, 20.0, 1.6)
    assert model.shape("pad").power == 0.5
    assert model.boundaries[1].kind == "convection" and model.boundaries[1].h == 10
    assert model.mesh.min_angle == 30 and model.mesh.size is None


def test_default_depth_is_one_metre_in_the_length_unit():
    # model-format.md: depth defaults to 1 m whatever the length unit.
    model = heat2d.parse(board({"depth = 10\n": ""}))
    assert model.depth == pytest.approx(1000.0) and model.depth_m == pytest.approx(1.0)


def test_params_expressions_and_overrides():
    text = board({"t = 1.6\n": "t = 1.6\nw = \"2*t + sqrt(16) - max(1, 2)\"\n"},
                 extra='[mesh]\nsize = "w / 10"\n')
    model = heat2d.parse(text)
    assert dict(model.params)["w"] == pytest.approx(2 * 1.6 + 4 - 2)
    assert model.mesh.size == pytest.approx(0.52)
    # An override changes the param and everything computed from it.
    model = heat2d.parse(text, params={"t": "1.0"})
    assert model.shape("board").rect[3] == 1.0
    assert model.mesh.size == pytest.approx((2 * 1.0 + 4 - 2) / 10)


BAD = [
    ("colour = 3\n" + board(), r'top level: unknown key \'colour\''),
    (board({'name = "pad"\n': 'name = "pad"\nfoo = 1\n'}), r'shape "pad": unknown key \'foo\''),
    (board({"k = 385": "k = 385\nkz = 1"}), r'material "copper": unknown key \'kz\''),
    (board({"k = 385": 'k = "abc"'}), r'material "copper": k: unknown name \'abc\''),
    (board({"k = 385": "k = true"}), r"k: expected a number"),
    (board({"k = 385": "k = nan"}), r"k: must be a finite number"),
    (board({"k = 385": 'k = "1/0"'}), r"k: cannot evaluate '1/0': division by zero"),
    (board({"k = 385": "k = -1"}), r"k: must be > 0 W/\(m·K\), got -1"),
    (board({"k = 385": "k = 385\nkx = 2"}), r"either k .* or kx and ky, not both"),
    (board({'material = "copper"': 'material = "gold"'}),
     r'shape "pad": material: unknown material \'gold\' \(known: copper, fr4\)'),
    (board({'on = "board.left"': 'on = "boards.left"'}), r'boundary "rail": on: \'boards.left\' names no shape'),
    (board({"\nh = 10\n": "\nh = 0\n"}), r'boundary "air": h: must be > 0'),
    (board({"temperature = 50": "temperature = -300"}), r"temperature: must be > -273.15"),
    (board({"power = \"power\"": "power = -1"}), r'shape "pad": power: must be >= 0 W'),
    (board({"width = 20": "width = 0"}), r'shape "board": rect.width: must be > 0'),
    (board({'name = "pad"': 'name = "board"'}), r'shape "board": name already used by another shape, stack or repeat \(line 22\)'),
    (board({'length_unit = "mm"': 'length_unit = "inch"'}), r"length_unit: must be one of m, mm, um"),
    (board(extra="[mesh]\nmin_angle = 40\n"), r"min_angle: must be <= 34 degrees"),
    (board({"\nh = 10\n": "\n"}), r'boundary "air": ambient needs h'),
    (board({"temperature = 50": "temperature = 50\nheat_flux = 3"}), r"give exactly one of temperature"),
    (board({'rect = { x = 8, y = "t", width = 4, height = 0.07 }': "circle = { x = 1, y = 1 }"}),
     r"circle: needs exactly r, x, y \(missing r\)"),
    (board({"[[probe]]": "[[probe]]\nat = [1, 1]\n"}) .replace('name = "centre"\nat = [10, 0.8]', ""),
     r'probe #1: name: expected a non-empty string'),
]


@pytest.mark.parametrize("text, match", BAD, ids=[f"bad{i}" for i in range(len(BAD))])
def test_bad_input_names_the_entry(text, match):
    with pytest.raises(ModelError, match=match):
        heat2d.parse(text, source="board.toml")


def test_error_carries_file_and_line():
    text = board({"k = 385": "k = -1"})
    with pytest.raises(ModelError) as info:
        heat2d.parse(text, source="board.toml")
    line = text.splitlines().index("k = -1") + 1
    assert info.value.line == line
    assert info.value.message() == (
        f'board.toml: material "copper": k: must be > 0 W/(m·K), got -1 (line {line})')


def test_toml_syntax_error_gives_the_line():
    with pytest.raises(ModelError, match=r"board.toml: syntax: not valid TOML: .* \(line 3\)"):
        heat2d.parse("[model]\nlength_unit = 'mm'\nx = = 2\n", source="board.toml")


def test_unknown_override_is_an_error():
    with pytest.raises(ModelError, match=r'param "thickness": no such parameter .*\(known: t, power\)'):
        heat2d.parse(board(), params={"thickness": 2})


def test_side_selector_needs_a_rect():
    text = board({'rect = { x = 8, y = "t", width = 4, height = 0.07 }':
                  "circle = { x = 10, y = 1.6, r = 0.5 }",
                  'on = "board.left"': 'on = "pad.left"'})
    with pytest.raises(ModelError, match=r"side selectors need a rect shape, 'pad' is a circle"):
        heat2d.parse(text)


def test_void_takes_no_material_or_power():
    text = board({'material = "copper"': "void = true"})
    with pytest.raises(ModelError, match=r'shape "pad": power: a void shape takes no power'):
        heat2d.parse(text)


def test_load_reports_missing_file(tmp_path):
    with pytest.raises(ModelError, match=r"cannot read model file"):
        heat2d.load(tmp_path / "missing.toml")
