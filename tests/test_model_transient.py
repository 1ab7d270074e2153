"""Transient model input: [transient], heat capacity, schedules (model-format.md,
"Transient runs"), each bad value one error naming the entry and the line."""

from __future__ import annotations

import math
from dataclasses import replace

import numpy as np
import pytest

import heat2d
from heat2d import ModelError
from heat2d.model.timeline import Schedule, TransientSettings
from tests.common import line_of, replaced

# A small board with capacities; copper 8933 kg/m³ and 385 J/(kg·K) (Incropera 6th ed.,
# Table A.1, pure copper at 300 K); FR-4 1900 kg/m³ and 1150 J/(kg·K) (typical laminate
# data-sheet values, from memory).
TRANSIENT = """
[model]
length_unit = "mm"
depth = 10

[materials.fr4]
kx = 1.06
ky = 0.34
density = 1900
specific_heat = 1150

[materials.copper]
k = 385
density = 8933
specific_heat = 385

[[shape]]
name = "board"
material = "fr4"
rect = { x = 0, y = 0, width = 20, height = 1.6 }

[[shape]]
name = "pad"
material = "copper"
rect = { x = 8, y = 1.6, width = 4, height = 0.07 }
power = 0.5

[[boundary]]
name = "air"
on = "exterior"
h = 10
ambient = 40

[transient]
end = 100
"""


def text(replace: dict[str, str] | None = None, extra: str = "") -> str:
    return replaced(TRANSIENT, replace, extra)


# -- reading values back ---------------------------------------------------------------

def test_transient_section_values_read_back():
    src = text({"end = 100\n": "end = 100\nfirst = 1e-5\nper_decade = 5\ninitial = 25\n"
                "tolerance = 0.05\nsnapshots = [0.1, 1, 100]\nzth = false\n"
                "foster_terms = 4\nduties = [0.1, 0.5]\n"})
    m = heat2d.parse(src)
    tr = m.transient
    assert m.is_transient and tr.end == 100 and tr.first == 1e-5 and tr.per_decade == 5
    assert tr.initial == 25 and tr.start_temperature == 25 and tr.tolerance == 0.05
    assert tr.snapshots == (0.1, 1.0, 100.0) and tr.zth is False and tr.foster_terms == 4
    assert tr.duties == (0.1, 0.5) and tr.line == line_of(src, "[transient]")
    assert not heat2d.parse(text({"[transient]\nend = 100\n": ""})).is_transient


def test_capacity_numbers_and_tables():
    src = text({"density = 8933\nspecific_heat = 385":
                "density = 8933\nspecific_heat = [[0, 380], [100, 400]]"})
    m = heat2d.parse(src)
    cu = m.material("copper")
    assert cu.has_capacity and cu.varies_capacity and cu.specific_heat == pytest.approx(385)
    rc, drc = cu.capacity_at(np.array([-50.0, 50.0, 200.0]))
    # Piecewise linear, held beyond the ends: c(50) = 390, slope 0.2 J/(kg·K²) inside.
    assert rc == pytest.approx([8933 * 380, 8933 * 390, 8933 * 400])
    assert drc == pytest.approx([0.0, 8933 * 0.2, 0.0])
    fr4 = m.material("fr4")
    assert fr4.capacity_at(np.array([25.0]))[0] == pytest.approx([1900 * 1150])
    assert not m.nonlinear and m.transient_nonlinear


def test_initial_ambient_takes_the_common_ambient():
    m = heat2d.parse(text({"end = 100\n": "end = 100\ninitial = \"ambient\"\n"}))
    assert m.transient.initial == "ambient" and m.transient.start_temperature == 40
    assert m.transient.start_temperature is not None
    assert heat2d.parse(text()).transient.start_temperature is None      # "steady"


def test_power_schedules_read_back():
    pulse = heat2d.parse(text({"power = 0.5\n": "power = 0.5\npower_pulse = { power = 10, "
                               "width = 0.01, period = 0.05, count = 5, delay = 0.002 }\n"}))
    s = pulse.shape("pad").schedule
    assert s == Schedule("pulse", amplitude=10, base=0.5, width=0.01, period=0.05, count=5,
                         delay=0.002)
    assert pulse.shape("pad").power == 0.5 and s.initial == 0.5
    table = heat2d.parse(text({"power = 0.5\n": "power_table = [[0, 0], [1e-3, 10], "
                               "[0.1, 10], [0.1001, 0]]\n"}))
    sh = table.shape("pad")
    assert sh.schedule.kind == "linear" and sh.schedule.points[1] == (1e-3, 10.0)
    assert sh.power == 0.0                                  # the value before t = 0
    steps = heat2d.parse(text({"power = 0.5\n": "power_steps = [[0, 10], [0.01, 2]]\n"}))
    assert steps.shape("pad").schedule.kind == "steps" and steps.shape("pad").power == 10


