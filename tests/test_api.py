"""The Python API: load, build and change models, solve, read and save results.

Also runs the examples of docs/python-api.md (doctest), so the documentation cannot
drift from the code.
"""

from __future__ import annotations

import dataclasses
import doctest
import json
from pathlib import Path

import meshio
import numpy as np
import pytest

import heat2d
from heat2d import ModelError, cli
from heat2d.sweep import input_digest
from tests.common import board

ROOT = Path(__file__).resolve().parent.parent


def test_python_api_doc_examples_run(monkeypatch):
    # The page's paths are relative to the repository's top folder.
    monkeypatch.chdir(ROOT)
    failures, tried = doctest.testfile(str(ROOT / "docs" / "python-api.md"),
                                       module_relative=False, report=True,
                                       optionflags=doctest.REPORT_NDIFF)
    assert tried > 40 and failures == 0


def test_load_applies_params_like_set():
    model = heat2d.load(ROOT / "models" / "control_board.toml",
                        params={"p_die": 2, "via_pitch": "1.1"})
    assert isinstance(model, heat2d.Model)
    params = dict(model.params)
    assert params["p_die"] == 2.0 and params["via_pitch"] == 1.1
    assert model.shape("die").power == 2.0
    # w_via = pi ((d/2)^2 - (d/2 - plating)^2) / via_pitch follows the new pitch
    # (control_board.toml [params]).
    w = np.pi * ((0.3 / 2) ** 2 - (0.3 / 2 - 0.025) ** 2) / 1.1
    assert params["w_via"] == pytest.approx(w, rel=1e-15)
    with pytest.raises(ModelError, match=r'param "p_dye": no such parameter in \[params\]'):
        heat2d.load(ROOT / "models" / "control_board.toml", params={"p_dye": 2})


def test_a_model_is_frozen():
    model = heat2d.parse(board())
    with pytest.raises(dataclasses.FrozenInstanceError):
        model.depth = 5


def test_python_edits_give_the_model_the_same_text_would():
    # Each with_... call against the same change written into the model text; the input
    # digest compares every resolved value, ignoring only file name and line numbers.
    base = heat2d.parse(board())
    edited = (base.with_params(power=0.8)
              .with_material("aluminium", k=200, note="heat sink")
              .with_shape(name="sink", material="aluminium",
                          rect={"x": 8, "y": 1.67, "width": 4, "height": 2})
              .with_boundary(name="air", on="exterior", h=25, ambient=35)
              .with_probe("sink_top", (10, 3.67)))
    text = board({"power = 0.5\n": "power = 0.8\n",
                  "h = 10\nambient = 40": "h = 25\nambient = 35",
                  "[[boundary]]\nname = \"rail\"": (
                      '[materials.aluminium]\nk = 200\nnote = "heat sink"\n\n'
                      '[[shape]]\nname = "sink"\nmaterial = "aluminium"\n'
                      'rect = { x = 8, y = 1.67, width = 4, height = 2 }\n\n'
                      '[[boundary]]\nname = "rail"')},
                 extra='\n[[probe]]\nname = "sink_top"\nat = [10, 3.67]\n')
    assert input_digest(edited) == input_digest(heat2d.parse(text))
    assert input_digest(edited) != input_digest(base)
    assert base.shape("pad").power == 0.5                  # the original is untouched
    with pytest.raises(ModelError, match=r'shape "sink": material: unknown material'):
        base.with_shape(name="sink", material="unobtainium", rect={"x": 0, "y": 0,
                                                                   "width": 1, "height": 1})


SLAB = """
[model]
length_unit = "mm"
depth = 1000

[materials.m]
k = 2

[[shape]]
name = "slab"
material = "m"
rect = { x = 0, y = 0, width = 10, height = 2 }

[[boundary]]
name = "hot"
on = "slab.left"
temperature = 100

[[boundary]]
name = "cold"
on = "slab.right"
temperature = 0
"""


def test_result_fields_on_a_slab_with_an_exact_linear_solution():
    # Plane wall, fixed faces, insulated sides (Incropera 6th ed. §3.1): T = 100 (1 − x/L),
    # q″ = k ΔT / L = 2 × 100 / 0.01 = 20 000 W/m², q′ = q″ × 2 mm = 40 W per metre of
    # depth. The solution is linear, so linear triangles reproduce it to round-off
    # (patch test); 1e-9 relative leaves room for the sparse solve's rounding.
    result = heat2d.solve(heat2d.parse(SLAB), estimate=False)
    mesh = result.mesh
    x = mesh.points[:, 0]
    assert result.temperature == pytest.approx(100 * (1 - x / 10), abs=1e-9 * 100)
    assert result.heat_flux.shape == (len(mesh.triangles), 2)
    assert result.heat_flux[:, 0] == pytest.approx(20_000, rel=1e-9)
    assert result.heat_flux[:, 1] == pytest.approx(0, abs=1e-9 * 20_000)
    assert result.summary["boundaries"]["cold"]["heat_out_w"] == pytest.approx(40, rel=1e-9)
    assert result.temperature_at(2.5, 1.3) == pytest.approx(75, rel=1e-9)
    # The attributes are the summary's figures.
    assert result.max_temperature == result.summary["temperature"]["max"]
    assert result.hot_spot == result.summary["hot_spot"]
    assert result.max_temperature == pytest.approx(100, rel=1e-12)
    # At a node the interpolation returns that node's value (barycentric weight 1).
    k = len(mesh.points) // 2
    assert result.temperature_at(*mesh.points[k]) == pytest.approx(result.temperature[k],
                                                                   rel=1e-12)
    with pytest.raises(ValueError, match=r"not in the body"):
        result.temperature_at(11, 1)


def test_save_writes_what_the_command_line_writes(tmp_path):
    path = tmp_path / "board.toml"
    path.write_text(board(), encoding="utf-8")
    assert cli.main(["run", str(path), "--out", str(tmp_path / "cli"), "--quiet"]) == 0
    result = heat2d.solve(heat2d.load(path))
    files = result.save(tmp_path / "api")
    assert sorted(f.name for f in files) == sorted(p.name for p in (tmp_path / "cli").iterdir())
    a = json.loads((tmp_path / "api" / "summary.json").read_text())
    b = json.loads((tmp_path / "cli" / "summary.json").read_text())
    a.pop("timings_s"), b.pop("timings_s")
    assert a == b                        # same model, same mesh, same arithmetic: identical
    va, vb = meshio.read(tmp_path / "api" / "board.vtu"), meshio.read(tmp_path / "cli" / "board.vtu")
    assert np.array_equal(va.point_data["temperature"], vb.point_data["temperature"])
    assert np.array_equal(va.point_data["temperature"], result.temperature)
