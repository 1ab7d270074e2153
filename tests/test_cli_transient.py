"""The command line on transient models: the files of a run, a sweep's transient columns,
and bad input (exit 2, one line naming the entry and the line, nothing written)."""

from __future__ import annotations

import csv
import json
import xml.etree.ElementTree as ET

import meshio
import numpy as np
import pytest

from heat2d import cli
from tests.common import board

CAPACITY = {
    "ky = 0.34\n": "ky = 0.34\ndensity = 1900\nspecific_heat = 1150\n",
    "k = 385\n": "k = 385\ndensity = 8933\nspecific_heat = 385\n",
}
"""FR-4 (from memory) and copper (Incropera 6th ed. Table A.1) heat capacities."""

PULSE = {'power = "power"\n': 'power = "power"\n'
         'power_pulse = { power = 5, width = 0.01, period = 0.05, count = 3 }\n'}

TRANSIENT = """
[mesh]
size = 0.8

[transient]
end = 10
first = 1e-3
per_decade = 5
snapshots = [0.01, 1, 10]
"""


def transient_board(replace: dict[str, str] | None = None, extra: str = TRANSIENT) -> str:
    return board({**CAPACITY, **PULSE, **(replace or {})}, extra=extra)


@pytest.fixture
def model_file(tmp_path):
    path = tmp_path / "pulsed.toml"
    path.write_text(transient_board(), encoding="utf-8")
    return path


def test_run_writes_the_time_series(model_file, tmp_path, capsys):
    out = tmp_path / "out"
    assert cli.main(["run", str(model_file), "--out", str(out)]) == 0
    names = sorted(p.name for p in out.iterdir())
    for name in ("summary.json", "summary.txt", "transient.csv", "rc_networks.csv",
                 "rc_networks.json", "pulsed.pvd", "pulsed.vtu", "pulsed.png",
                 "pulsed_history.png", "pulsed_zth.png", "pulsed_duty.png"):
        assert name in names
    summary = json.loads((out / "summary.json").read_text())
    assert summary["mode"] == "transient"
    peak = summary["transient"]["peaks"]["pad"]
    # The pad's peak is at the end of a pulse (0.01, 0.06 or 0.11 s).
    assert min(abs(peak["time_s"] - t) for t in (0.01, 0.06, 0.11)) < 1e-9
    assert summary["shapes"]["pad"]["max"] == peak["max"]
    # Energy in = stored + out over the run, and 3 pulses of 5 W for 10 ms on 0.5 W.
    eb = summary["energy_balance"]
    assert eb["energy_in_j"] == pytest.approx(0.5 * 10 + 3 * 4.5 * 0.01, rel=1e-9)
    assert eb["energy_in_j"] == pytest.approx(eb["stored_j"] + eb["heat_out_j"], rel=1e-6)
    # The CSV read back with the csv module has one row per report time, pulse edges in.
    with open(out / "transient.csv", newline="", encoding="utf-8") as f:
        rows = list(csv.DictReader(f))
    times = np.array([float(r["time_s"]) for r in rows])
    assert times[0] == 0 and times[-1] == pytest.approx(10)
    for edge in (0.01, 0.05, 0.06, 0.1, 0.11):
        assert np.abs(times - edge).min() < 1e-12
    assert max(float(r["pad max_c"]) for r in rows) == pytest.approx(peak["max"], abs=1e-9)
    # The .pvd collection (VTK's XML format) lists each snapshot VTU with its time.
    sets = ET.parse(out / "pulsed.pvd").getroot().find("Collection").findall("DataSet")
    assert [float(d.get("timestep")) for d in sets] == pytest.approx([0.01, 1, 10])
    last = meshio.read(out / sets[-1].get("file"))
    assert last.point_data["temperature"].shape == (summary["mesh"]["nodes"],)
    text = capsys.readouterr().out
    assert "CAUTION" in text and "pad" in text and "thermal impedance" in text


BAD = [
    ({'power = "power"\n': 'power = "power"\npower_table = [[0, 1], [0.1, 2]]\n'},
     "pad", "power_table"),
    ({'power = "power"\n': 'power_table = [[0, 1], [0.2, 2], [0.1, 3]]\n'}, "pad", "increase"),
    ({'power = "power"\n': 'power_pulse = { power = 5, width = 0.1, period = 0.05 }\n'},
     "pad", "period"),
    ({"k = 385\ndensity = 8933\nspecific_heat = 385\n": "k = 385\n"}, "copper",
     "density and specific_heat"),
]


@pytest.mark.parametrize(("change", "entry", "words"), BAD)
def test_bad_transient_input_exits_2_and_writes_nothing(tmp_path, capsys, change, entry,
                                                        words):
    text = board(CAPACITY, extra=TRANSIENT)
    for old, new in change.items():
        assert old in text, old
        text = text.replace(old, new)
    path = tmp_path / "bad.toml"
    path.write_text(text, encoding="utf-8")
    out = tmp_path / "out"
    assert cli.main(["run", str(path), "--out", str(out)]) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1
    assert str(path) in err[0] and entry in err[0] and words in err[0]
    assert "line" in err[0]
    assert not out.exists()


def test_negative_end_time_names_the_section(tmp_path, capsys):
    path = tmp_path / "bad.toml"
    path.write_text(transient_board(extra=TRANSIENT.replace("end = 10", "end = -1")),
                    encoding="utf-8")
    assert cli.main(["check", str(path)]) == 2
    err = capsys.readouterr().err
    assert "[transient]" in err and "end" in err