def test_boundary_tables_read_back():
    m = heat2d.parse(text({"ambient = 40\n": "ambient = 40\nambient_table = [[0, 40], "
                           "[10, 60]]\nh_table = [[0, 10], [5, 20]]\n"}))
    b = m.boundaries[0]
    assert b.schedule("ambient").at(5.0) == pytest.approx(50.0)
    assert b.schedule("h").at(100.0) == pytest.approx(20.0) and b.schedule("temperature") is None


def test_edited_and_with_methods_keep_transient_data():
    m = heat2d.parse(text({"power = 0.5\n": "power_steps = [[0, 1], [1, 2]]\n"}))
    m2 = m.with_material("copper", k=390, density=8900, specific_heat=390)
    # edited data carries no text, hence no line numbers
    assert m2.transient == replace(m.transient, line=None)
    assert m2.material("copper").density == 8900
    assert m2.shape("pad").schedule == m.shape("pad").schedule
    with pytest.raises(ModelError, match="a transient model needs density and specific_heat"):
        m.with_material("copper", k=390)


# -- Schedule values, against hand-computed values ---------------------------------------

def test_pulse_train_values():
    s = Schedule("pulse", amplitude=10, base=1, width=0.01, period=0.05, count=3, delay=0.02)
    t = np.array([0, 0.0199, 0.02, 0.0299, 0.03, 0.07, 0.0799, 0.08, 0.12, 0.1299, 0.17])
    # pulses on [0.02, 0.03), [0.07, 0.08), [0.12, 0.13); the fourth (0.17) is past count
    assert s.at(t) == pytest.approx([1, 1, 10, 10, 1, 10, 10, 1, 10, 10, 1])
    assert s.at(0.025) == 10.0 and isinstance(s.at(0.025), float)
    assert s.breaks(0.125) == pytest.approx([0.02, 0.03, 0.07, 0.08, 0.12])
    # at a break the value is the one after it (the integrator lands on each break)
    edges = s.breaks(1.0)
    assert s.at(edges) == pytest.approx([10, 1, 10, 1, 10, 1])
    assert s.initial == 1.0
    single = Schedule("pulse", amplitude=5, width=2.0)
    assert single.at(np.array([0.0, 1.999, 2.0, 50.0])) == pytest.approx([5, 5, 0, 0])
    assert single.breaks(10) == pytest.approx([2.0])
    endless = Schedule("pulse", amplitude=1, width=1, period=4)
    assert endless.at(4000.5) == 1.0 and endless.at(4001.5) == 0.0
    assert len(endless.breaks(20)) == 10          # edges 1, 4, 5, 8, ... 17, 20


def test_linear_and_step_tables():
    pts = ((0.0, 0.0), (1e-3, 10.0), (0.1, 10.0), (0.1001, 0.0))
    lin = Schedule("linear", pts)
    # interpolation by hand: 0.5e-3 is halfway up the ramp; 0.10005 halfway down.
    assert lin.at(np.array([0.5e-3, 0.05, 0.10005, 5.0])) == pytest.approx([5, 10, 5, 0])
    assert lin.breaks(0.1) == pytest.approx([1e-3, 0.1])
    steps = Schedule("steps", ((0.5, 10.0), (1.0, 2.0)))
    assert steps.at(np.array([0.0, 0.5, 0.99, 1.0, 9.0])) == pytest.approx([10, 10, 10, 2, 2])
    assert steps.initial == 10.0 and lin.initial == 0.0


def test_report_and_snapshot_times():
    tr = TransientSettings(end=100, first=1e-6, per_decade=10)
    times = tr.report_times()
    assert len(times) == 81 and times[0] == 1e-6 and times[-1] == 100
    assert np.allclose(np.diff(np.log10(times)), 0.1)
    assert tr.snapshot_times() == pytest.approx(10.0 ** np.arange(-6, 3))
    assert len(TransientSettings(end=1.0).report_times()) == 61        # first = end·1e-6
    ev = TransientSettings(end=1.0, every=0.25)
    assert ev.report_times() == pytest.approx([0.25, 0.5, 0.75, 1.0])
    odd = TransientSettings(end=0.7, every=0.3)
    assert odd.report_times() == pytest.approx([0.3, 0.6, 0.7])
    assert TransientSettings(end=5, snapshots=(5.0, 1.0)).snapshot_times() == \
        pytest.approx([1.0, 5.0])


