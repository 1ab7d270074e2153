"""Guards: inputs that once crashed, hung or exhausted memory now end in exit 2 with one
line naming the entry (issue 13): oversized numbers and expressions, deep TOML nesting,
keys of the wrong type, values far outside their physical range, meshes and circles past
the node limit, huge repeats and sweeps."""

from __future__ import annotations

import math
import re

import pytest

import heat2d
from heat2d import cli
from heat2d.errors import ModelError
from heat2d.fem.budget import estimate_nodes
from heat2d.fem.geometry import build_geometry
from heat2d.fem.mesh import build_mesh
from heat2d.model.expr import ExpressionError, evaluate
from tests.common import board


def _exit_and_error(tmp_path, capsys, text: str, *args: str, command: str = "check"
                    ) -> tuple[int, str]:
    path = tmp_path / "board.toml"
    path.write_text(text, encoding="utf-8")
    code = cli.main([command, str(path), *args])
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1, err
    return code, err[0]


# -- numbers that overflow or recurse ------------------------------------------------------

BIG = "1" + "0" * 400

EXPRESSIONS = [
    (BIG, r"number of 401 digits is out of range"),
    ("9**9**9**9", r"power 9 \*\* 3.8742e\+08 is out of range"),
    ("2**2**2**2**2**2", r"power 2 \*\* 65536 is out of range"),
    ("1.5**2**2**2**2**2", r"is out of range"),
    ("+".join(["1"] * 30000), r"expression of 59999 characters is longer than the 2000"),
    ("max(" + ",".join(["1"] * 600) + ")", r"more than 500 terms and operators"),
    ("-" * 60 + "1", r"nested more than 50 deep"),
    ("1e308 * 10", r"out of range"),
    ("(-8) ** (1/3)", r"is not a real number"),
]


@pytest.mark.parametrize("text, match", EXPRESSIONS, ids=[m[1][:20] for m in EXPRESSIONS])
def test_oversized_expressions_are_refused(text, match):
    with pytest.raises(ExpressionError, match=match):
        evaluate(text, {})


def test_small_expressions_keep_their_values():
    assert evaluate("2**10 + 1/4", {}) == 1024.25
    assert evaluate("(-2)**3", {}) == -8.0
    assert evaluate("10**-400", {}) == 0.0
    assert evaluate("1.0001**100000", {}) == pytest.approx(22015.456, rel=1e-6)


@pytest.mark.parametrize("value, match", [
    (BIG, r'material "copper": k: must be a number of magnitude at most 1e\+300, got an '
          r"integer of 401 digits \(line 15\)"),
    (f'"{BIG}"', r'material "copper": k: number of 401 digits is out of range'),
    ('"9**9**9**9"', r'material "copper": k: power 9 \*\* 3.8742e\+08 is out of range'),
    (f'"{"+".join(["1"] * 30000)}"', r'material "copper": k: expression of 59999 characters'),
    ("1" * 5000, r"syntax: number too long: at most 1e\+300 in magnitude \(line 15\)"),
])
def test_oversized_numbers_in_the_model_exit_2(tmp_path, capsys, value, match):
    code, err = _exit_and_error(tmp_path, capsys, board({"k = 385": f"k = {value}"}))
    assert code == 2
    assert re.search(match, err), err


def test_deeply_nested_toml_is_refused(tmp_path, capsys):
    deep = "[" * 200 + "]" * 200
    code, err = _exit_and_error(tmp_path, capsys, board(
        {"rect = { x = 8": f"polygon = {deep}\nrect = {{ x = 8"}))
    assert code == 2
    assert 'shape "pad": arrays or tables nested more than 10 deep' in err
    code, err = _exit_and_error(tmp_path, capsys, board(extra="deep = " + "[" * 100_000))
    assert code == 2 and "syntax: not valid TOML: arrays or tables nested too deeply" in err


def test_deep_data_from_python_is_refused():
    data = {"model": {"title": [[[[[[[[[[[["x"]]]]]]]]]]]]}}
    with pytest.raises(ModelError, match=r"\[model\]: arrays or tables nested more than 10"):
        heat2d.model.from_dict(data)


