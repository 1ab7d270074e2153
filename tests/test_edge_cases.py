"""Probes on awkward places, extreme accuracy targets and models without power.

Each case here was a defect found by running odd models through the command line: the
checks are on consistency (the same answer on every mesh, the same verdict from `check`
and `run`) and on exact values where the model has them.
"""

from __future__ import annotations

import math

import pytest

import heat2d
from heat2d import cli
from heat2d.post.writers import format_summary
from tests.common import HELD_BLOCK
from tests.test_estimate import pipe_wall, with_probes, with_size

# A 1 mm alumina heater over a 3 mm aluminium plate, a contact resistance between them, and
# 30 kW/m² into the heater's top; the plate's bottom is held at 40 °C. Across the contact
# the temperature jumps by q″R″ = 30 000 × 2.75e-4 = 8.25 K (Inc §3.1, contact resistance).
CONTACT = """
[model]
length_unit = "mm"
depth = 10
[materials.alumina]
k = 24
[materials.al]
k = 200
[[shape]]
name = "plate"
material = "al"
rect = { x = 0, y = 0, width = 10, height = 3 }
[[shape]]
name = "heater"
material = "alumina"
rect = { x = 0, y = 3, width = 10, height = 1 }
[[interface]]
name = "contact"
between = ["heater", "plate"]
resistance = 2.75e-4
[[boundary]]
name = "in"
on = "heater.top"
heat_flux = 30000
[[boundary]]
name = "cold"
on = "plate.bottom"
temperature = 40
[[probe]]
name = "on_contact"
at = [3.3, 3]
"""


def test_a_probe_on_an_interface_reads_the_later_shape_on_every_mesh():
    # 1-D: the plate's top is at 40 + q″·3 mm/200 = 40.45 °C, the heater's bottom 8.25 K
    # above it, 48.70 °C. The probe reads the heater (painted later) on every mesh, so the
    # estimate compares like with like and stays small (it was ± 33 K when the refined
    # mesh read the other side).
    plate_top = 40 + 30_000 * 3e-3 / 200
    heater_bottom = plate_top + 30_000 * 2.75e-4
    for refine in (1.0, 2.0):
        result = heat2d.solve(heat2d.parse(CONTACT), refine=refine, resistances=False)
        assert result.summary["probes"]["on_contact"] == pytest.approx(heater_bottom,
                                                                       abs=1e-9)
        assert result.summary["probe_errors"]["on_contact"] < 1e-6


def _circle_model(probe: tuple[float, float], *, void: bool, accuracy: str = "") -> str:
    # A 10 mm square plate with a circle r = 2 mm at (5, 5) (a slug of the plate's own
    # material, or a bore), on a 2 mm mesh: the circle is a 16-gon, whose sides lie up to
    # r(1 − cos(π/16)) = 0.038 mm inside the circle. The probe sits in that sliver: 1.985 mm
    # from the centre, mid-side. With the slug of the plate's material, bottom at 20 °C and
    # top at 30 °C, the field is T = 20 + y (mm), 1-D conduction (Inc §3.1), which linear
    # elements reproduce exactly.
    circle = ('name = "bore"\nvoid = true\n' if void else
              'name = "slug"\nmaterial = "m"\n')
    return f"""
[materials.m]
k = 10
[materials.cu]
k = 400
[[shape]]
name = "plate"
material = "m"
rect = {{ x = 0, y = 0, width = 10, height = 10 }}
[[shape]]
{circle}circle = {{ x = 5, y = 5, r = 2 }}
[[boundary]]
name = "cold"
on = "plate.bottom"
temperature = 20
[[boundary]]
name = "hot"
on = "plate.top"
temperature = 30
[mesh]
size = 2
[[probe]]
name = "p"
at = [{probe[0]!r}, {probe[1]!r}]
{accuracy}
"""


SLIVER = (5 + 1.985 * math.cos(math.pi / 16), 5 + 1.985 * math.sin(math.pi / 16))


@pytest.mark.parametrize("accuracy", ["", "accuracy = 0.001"])
def test_a_probe_inside_a_void_circle_is_refused_on_every_mesh(tmp_path, capsys, accuracy):
    # Inside the true bore but outside its 16-gon: refused by check and run alike (before,
    # check accepted it and a run whose refinement rounded the bore refused it).
    path = tmp_path / "bore.toml"
    path.write_text(_circle_model(SLIVER, void=True, accuracy=accuracy), encoding="utf-8")
    for argv in (["check", str(path)], ["run", str(path), "--out", str(tmp_path / "o")]):
        assert cli.main(argv) == 2
        err = capsys.readouterr().err.strip().splitlines()
        assert len(err) == 1 and 'probe "p": at = [' in err[0] and "not inside" in err[0]
        assert "just inside a void circle" in err[0]            # says what to fix
    assert not (tmp_path / "o").exists()