def test_sweep_gives_transient_columns(model_file, tmp_path):
    out = tmp_path / "sweep"
    assert cli.main(["sweep", str(model_file), "--vary", "power=0.5,1", "--out", str(out),
                     "--quiet"]) == 0
    with open(out / "sweep.csv", newline="", encoding="utf-8") as f:
        rows = list(csv.DictReader(f))
    assert len(rows) == 2
    assert "peak_c:pad" in rows[0]
    assert any(k.startswith("zth_k_per_w:pad@") for k in rows[0])
    low, high = (float(r["peak_c:pad"]) for r in rows)
    assert high > low
    # Linear model: the impedance per watt does not depend on the power.
    key = next(k for k in rows[0] if k.startswith("zth_k_per_w:pad@"))
    assert float(rows[0][key]) == pytest.approx(float(rows[1][key]), rel=1e-6)


TRACE = """
[model]
length_unit = "mm"
depth = 100
[materials.fr4]
kx = 1.06
ky = 0.34
density = 1900
specific_heat = 1150
[materials.copper]
k = 385
density = 8960
specific_heat = 385
resistivity = 1.724e-8
temperature_coefficient = 0.00393
[[shape]]
name = "board"
material = "fr4"
rect = { x = 0, y = 0, width = 10, height = 1.6 }
[[shape]]
name = "trace"
material = "copper"
rect = { x = 4.875, y = 1.6, width = 0.25, height = 0.035 }
current = 1
current_pulse = { current = 10, width = 0.01 }
[[boundary]]
name = "air"
on = "exterior"
h = 10
ambient = 25
[mesh]
size = 0.4
[transient]
end = 1
first = 1e-4
zth = false
"""


def test_a_current_pulse_reports_the_conductor_at_its_hottest(tmp_path):
    # 10 A for 10 ms through a 35 × 250 µm trace (1 A before and after): the trace is
    # hottest at the pulse's end, where Ohm's law gives loss = I² R' L and drop = I R' L.
    path = tmp_path / "trace.toml"
    path.write_text(TRACE, encoding="utf-8")
    out = tmp_path / "out"
    assert cli.main(["run", str(path), "--out", str(out), "--quiet"]) == 0
    summary = json.loads((out / "summary.json").read_text())
    assert summary["hot_spot"]["time_s"] == pytest.approx(0.01, rel=1e-9)
    c = summary["conductors"]["trace"]
    assert c["current_a"] == 10
    assert c["loss_w"] == pytest.approx(100 * c["resistance_ohm_per_m"] * 0.1, rel=1e-9)
    assert c["voltage_v"] == pytest.approx(10 * c["resistance_ohm_per_m"] * 0.1, rel=1e-9)
    # The resistance follows ρ(T) = ρ₂₀(1 + α(T − 20)) at the trace's mean temperature.
    rho = 1.724e-8 * (1 + 0.00393 * (c["mean_c"] - 20))
    assert c["resistance_ohm_per_m"] == pytest.approx(rho / (0.25e-3 * 35e-6), rel=1e-3)
    eb = summary["energy_balance"]
    assert eb["energy_in_j"] == pytest.approx(eb["stored_j"] + eb["heat_out_j"], rel=1e-8)
    assert "long and straight" in summary["caution"]


def test_a_periodic_peak_over_the_limit_is_warned(tmp_path):
    # Three pulses keep the pad under its 200 °C limit (peak about 172 °C), the same train
    # repeated for ever would not (about 385 °C): --strict passes, the summary warns.
    text = transient_board().replace("count = 3 }\n", "count = 3 }\nmax_temperature = 200\n")
    path = tmp_path / "limit.toml"
    path.write_text(text, encoding="utf-8")
    out = tmp_path / "out"
    assert cli.main(["run", str(path), "--out", str(out), "--strict", "--quiet"]) == 0
    summary = json.loads((out / "summary.json").read_text())
    assert summary["limits"]["pad"]["exceeded"] is False
    periodic = summary["transient"]["periodic"]["pad"]["peak"]
    assert periodic > 200 > summary["limits"]["pad"]["max"]
    assert any("repeated for ever" in w and "pad" in w for w in summary["warnings"])


def test_a_first_time_at_the_lower_limit_runs(tmp_path):
    # first = 1e-9 s (the documented lower limit): the duty family's shortest widths have
    # no converging periodic sum and are left out (null), the run itself succeeds.
    path = tmp_path / "tiny.toml"
    path.write_text(transient_board(extra=TRANSIENT.replace("first = 1e-3", "first = 1e-9")),
                    encoding="utf-8")
    out = tmp_path / "out"
    assert cli.main(["run", str(path), "--out", str(out), "--quiet"]) == 0
    duty = json.loads((out / "summary.json").read_text())["transient"]["duty"]["pad"]
    assert duty["single_pulse_k_per_w"][0] > 0
    assert all(v is None or v > 0 for row in duty["k_per_w"].values() for v in row)


def test_an_unpowered_run_is_balanced(tmp_path):
    # Nothing powered, started steady: every energy of the run is the solves' residue.
    text = transient_board({'power = "power"\n': "", **{k: "" for k in PULSE}})
    path = tmp_path / "cold.toml"
    path.write_text(text.replace('power_pulse = { power = 5, width = 0.01, period = 0.05, '
                                 'count = 3 }\n', ""), encoding="utf-8")
    out = tmp_path / "out"
    assert cli.main(["run", str(path), "--out", str(out), "--quiet"]) == 0
    summary = json.loads((out / "summary.json").read_text())
    assert summary["energy_balance"]["energy_in_j"] == 0
    assert not any("energy balance" in w for w in summary["warnings"])