# -- keys of the wrong type ----------------------------------------------------------------

WRONG_TYPES = [
    ({'length_unit = "mm"': 'length_unit = ["mm"]'},
     r"\[model\]: length_unit: must be one of m, mm, um, got \['mm'\]"),
    ({'length_unit = "mm"': "length_unit = { a = 1 }"}, r"\[model\]: length_unit: must be one"),
    ({'length_unit = "mm"': "length_unit = true"}, r"\[model\]: length_unit: must be one"),
    ({"depth = 10": "depth = [10]"}, r"\[model\]: depth: expected a number or an expression "
                                     r"string, got list \[10\]"),
    ({"k = 385": "k = { a = 1 }"}, r'material "copper": k: expected a number'),
    ({"\nh = 10\n": "\nh = true\n"}, r'boundary "air": h: expected a number'),
    ({"at = [10, 0.8]": 'at = ["a", 0.8]'}, r"probe \"centre\": at: unknown name 'a'"),
]


@pytest.mark.parametrize("change, match", WRONG_TYPES, ids=[m[1][:24] for m in WRONG_TYPES])
def test_keys_of_the_wrong_type_exit_2(tmp_path, capsys, change, match):
    code, err = _exit_and_error(tmp_path, capsys, board(change))
    assert code == 2
    assert re.search(match, err), err


# -- extreme but finite values -------------------------------------------------------------

VIAS = 'vias = { drill = DRILL, plating = 0.025, pitch = 1, metal = "copper" }\n'
EXTREMES = [
    ({"depth = 10": "depth = 1e300"},
     r"\[model\]: depth: must be between 1e-06 and 1e\+06 mm, got 1e\+300 \(line 4\)"),
    ({"depth = 10": "depth = 1e-300"}, r"\[model\]: depth: must be between 1e-06 and 1e\+06 mm"),
    ({"k = 385": "k = 1e300"},
     r'material "copper": k: must be between 1e-12 and 1e\+15 W/\(m·K\), got 1e\+300'),
    ({"k = 385": "k = 5e-324"}, r'material "copper": k: must be between 1e-12 and 1e\+15'),
    ({'name = "board"\nmaterial = "fr4"\n':
      'name = "board"\nmaterial = "fr4"\n' + VIAS.replace("DRILL", "1e-300")},
     r'shape "board": vias.drill: must be between 1e-06 and 1e\+06 mm, got 1e-300'),
    ({"x = 8, y": "x = 1e9, y"},
     r'shape "pad": rect.x: must be between -1e\+06 and 1e\+06 mm, got 1e\+09'),
    ({"\nh = 10\n": "\nh = 1e-300\n"}, r'boundary "air": h: must be between 0.001 and 1e\+07'),
    ({"temperature = 50": "temperature = 1e300"},
     r'boundary "rail": temperature: must be <= 5000 °C, got 1e\+300'),
    ({'power = "power"': "power = 1e300"}, r'shape "pad": power: must be <= 1e\+09 W'),
    ({"width = 20": "width = 1e-300"}, r'shape "board": rect.width: must be between 1e-06'),
]


@pytest.mark.parametrize("change, match", EXTREMES, ids=[m[1][:30] for m in EXTREMES])
def test_extreme_values_name_the_entry(tmp_path, capsys, change, match):
    code, err = _exit_and_error(tmp_path, capsys, board(change))
    assert code == 2
    assert re.search(match, err), err


def test_bounds_follow_the_length_unit():
    # 1e-9 m .. 1e3 m: 0.5 um is 5e-7 m, fine in um and in m; 2e3 m is not.
    heat2d.parse(board({'length_unit = "mm"': 'length_unit = "um"', "depth = 10": "depth = 0.5"}))
    with pytest.raises(ModelError, match=r"depth: must be between 1e-09 and 1000 m, got 2000"):
        heat2d.parse(board({'length_unit = "mm"': 'length_unit = "m"', "depth = 10": "depth = 2e3"}))


# -- resource guards -----------------------------------------------------------------------

BOARD30 = {"width = 20": "width = 30"}