# -- mixing of heat capacity --------------------------------------------------------------

VIAS = """
vias = { drill = 0.3, plating = 0.025, pitch = 1.0, metal = "copper", fill = "solder" }
"""


def test_via_field_mixes_rho_c_by_volume_fraction():
    src = text({"name = \"pad\"": "name = \"pad\"\n" + VIAS.strip(),
                "[[shape]]\nname = \"board\"": "[materials.solder]\nk = 58\ndensity = 7400\n"
                "specific_heat = 230\n\n[[shape]]\nname = \"board\""})
    m = heat2d.parse(src)
    mat = m.material(m.shape("pad").material)
    ro, ri = 0.15, 0.125
    f_cu = math.pi * (ro**2 - ri**2) / 1.0          # reference facts §3: N π (ro² − ri²) / A
    f_hole = math.pi * ri**2
    # ρc = Σ f_i ρ_i c_i with host copper, barrel copper, fill solder.
    rc = (f_cu + 1 - f_cu - f_hole) * 8933 * 385 + f_hole * 7400 * 230
    rho = (1 - f_hole) * 8933 + f_hole * 7400
    assert f_cu == pytest.approx(0.02160, abs=1e-5)   # reference facts §3: f = 2.16 %
    assert mat.density * mat.specific_heat == pytest.approx(rc, rel=1e-12)
    assert mat.density == pytest.approx(rho, rel=1e-12)


def test_mixture_without_capacity_names_the_constituent():
    src = text({"name = \"pad\"": "name = \"pad\"\n" + VIAS.strip(),
                "[[shape]]\nname = \"board\"": "[materials.solder]\nk = 58\n\n"
                "[[shape]]\nname = \"board\""})
    with pytest.raises(ModelError) as info:
        heat2d.parse(src, source="b.toml")
    line = line_of(src, "[materials.solder]")
    assert str(info.value).startswith('b.toml: material "solder": a transient model needs '
                                      'density and specific_heat')
    assert info.value.line == line


def test_stack_coverage_mixes_capacity():
    stack = """
[[stack]]
name = "pcb"
x = 0
y = -1
width = 20
layers = [{ name = "l1", thickness = 0.5, material = "copper", coverage = 0.3, fill = "fr4" }]
"""
    m = heat2d.parse(text(extra="").replace("[transient]", stack + "\n[transient]"))
    mat = m.material("pcb.l1")
    assert mat.density * mat.specific_heat == pytest.approx(0.3 * 8933 * 385
                                                            + 0.7 * 1900 * 1150)
    assert mat.density == pytest.approx(0.3 * 8933 + 0.7 * 1900)


# -- errors: entry and line ---------------------------------------------------------------

