"""The command line end to end, in-process: outputs, exit codes and one-line errors."""

from __future__ import annotations

import json

import meshio
import numpy as np
import pytest

from heat2d import cli
from tests.common import board


@pytest.fixture
def model_file(tmp_path):
    path = tmp_path / "board.toml"
    path.write_text(board(), encoding="utf-8")
    return path


def test_run_writes_the_contract_outputs(model_file, tmp_path, capsys):
    out = tmp_path / "out"
    assert cli.main(["run", str(model_file), "--out", str(out)]) == 0
    assert sorted(p.name for p in out.iterdir()) == ["board.png", "board.vtu", "summary.json",
                                                     "summary.txt"]
    summary = json.loads((out / "summary.json").read_text())
    # model-format.md: the keys every release writes.
    for key in ("temperature", "hot_spot", "shapes", "boundaries", "energy_balance", "probes",
                "mesh"):
        assert key in summary
    assert set(summary["hot_spot"]) >= {"x", "y", "temperature", "shape"}
    assert summary["hot_spot"]["shape"] == "pad"
    assert set(summary["shapes"]["pad"]) >= {"min", "mean", "max", "power_w"}
    assert summary["shapes"]["pad"]["power_w"] == pytest.approx(0.5, rel=1e-12)
    assert summary["boundaries"]["rail"]["mean_temperature"] == pytest.approx(50.0, abs=1e-12)
    # Heat leaves through rail and air; together they carry the 0.5 W (energy conservation).
    out_w = sum(b["heat_out_w"] for b in summary["boundaries"].values())
    assert out_w == pytest.approx(0.5, rel=1e-9)
    assert abs(summary["energy_balance"]["relative_error"]) < 1e-9
    assert "Estimates only" in summary["caution"]

    vtu = meshio.read(out / "board.vtu")
    assert len(vtu.points) == summary["mesh"]["nodes"]
    assert vtu.points.shape[1] == 3 and np.all(vtu.points[:, 2] == 0)
    t = vtu.point_data["temperature"]
    assert t.max() == pytest.approx(summary["temperature"]["max"], abs=1e-9)
    flux = vtu.cell_data["heat_flux"][0]
    assert flux.shape == (summary["mesh"]["triangles"], 3)
    assert set(np.unique(vtu.cell_data["shape_id"][0])) == {0, 1}
    assert summary["ids"]["shape"] == ["board", "pad"]

    text = (out / "summary.txt").read_text()
    assert "CAUTION" in text and "pad" in text
    printed = capsys.readouterr().out
    assert "Hot spot" in printed and "CAUTION" in printed
    assert (out / "board.png").read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"


def test_set_overrides_a_param(model_file, tmp_path):
    out1, out2 = tmp_path / "a", tmp_path / "b"
    assert cli.main(["run", str(model_file), "--out", str(out1), "--quiet"]) == 0
    assert cli.main(["run", str(model_file), "--out", str(out2), "--quiet",
                     "--set", "power=1.0"]) == 0
    s1 = json.loads((out1 / "summary.json").read_text())
    s2 = json.loads((out2 / "summary.json").read_text())
    # Linear model: doubling the only power doubles every rise above the same boundary state.
    rise1 = s1["probes"]["centre"] - 40.0
    assert s2["shapes"]["pad"]["power_w"] == pytest.approx(1.0)
    assert s2["probes"]["centre"] > s1["probes"]["centre"]
    assert rise1 > 0


@pytest.mark.parametrize("change, message", [
    ({"k = 385": "k = -1"}, r'material "copper": k: must be > 0'),
    ({'on = "board.left"': 'on = "pad.bottom"'}, r'boundary "rail": on = .* selects no exposed'),
    ({"at = [10, 0.8]": "at = [10, 9]"}, r'probe "centre": at = \[10, 9\] is not inside'),
    ({"h = 10\nambient = 40": "heat_flux = 0", "temperature = 50": "heat_flux = 10"},
     r"\[\[boundary\]\]: the body \(shapes: board, pad\) has no fixed-temperature, convection"),
])
def test_bad_model_exits_2_with_one_line_and_writes_nothing(tmp_path, capsys, change, message):
    path = tmp_path / "bad.toml"
    path.write_text(board(change), encoding="utf-8")
    out = tmp_path / "out"
    assert cli.main(["run", str(path), "--out", str(out)]) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1
    assert err[0].startswith(f"error: {path}: ")
    import re
    assert re.search(message, err[0]), err[0]
    assert not out.exists()


def test_bad_set_argument_exits_2(model_file, tmp_path, capsys):
    assert cli.main(["run", str(model_file), "--set", "power", "--out", str(tmp_path / "o")]) == 2
    assert capsys.readouterr().err.strip() == "error: --set: expected NAME=VALUE, got 'power'"
    assert cli.main(["run", str(model_file), "--set", "watts=3"]) == 2
    assert 'param "watts": no such parameter' in capsys.readouterr().err


def test_internal_failure_exits_1_without_traceback(model_file, tmp_path, capsys, monkeypatch):
    import heat2d.pipeline

    def broken(*args, **kwargs):
        raise RuntimeError("boom")

    monkeypatch.setattr(heat2d.pipeline.chain, "solve", broken)
    out = tmp_path / "out"
    assert cli.main(["run", str(model_file), "--out", str(out)]) == 1
    err = capsys.readouterr().err
    assert err.strip() == ("internal error: RuntimeError: boom (run with --debug for details)")
    assert not out.exists()
    assert cli.main(["run", str(model_file), "--out", str(out), "--debug"]) == 1
    assert "Traceback" in capsys.readouterr().err


def test_failed_writer_leaves_nothing_half_written(model_file, tmp_path, monkeypatch):
    import heat2d.post.writers

    def broken(result, path):
        raise OSError("disk full")

    monkeypatch.setitem(heat2d.post.writers.WRITERS, "png", ("{stem}.png", broken))
    out = tmp_path / "out"
    assert cli.main(["run", str(model_file), "--out", str(out), "--quiet"]) == 1
    # No previous result: the folder stays absent, with no scratch sibling left beside it.
    assert not out.exists()
    assert [p.name for p in tmp_path.iterdir() if p.name.startswith(".out.")] == []


def test_check_lists_shapes_boundaries_and_mesh(model_file, capsys):
    assert cli.main(["check", str(model_file)]) == 0
    text = capsys.readouterr().out
    assert "model is valid" in text
    assert "board" in text and "fr4" in text and "0.28" in text      # pad area 4 × 0.07 mm²
    assert "rail" in text and "1.6" in text
    assert "smallest angle" in text


def test_python_dash_m_entry_point():
    import subprocess
    import sys

    proc = subprocess.run([sys.executable, "-m", "heat2d", "--version"], capture_output=True,
                          text=True, check=False)
    assert proc.returncode == 0 and proc.stdout.startswith("heat2d ")
