"""Current-carrying conductors, input side (model-format.md, "Current-carrying
conductors"): resistivity keys, current keys, mixing, and their errors."""

from __future__ import annotations

import math

import numpy as np
import pytest

import heat2d
from heat2d import ModelError
from tests.common import line_of, replaced

# Copper: ρ = 1.724e-8 Ω·m at 20 °C, α = 0.00393 /K (the annealed-copper standard, as
# tabulated in the CRC Handbook of Chemistry and Physics; from memory).
CURRENT = """
[model]
length_unit = "mm"

[materials.fr4]
kx = 1.06
ky = 0.34

[materials.copper]
k = 385
resistivity = 1.724e-8
temperature_coefficient = 0.00393

[[shape]]
name = "board"
material = "fr4"
rect = { x = 0, y = 0, width = 20, height = 1.6 }

[[shape]]
name = "trace"
material = "copper"
rect = { x = 8, y = 1.6, width = 4, height = 0.035 }
current = 3

[[boundary]]
name = "air"
on = "exterior"
h = 10
ambient = 40
"""


def text(replace: dict[str, str] | None = None, extra: str = "") -> str:
    return replaced(CURRENT, replace, extra)


def test_resistivity_and_current_read_back():
    m = heat2d.parse(text())
    cu = m.material("copper")
    assert cu.resistivity == 1.724e-8 and cu.resistivity_reference == 20.0
    assert cu.temperature_coefficient == 0.00393 and cu.conducts
    assert not m.material("fr4").conducts
    assert m.shape("trace").current == 3 and m.has_current
    (name, members, amps), = m.conductors
    assert name == "trace" and [s.name for s in members] == ["trace"] and amps == 3
    assert m.transient_nonlinear and not m.nonlinear and not m.is_transient


def test_resistivity_law():
    cu = heat2d.parse(text()).material("copper")
    rho, drho = cu.resistivity_at(np.array([20.0, 120.0, -1000.0]))
    # ρ = ρ_ref (1 + α (T − T_ref)), floored at 1e-3 ρ_ref
    assert rho[0] == pytest.approx(1.724e-8)
    assert rho[1] == pytest.approx(1.724e-8 * (1 + 0.393))
    assert drho[1] == pytest.approx(1.724e-8 * 0.00393)
    assert rho[2] == pytest.approx(1.724e-11) and drho[2] == 0.0
    alu = heat2d.parse(text({"temperature_coefficient = 0.00393":
                             "resistivity_reference = 25"})).material("copper")
    assert alu.resistivity_reference == 25 and alu.temperature_coefficient == 0
    assert alu.resistivity_at(np.array([500.0]))[0] == pytest.approx([1.724e-8])


def test_stack_and_repeat_currents_belong_to_the_group():
    stack = """
[[stack]]
name = "pcb"
x = 0
y = -1
width = 20
current = 10
layers = [{ name = "core", thickness = 0.5, material = "fr4" },
          { name = "plane", thickness = 0.035, material = "copper" }]
"""
    m = heat2d.parse(text({"current = 3\n": "repeat = { count = 3, dx = 5 }\ncurrent = 2\n"},
                          extra=stack))
    by_name = {n: (tuple(s.name for s in mem), a) for n, mem, a in m.conductors}
    assert by_name["trace"] == (("trace[1]", "trace[2]", "trace[3]"), 2.0)
    assert by_name["pcb"] == (("pcb.plane",), 10.0)
    assert all(s.current is None for s in m.shapes)


def test_via_field_mixes_conductance_by_area_fraction():
    vias = 'vias = { drill = 0.3, plating = 0.025, pitch = 1.0, metal = "copper" }\n'
    m = heat2d.parse(text({"current = 3\n": "", 'material = "fr4"\nrect':
                           f'material = "fr4"\n{vias}rect'},
                          extra=""))
    mat = m.material(m.shape("board").material)
    f_cu = math.pi * (0.15**2 - 0.125**2) / 1.0
    # Parallel conductances along the depth: 1/ρ_eff = f_Cu/ρ_Cu (FR-4 carries none).
    assert 1 / mat.resistivity == pytest.approx(f_cu / 1.724e-8, rel=1e-12)
    assert mat.temperature_coefficient == 0.00393


def test_current_schedule_in_a_transient_model():
    src = text({"k = 385\n": "k = 385\ndensity = 8933\nspecific_heat = 385\n",
                "kx = 1.06\n": "kx = 1.06\ndensity = 1900\nspecific_heat = 1150\n",
                "current = 3\n": "current = 3\ncurrent_pulse = { current = 30, width = 1e-3 }\n"},
               extra="\n[transient]\nend = 1\n")
    sh = heat2d.parse(src).shape("trace")
    assert sh.current == 3 and sh.current_schedule.amplitude == 30
    assert sh.current_schedule.at(np.array([0.0, 2e-3])) == pytest.approx([30, 3])
    table = src.replace("current = 3\ncurrent_pulse = { current = 30, width = 1e-3 }",
                        "current_table = [[0, 5], [1, -5]]")
    sh = heat2d.parse(table).shape("trace")
    assert sh.current == 5 and sh.current_schedule.at(0.5) == pytest.approx(0.0)


ERRORS = [
    ({"resistivity = 1.724e-8": "resistivity = -1"}, 'material "copper"', "resistivity = -1",
     "resistivity: must be > 0 Ω·m"),
    ({"resistivity = 1.724e-8": "resistivity = 1e-12"}, 'material "copper"', "resistivity =",
     "resistivity: must be between 1e-09 and 1000 Ω·m"),
    ({"resistivity = 1.724e-8": "resistivity = \"inf\""}, 'material "copper"', "resistivity =",
     "resistivity:"),
    ({"temperature_coefficient = 0.00393": "temperature_coefficient = 0.1"},
     'material "copper"', "temperature_coefficient", "between -0.01 and 0.05 1/K"),
    ({"resistivity = 1.724e-8\ntemperature_coefficient = 0.00393\n": ""}, 'shape "trace"',
     "current = 3",
     "current: material 'copper' has no resistivity"),
    ({"current = 3": "current = 2e5"}, 'shape "trace"', "current = 2e5",
     "current: must be between -100000 and 100000 A"),
    ({"current = 3": "current_pulse = { current = 1, width = 1 }"}, 'shape "trace"',
     "current_pulse", "current_pulse needs a [transient] section"),
    ({"resistivity = 1.724e-8\n": ""}, 'material "copper"', "temperature_coefficient",
     "temperature_coefficient needs resistivity"),
    ({'material = "copper"\n': 'void = true\n'}, 'shape "trace"', "current = 3",
     "current: a void shape takes no current"),
]


@pytest.mark.parametrize("replace, entry, needle, reason", ERRORS)
def test_errors_name_entry_and_line(replace, entry, needle, reason):
    src = text(replace)
    with pytest.raises(ModelError) as info:
        heat2d.parse(src, source="c.toml")
    msg = str(info.value)
    assert msg.startswith(f"c.toml: {entry}: "), msg
    assert reason in msg, msg
    assert info.value.line == line_of(src, needle), msg


def test_group_without_a_conducting_member_is_an_error():
    stack = """
[[stack]]
name = "pcb"
x = 0
y = -1
width = 20
current = 10
layers = [{ name = "core", thickness = 0.5, material = "fr4" }]
"""
    src = text(extra=stack)
    with pytest.raises(ModelError, match=r"stack \"pcb\": current: none of the stack's shapes "
                       r"has a material with resistivity") as info:
        heat2d.parse(src)
    assert info.value.line == src.splitlines().index("current = 10") + 1