def test_a_tiny_mesh_size_is_refused_before_meshing(tmp_path, capsys):
    code, err = _exit_and_error(tmp_path, capsys, board(BOARD30, "[mesh]\nsize = 1e-6\n"))
    assert code == 2
    assert ("[mesh]: size 1e-06 mm would make about 8.36e+13 nodes, more than the node limit "
            "of 5000000; use a larger size, or raise the limit with [mesh] node_limit or "
            "--node-limit") in err


PLATE = """
[model]
length_unit = "mm"
[materials.a]
k = 1
[[shape]]
name = "base"
material = "a"
rect = { x = 0, y = 0, width = 20, height = 10 }
FOIL
[[boundary]]
name = "air"
on = "exterior"
h = 10
ambient = 20
[mesh]
size = SIZE
"""


def test_a_mesh_over_the_limit_is_refused_after_meshing_though_its_estimate_passed():
    # The estimate stays below real meshes (by design: a refusal before meshing is then
    # sure); a mesh that still comes out over the limit is refused before any solve
    # (found by the long property run: a tab stretched to 1e6 mm meshed to 254 374 nodes
    # under a limit of 200 000, and its transient ran past the time limit).
    text = PLATE.replace("FOIL", "").replace("SIZE", "0.6")
    model = heat2d.parse(text, node_limit=1000)
    geometry = build_geometry(model)
    assert estimate_nodes(geometry).sum() + len(geometry.vertices) < 1000   # 966
    with pytest.raises(ModelError, match=r"\[mesh\]: the mesh came out at 1053 nodes, "
                                         r"more than the node limit of 1000; use a larger"):
        build_mesh(geometry)
    assert len(build_mesh(build_geometry(heat2d.parse(text))).points) == 1053


def test_a_thin_piece_that_outgrows_its_estimate_is_named_after_meshing():
    # A 0.01 mm foil 20 mm long on a plate: estimated at about L/w = 2000 nodes, meshed
    # to 5278 (the strip estimate is a lower bound); under a limit of 3000 the refusal
    # names the shape holding most nodes beyond its estimate (the plate, graded down to
    # the foil) and where its smallest triangles are: along the foil, y = 10.
    foil = ('[[shape]]\nname = "foil"\nmaterial = "a"\n'
            "rect = { x = 0, y = 10, width = 20, height = 0.01 }")
    model = heat2d.parse(PLATE.replace("FOIL", foil).replace("SIZE", "2"), node_limit=3000)
    with pytest.raises(ModelError, match=r'shape "base": the mesh came out at 5278 nodes, '
                                         r"more than the node limit of 3000: its triangles "
                                         r"fall far below the target size near") as err:
        build_mesh(build_geometry(model))
    y = float(re.search(r"near \([-\d.e+]+, ([-\d.e+]+)\)", str(err.value)).group(1))
    assert abs(y - 10) < 0.05


def test_node_limit_key_and_option(tmp_path, capsys):
    code, err = _exit_and_error(tmp_path, capsys, board(extra="[mesh]\nsize = 0.01\n"),
                                "--node-limit", "20000")
    assert code == 2 and "more than the node limit of 20000" in err
    code, err = _exit_and_error(tmp_path, capsys, board(extra="[mesh]\nnode_limit = 10\n"))
    assert code == 2 and "[mesh]: node_limit: must be >= 1000, got 10" in err
    model = heat2d.parse(board(extra="[mesh]\nsize = 0.01\n"), node_limit=2_000_000)
    assert model.mesh.node_limit == 2_000_000
    assert model.with_params(t=1.0).mesh.node_limit == 2_000_000     # kept by variants


def test_a_shape_mesh_size_is_named(tmp_path, capsys):
    code, err = _exit_and_error(tmp_path, capsys, board(
        {'power = "power"': 'power = "power"\nmesh_size = 1e-5'}))
    assert code == 2
    assert err.startswith(f"error: {tmp_path / 'board.toml'}: shape \"pad\": mesh_size 1e-05 mm "
                          "would make about")


def test_the_estimate_stays_below_the_real_mesh():
    model = heat2d.parse(board())
    geometry = build_geometry(model)
    mesh = heat2d.fem.mesh.build_mesh(geometry)
    estimate = estimate_nodes(geometry).sum() + len(geometry.vertices)
    # NODES_PER_BOUND is set below the measured 1.6..1.8 ratio: within a factor of 2 below.
    assert 0.5 * len(mesh.points) < estimate < len(mesh.points)


