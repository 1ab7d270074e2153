"""Current-carrying conductors through the whole run: the summary's conductor figures,
the sweep of current, thermal runaway on the command line, and bad input.

References: Ohm's law R' = ρ/A per unit length and P = I²R' L, V = I R' L; the lumped
wire in convection θ = I²R₀Rθ/(1 − αI²R₀Rθ) with runaway at αI²R₀Rθ = 1 (derived from
Ohm's law and Newton's law of cooling, :mod:`heat2d.verify.joule_forms`).
"""

from __future__ import annotations

import csv
import json

import pytest

import heat2d
from heat2d import cli
from heat2d.errors import ThermalRunawayError

# A copper bar 4 × 1 mm in air, 100 mm long (the depth). k is raised so that the bar is
# isothermal to 1e-4 of its rise: the lumped law then holds.
BAR = """
[model]
length_unit = "mm"
depth = 100

[params]
current = 60

[materials.copper]
k = 1e4
resistivity = 1.724e-8
resistivity_reference = 20
temperature_coefficient = 0.00393

[[shape]]
name = "bar"
material = "copper"
rect = { x = 0, y = 0, width = 4, height = 1 }
current = "current"

[[boundary]]
name = "air"
on = "exterior"
h = 20
ambient = 20

[mesh]
size = 0.25
"""

AREA = 4e-6                  # m²
PERIMETER = 10e-3            # m
DEPTH = 0.1                  # m
RHO, ALPHA, H = 1.724e-8, 0.00393, 20.0


def lumped_rise(current: float) -> float:
    """θ = x/(1 − αx), x = I²R₀Rθ per unit length: R₀ = ρ/A, Rθ = 1/(hP)."""
    x = current**2 * (RHO / AREA) / (H * PERIMETER)
    return x / (1 - ALPHA * x)


def test_summary_gives_each_conductors_resistance_loss_and_drop():
    result = heat2d.solve(heat2d.parse(BAR), estimate=False)
    c = result.summary["conductors"]["bar"]
    rise = lumped_rise(60.0)
    assert c["max_rise_k"] == pytest.approx(rise, rel=2e-3)
    hot = RHO * (1 + ALPHA * c["mean_rise_k"]) / AREA                 # Ω/m at its temperature
    assert c["resistance_ohm_per_m"] == pytest.approx(hot, rel=1e-4)
    assert c["cold_resistance_ohm_per_m"] == pytest.approx(RHO / AREA, rel=1e-12)
    assert c["loss_w"] == pytest.approx(60.0**2 * c["resistance_ohm_per_m"] * DEPTH, rel=1e-9)
    assert c["voltage_v"] == pytest.approx(60.0 * c["resistance_ohm_per_m"] * DEPTH, rel=1e-9)
    eb = result.summary["energy_balance"]
    assert eb["power_in_w"] == pytest.approx(c["loss_w"], rel=1e-9)     # the loss is the input
    assert abs(eb["relative_error"]) < 1e-9
    assert "long and straight" in result.summary["caution"]
    # The °C/W matrix treats the conductor as a source.
    assert result.summary["thermal_resistance"]["sources"] == ["bar"]


def test_runaway_is_reported_with_its_onset_current():
    # Onset where αI²R₀Rθ = 1: I = sqrt(hP A/(αρ)).
    onset = (H * PERIMETER * AREA / (ALPHA * RHO)) ** 0.5               # 108.6 A
    with pytest.raises(ThermalRunawayError) as info:
        heat2d.solve(heat2d.parse(BAR).with_params(current=150), estimate=False)
    assert info.value.onset_a == pytest.approx(onset, rel=0.01)
    assert info.value.conductor == "bar"
    assert "thermal runaway" in info.value.message()


def test_runaway_on_the_command_line_is_one_line(tmp_path, capsys):
    path = tmp_path / "bar.toml"
    path.write_text(BAR, encoding="utf-8")
    out = tmp_path / "out"
    assert cli.main(["run", str(path), "--set", "current=150", "--out", str(out)]) == 1
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and "thermal runaway" in err[0] and 'conductor "bar"' in err[0]
    assert not out.exists()


def test_sweep_of_current_gives_the_rise_curve(tmp_path):
    path = tmp_path / "bar.toml"
    path.write_text(BAR, encoding="utf-8")
    out = tmp_path / "sweep"
    assert cli.main(["sweep", str(path), "--vary", "current=20,40,60,80", "--out", str(out),
                     "--quiet", "--png"]) == 0
    with open(out / "sweep.csv", newline="", encoding="utf-8") as f:
        rows = list(csv.DictReader(f))
    for row in rows:
        current = float(row["current"])
        assert float(row["conductor_max_rise_k:bar"]) == pytest.approx(lumped_rise(current),
                                                                      rel=5e-3)
    assert (out / "sweep.png").stat().st_size > 10_000


BAD = [
    ('k = 1e4\nresistivity = 1.724e-8\n', 'k = 1e4\nresistivity = -1.724e-8\n', "copper"),
    ('k = 1e4\nresistivity = 1.724e-8\nresistivity_reference = 20\n'
     'temperature_coefficient = 0.00393\n', "k = 1e4\n", "copper"),
    ('material = "copper"\n', 'void = true\n', "bar"),
]


@pytest.mark.parametrize(("old", "new", "entry"), BAD)
def test_bad_current_input_exits_2(tmp_path, capsys, old, new, entry):
    assert old in BAR
    path = tmp_path / "bad.toml"
    path.write_text(BAR.replace(old, new), encoding="utf-8")
    out = tmp_path / "out"
    assert cli.main(["run", str(path), "--out", str(out)]) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and entry in err[0] and "line" in err[0]
    assert not out.exists()


def test_summary_json_holds_the_conductors(tmp_path):
    path = tmp_path / "bar.toml"
    path.write_text(BAR, encoding="utf-8")
    out = tmp_path / "out"
    assert cli.main(["run", str(path), "--out", str(out), "--quiet"]) == 0
    summary = json.loads((out / "summary.json").read_text())
    assert set(summary["conductors"]["bar"]) >= {
        "current_a", "resistance_ohm_per_m", "cold_resistance_ohm_per_m", "loss_w",
        "voltage_v", "mean_c", "max_c", "max_rise_k"}
    assert "bar" in (out / "summary.txt").read_text()