def test_a_probe_in_the_sliver_of_a_solid_circle_is_read_on_every_mesh():
    # Inside the true slug but outside its polygon, with the plate's material around it:
    # valid, and read exactly (T = 20 + y) on a coarse mesh, a refined one and an adaptive
    # run.
    for refine, accuracy in ((1.0, ""), (3.0, ""), (1.0, "accuracy = 0.001")):
        text = _circle_model(SLIVER, void=False, accuracy=accuracy)
        result = heat2d.solve(heat2d.parse(text), refine=refine, resistances=False)
        assert result.summary["probes"]["p"] == pytest.approx(20 + SLIVER[1], abs=1e-9)


def test_a_probe_outside_the_mesh_but_inside_the_true_circle_is_read_within_its_error():
    # The pipe wall of tests/test_estimate.py (Inc §3.3.1, Table 3.3: bore r1 = 2 mm held,
    # outside r2 = 6 mm convecting, exact T(r)) on a 1.5 mm mesh. A probe 5.99 mm from the
    # centre, midway between two vertices of the 26-sided outer polygon (whose sides lie up
    # to 6(1 − cos(π/26)) = 0.044 mm inside the circle), is outside the mesh: it is read
    # from the nearest triangle's field extended to it, on every mesh, and must agree with
    # the exact T(r) to within its reported error.
    case = pipe_wall()
    angle = math.pi / 26
    x, y = 5.99 * math.cos(angle), 5.99 * math.sin(angle)
    exact = case.field(x, y)
    model = with_probes(with_size(case.model, 1.5), {"skin": (x, y)})
    for refine in (1.0, 2.0):
        result = heat2d.solve(model, refine=refine, resistances=False)
        value, error = result.summary["probes"]["skin"], result.summary["probe_errors"]["skin"]
        assert abs(value - exact) <= error


def test_subnormal_accuracies_refine_like_tiny_ones():
    # 1/accuracy overflowed for 5e-324: the goal weights are now relative to the tightest
    # target, so any accuracy far below what the budget allows refines the same meshes.
    text = _circle_model((3.0, 7.0), void=True, accuracy="accuracy = ACC")
    text = text.replace("size = 2\n", "size = 2\nmax_nodes = 3000\n")
    steps = []
    for acc in ("1e-300", "5e-324"):
        result = heat2d.solve(heat2d.parse(text.replace("ACC", acc)), resistances=False)
        steps.append([s["nodes"] for s in result.summary["adaptive"]["steps"]])
        assert result.summary["adaptive"]["reached"] is False
    assert steps[0] == steps[1] and len(steps[0]) > 1


def test_the_adaptive_table_names_every_target_in_full():
    text = CONTACT.replace('[[probe]]\nname = "on_contact"\nat = [3.3, 3]\n', "")
    for name, x in (("heater_top_left_corner", 1.0), ("heater_top_right_corner", 9.0)):
        text += f'[[probe]]\nname = "{name}"\nat = [{x}, 3.9]\naccuracy = 0.5\n'
    result = heat2d.solve(heat2d.parse(text), resistances=False)
    table = format_summary(result.summary)
    header = next(line for line in table.splitlines() if line.strip().startswith("step"))
    assert "± heater_top_left_corner" in header and "± heater_top_right_corner" in header


def test_a_model_without_power_balances():
    # Held at 20 °C on one side and insulated elsewhere: the field is 20 °C everywhere and
    # every heat flow is zero up to round-off; that round-off is no energy imbalance.
    result = heat2d.solve(heat2d.parse(HELD_BLOCK), estimate=False)
    # 20 °C to the round-off of the solve (a few hundred ulps of 20).
    assert result.summary["temperature"]["max"] == pytest.approx(20.0, rel=1e-12)
    assert abs(result.summary["energy_balance"]["relative_error"]) < 1e-6
    assert not any("energy balance" in w for w in result.summary["warnings"])


def test_adaptive_refinement_stops_when_the_estimate_stalls():
    # Two held temperatures (20 and 120 °C) meet at the origin, and a probe 0.01 mm away
    # asks for 1e-4 K: the field jumps there, so refinement can never meet that target.
    # With a budget of ten million nodes it must not run on until memory runs out: it stops
    # once the estimate has stopped falling, and says so.
    text = """
[materials.m]
k = 1
[[shape]]
name = "s"
material = "m"
rect = { x = 0, y = 0, width = 10, height = 10 }
power = 100
[[boundary]]
name = "cold"
on = "s.left"
temperature = 20
[[boundary]]
name = "hot"
on = "s.bottom"
temperature = 120
[[probe]]
name = "near_jump"
at = [0.01, 0.01]
accuracy = 1e-4
[mesh]
size = 0.5
max_nodes = 10000000
"""
    result = heat2d.solve(heat2d.parse(text), resistances=False)
    adaptive = result.summary["adaptive"]
    assert adaptive["reached"] is False and adaptive["stopped"] == "stalled"
    assert len(adaptive["steps"]) < 10 and result.summary["mesh"]["nodes"] < 20_000
    assert any("estimate fell by less than 5%" in w for w in result.summary["warnings"])
    assert "NOT reached (stalled)" in format_summary(result.summary)