ERRORS = [
    ({"end = 100": "end = 0"}, "[transient]", "end = 0", "end: must be > 0 s"),
    ({"end = 100": "end = 100\nfirst = 100"}, "[transient]", "first = 100",
     "first: must be less than end"),
    ({"end = 100": "end = 100\nevery = 200"}, "[transient]", "every = 200",
     "every: must be less than end"),
    ({"end = 100": "end = 100\nfirst = 1e-12"}, "[transient]", "first = 1e-12",
     "first: must be >= 1e-09 s"),
    ({"end = 100": "end = 1e8"}, "[transient]", "end = 1e8", "end: must be <= 1e+07 s"),
    ({"end = 100": "end = 100\nper_decade = 0"}, "[transient]", "per_decade", "per_decade"),
    ({"end = 100": "end = 100\ntolerance = 0"}, "[transient]", "tolerance", "tolerance: must"),
    ({"end = 100": "end = 100\nsnapshots = [1, 200]"}, "[transient]", "snapshots",
     "snapshots[1]: must be between 0 and 100 s"),
    ({"end = 100": "end = 100\nduties = [0.5, 1]"}, "[transient]", "duties",
     "duties[1]: must be strictly between 0 and 1"),
    ({"end = 100": "end = 100\ninitial = \"cold\""}, "[transient]", "initial",
     "initial: expected \"steady\", \"ambient\""),
    ({"end = 100": "end = 100\nbogus = 1"}, "[transient]", "bogus", "unknown key 'bogus'"),
    ({"density = 8933": "density = -1"}, 'material "copper"', "density = -1",
     "density: must be > 0 kg/m³"),
    ({"density = 8933": "density = 1e6"}, 'material "copper"', "density = 1e6",
     "density: must be between 1 and 30000 kg/m³"),
    ({"specific_heat = 385": "specific_heat = 5"}, 'material "copper"', "specific_heat = 5",
     "specific_heat: must be between 50 and 10000 J/(kg·K)"),
    ({"specific_heat = 385": "specific_heat = [[100, 380], [50, 390]]"}, 'material "copper"',
     "specific_heat = [[", "specific_heat: table temperatures must increase"),
    ({"density = 8933\nspecific_heat = 385": "density = 8933"}, 'material "copper"',
     "[materials.copper]", "a transient model needs density and specific_heat"),
    ({"power = 0.5": "power_pulse = { power = 1, width = 0.05, period = 0.05 }"},
     'shape "pad"', "power_pulse", "width 0.05 s must be less than the period"),
    ({"power = 0.5": "power_pulse = { power = 1, width = 0 }"}, 'shape "pad"',
     "power_pulse", "power_pulse.width: must be > 0 s"),
    ({"power = 0.5": "power_pulse = { power = 1, width = 1, period = 2, count = 0 }"},
     'shape "pad"', "power_pulse", "power_pulse.count: must be >= 1"),
    ({"power = 0.5": "power_table = [[0, 1], [2, 2], [1, 3]]"}, 'shape "pad"',
     "power_table", "power_table: table times must increase"),
    ({"power = 0.5": "power_table = [[-1, 1], [2, 2]]"}, 'shape "pad"', "power_table",
     "power_table[0] time: must be >= 0 s"),
    ({"power = 0.5": "power_steps = [[0, 1]]\npower_table = [[0, 1]]"}, 'shape "pad"',
     "power_steps", "give at most one of"),
    ({"power = 0.5": "power_density = 1\npower_steps = [[0, 1]]"}, 'shape "pad"',
     "power_density", "drop power_density"),
    ({"ambient = 40": "ambient = 40\nambient_table = [[0, 40], [0, 50]]"}, 'boundary "air"',
     "ambient_table", "ambient_table: table times must increase"),
    ({"ambient = 40": "ambient = 40\ntemperature_table = [[0, 40]]"}, 'boundary "air"',
     "temperature_table", "temperature_table needs temperature"),
    ({"ambient = 40": "ambient = 40\nh_table = [[0, 0]]"}, 'boundary "air"', "h_table",
     "h_table[0] value: must be > 0"),
]


@pytest.mark.parametrize("replace, entry, needle, reason", ERRORS)
def test_errors_name_entry_and_line(replace, entry, needle, reason):
    src = text(replace)
    with pytest.raises(ModelError) as info:
        heat2d.parse(src, source="t.toml")
    msg = str(info.value)
    assert msg.startswith(f"t.toml: {entry}: "), msg
    assert reason in msg, msg
    assert info.value.line == line_of(src, needle), msg


def test_schedules_need_a_transient_section():
    steady = {"[transient]\nend = 100\n": ""}
    src = text({**steady, "power = 0.5": "power_pulse = { power = 1, width = 1 }"})
    with pytest.raises(ModelError, match=r'shape "pad": power_pulse needs a \[transient\] '
                       r"section .*\(line \d+\)") as info:
        heat2d.parse(src)
    assert info.value.line == line_of(src, "power_pulse")
    src = text({**steady, "ambient = 40": "ambient = 40\nh_table = [[0, 1], [1, 2]]"})
    with pytest.raises(ModelError, match=r'boundary "air": h_table needs a \[transient\]'):
        heat2d.parse(src)


def test_initial_ambient_is_ambiguous_with_different_ambients():
    src = text({"end = 100": "end = 100\ninitial = \"ambient\""},
               extra='\n[[boundary]]\nname = "rail"\non = "board.left"\ntemperature = 50\n')
    with pytest.raises(ModelError, match=r'\[transient\]: initial: "ambient" is ambiguous'
                       ) as info:
        heat2d.parse(src)
    assert info.value.line == line_of(src, "initial =")
    # The same temperatures at t = 0 (one through its table) are not ambiguous.
    same = text({"end = 100": "end = 100\ninitial = \"ambient\""},
                extra='\n[[boundary]]\nname = "rail"\non = "board.left"\ntemperature = 50\n'
                      'temperature_table = [[0, 40], [1, 50]]\n')
    assert heat2d.parse(same).transient.start_temperature == 40