def test_a_circle_with_tiny_chords_is_refused(tmp_path, capsys):
    circle = ('[[shape]]\nname = "c"\nvoid = true\ncircle = { x = 5, y = 0.8, r = 0.3 }\n'
              "mesh_size = 1e-6\n")
    code, err = _exit_and_error(tmp_path, capsys, board(extra=circle))
    assert code == 2
    assert ('shape "c": mesh_size 1e-06 mm would make about 1.88e+06 chords, more than the '
            "20000 a circle may have; use a larger mesh_size") in err
    code, err = _exit_and_error(tmp_path, capsys, board(extra=circle.replace("1e-6", "0.01")),
                                "--refine", "1e6")
    assert code == 2 and "divided by --refine 1e+06" in err


def test_a_huge_repeat_is_refused(tmp_path, capsys):
    code, err = _exit_and_error(tmp_path, capsys, board(
        {'power = "power"': 'power = "power"\nrepeat = { count = 1e12, dx = 5 }'}))
    assert code == 2
    assert 'shape "pad": repeat.count: must be <= 2000 copies, got 1e+12' in err


def _plain(extra: str, name: str = "a") -> str:
    return (f'[model]\nlength_unit = "mm"\n[materials.m]\nk = 1\n[[shape]]\nname = "{name}"\n'
            'material = "m"\nrect = { x = 0, y = 0, width = 10, height = 2 }\n' + extra
            + '[[boundary]]\nname = "b"\non = "exterior"\nh = 10\nambient = 20\n')


def test_too_many_shapes_long_polygons_and_names_are_refused(tmp_path, capsys):
    # Guards (docs/model-format.md, Limits and ranges): each of these ran for minutes
    # (9000 shapes: 337 s; a 100 000-point polygon: 63 s, then a mesher mismatch; a
    # 200 000-character name: the map drew every glyph for over 120 s).
    many = "".join(f'[[shape]]\nname = "s{i}"\nmaterial = "m"\n'
                   f'rect = {{ x = {i * 0.004}, y = 0, width = 0.002, height = 2 }}\n'
                   for i in range(2001))
    code, err = _exit_and_error(tmp_path, capsys, _plain(many))
    assert code == 2 and "[[shape]] #2001: the model has more than 2000 shapes" in err
    ring = ", ".join(f"[{1 + 0.5 * math.cos(k / 3200):.9f}, {1 + 0.5 * math.sin(k / 3200):.9f}]"
                     for k in range(20001))
    code, err = _exit_and_error(tmp_path, capsys, _plain(
        f'[[shape]]\nname = "p"\nmaterial = "m"\npolygon = [{ring}]\n'))
    assert code == 2 and 'shape "p": polygon: at most 20000 points, got 20001' in err
    code, err = _exit_and_error(tmp_path, capsys, _plain("", name="x" * 200_000))
    assert code == 2 and "name: at most 200 characters, got 200000" in err
    assert len(err) < 400                              # one short line, not the whole name


@pytest.mark.parametrize("vary, match", [
    ("nope=0:1:100000000", r"--vary nope: no such parameter in \[params\] to vary"),
    ("t=0:1:100000000", r"board.toml: --vary t: 100000000 values are more than the 10000 variants"),
    ("t=0:1:1e300", r"--vary t: 1e\+300 values are more than the 10000 variants"),
])
def test_huge_sweeps_are_refused_before_expansion(tmp_path, capsys, vary, match):
    code, err = _exit_and_error(tmp_path, capsys, board(), "--vary", vary, command="sweep")
    assert code == 2
    assert re.search(match, err), err


def test_a_huge_grid_is_refused(tmp_path, capsys):
    code, err = _exit_and_error(tmp_path, capsys, board(), "--vary", "t=1:2:200",
                                "--vary", "power=0:1:200", command="sweep")
    assert code == 2
    assert ("board.toml: --vary: the grid has 40000 variants (200 t × 200 power), more than the 10000 a "
            "sweep runs") in err
