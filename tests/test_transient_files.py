"""Files of a transient run: the history CSV, the RC networks, the VTU series, the plots.

Everything written is read back with general-purpose readers (the csv module, json,
xml.etree, meshio, matplotlib.image) and compared with the arrays it was written from.
"""

from __future__ import annotations

import csv
import json
import xml.etree.ElementTree as ET
from types import SimpleNamespace

import numpy as np
import pytest
from common import board

import heat2d
from heat2d.errors import Heat2dError
from heat2d.fem.geometry import build_geometry
from heat2d.fem.mesh import build_mesh
from heat2d.post.writers import OutputFolderError
from heat2d.transient.files import (
    is_transient_output,
    networks_data,
    write_csv,
    write_networks,
    write_series,
    write_transient,
)
from heat2d.transient.network import Foster, cauer

PAD = 'pad, "top"'
"""A shape name with a comma and quotes: the CSV must quote it (RFC 4180 §2.6, §2.7)."""

R = np.array([2.0, 5.0, 10.0])
TAU = np.array([1e-3, 0.05, 2.0])


def foster_peaks(r, tau, widths, duties) -> np.ndarray:
    """Single-pulse and periodic-peak rise per watt of a Foster network.

    Each term is a first-order lag: its periodic steady state under pulses of width tp and
    period T peaks at R (1 − e^{−tp/τ}) / (1 − e^{−T/τ}) (geometric series of the pulse
    responses; any linear-systems text, e.g. Incropera §5.2's lumped response superposed).
    """
    w = np.asarray(widths)[:, None]
    rows = [(r * -np.expm1(-w / tau)).sum(axis=1)]
    for d in duties:
        rows.append((r * -np.expm1(-w / tau) / -np.expm1(-(w / d) / tau)).sum(axis=1))
    return np.array(rows)


@pytest.fixture(scope="module")
def result():
    model = heat2d.parse(board({'name = "pad"': f"name = '{PAD}'"},
                               extra='\n[[probe]]\nname = "edge"\nat = [1, 0.8]\n'))
    mesh = build_mesh(build_geometry(model))
    times = np.concatenate([[0.0], np.geomspace(1e-4, 10.0, 31)])
    r = len(times)
    rise = 1 - np.exp(-times / 0.5)
    shape_max = np.column_stack([40 + 12 * rise, 40 + 20 * rise + np.pi * 1e-9])
    shape_mean = shape_max - np.array([1.0, 2.5]) * rise[:, None]
    probes = np.column_stack([40 + 8 * rise, 40 + 3 * rise ** 2])
    heat_out = np.column_stack([0.3 * rise, 0.2 * rise ** 1.5])
    snap_t = np.array([0.0, 1e-3, 0.1, 10.0])
    x = mesh.points[:, 0]
    snapshots = 40 + np.outer(1 - np.exp(-snap_t / 0.5), 1 + np.sin(x) / 3)
    history = SimpleNamespace(
        times=times, shape_max=shape_max, shape_mean=shape_mean, probes=probes,
        heat_out=heat_out, stored=0.5 * (1 - rise) * times, power_in=np.full(r, 0.5),
        snapshot_times=snap_t, snapshots=snapshots)
    foster = Foster(r=R, tau=TAU, error=0.0042, rms=0.0011)
    modal = Foster(r=R * 1.01, tau=TAU * 0.99)
    zt = np.geomspace(1e-5, 20.0, 41)
    widths = np.geomspace(1e-4, 1.0, 17)
    duties = (0.01, 0.1, 0.5)
    return SimpleNamespace(
        model=model, mesh=mesh, history=history, log_time=True,
        zth={PAD: (zt, foster.z(zt) * (1 + 0.003 * np.sin(np.log(zt))))},
        networks={PAD: {"foster": foster, "cauer": cauer(foster), "modal": modal}},
        duty={PAD: {"widths": widths, "duties": duties,
                    "peaks": foster_peaks(R, TAU, widths, duties)}},
        summary={"model": model.stem, "transient": {"zth": {PAD: {"r_k_per_w": 17.0}}}})


def test_csv_reads_back_exactly(result, tmp_path):
    path = tmp_path / "transient.csv"
    write_csv(result, path)
    with open(path, newline="", encoding="utf-8") as f:
        rows = list(csv.reader(f))
    assert rows[0] == ["time_s", f"{PAD} max_c", f"{PAD} mean_c", "centre_c", "edge_c",
                       "rail heat_out_w", "air heat_out_w", "stored_j", "power_in_w"]
    assert f'"{PAD.replace(chr(34), 2 * chr(34))} max_c"' in path.read_text().splitlines()[0]
    data = np.array(rows[1:], dtype=float)
    h = result.history
    expected = np.column_stack([h.times, h.shape_max[:, 1], h.shape_mean[:, 1], h.probes,
                                h.heat_out, h.stored, h.power_in])
    assert data.shape == expected.shape == (32, 9)
    np.testing.assert_array_equal(data, expected)     # repr floats: exact round trip


def test_series_lists_each_snapshot_with_its_time(result, tmp_path):
    import meshio

    names = write_series(result, tmp_path, "board")
    assert names == [f"board_{i:04d}.vtu" for i in range(4)] + ["board.pvd"]
    root = ET.parse(tmp_path / "board.pvd").getroot()
    assert root.tag == "VTKFile" and root.get("type") == "Collection"
    sets = root.findall("./Collection/DataSet")
    assert [d.get("file") for d in sets] == names[:-1]
    times = [float(d.get("timestep")) for d in sets]
    np.testing.assert_array_equal(times, result.history.snapshot_times)
    for i, d in enumerate(sets):
        back = meshio.read(tmp_path / d.get("file"))
        np.testing.assert_array_equal(back.points[:, :2], result.mesh.points)
        np.testing.assert_array_equal(back.point_data["temperature"],
                                      result.history.snapshots[i])
        np.testing.assert_array_equal(back.cell_data["shape_id"][0],
                                      result.mesh.triangle_shape)
        np.testing.assert_array_equal(back.cell_data["material_id"][0],
                                      result.mesh.triangle_material)


def test_networks_round_trip(result, tmp_path):
    write_networks(result, tmp_path / "rc_networks.csv", tmp_path / "rc_networks.json")
    data = json.loads((tmp_path / "rc_networks.json").read_text())
    assert data == networks_data(result)
    entry = data[PAD]
    ladder = result.networks[PAD]["cauer"]
    assert entry["foster"] == {"r_k_per_w": R.tolist(), "tau_s": TAU.tolist(),
                               "fit_error": 0.0042, "fit_rms": 0.0011}
    assert entry["cauer"] == {"r_k_per_w": ladder.r.tolist(), "c_j_per_k": ladder.c.tolist()}
    assert entry["modal"]["tau_s"] == (TAU * 0.99).tolist()
    assert entry["r_total_k_per_w"] == 17.0
    with open(tmp_path / "rc_networks.csv", newline="", encoding="utf-8") as f:
        rows = list(csv.DictReader(f))
    assert [(r["network"], r["index"]) for r in rows] == [
        (k, str(i)) for k in ("foster", "cauer", "modal") for i in (1, 2, 3)]
    assert {r["shape"] for r in rows} == {PAD}
    cauer_rows = [r for r in rows if r["network"] == "cauer"]
    np.testing.assert_array_equal([float(r["c_j_per_k"]) for r in cauer_rows], ladder.c)
    assert all(r["tau_s"] == "" for r in cauer_rows)
    np.testing.assert_array_equal([float(r["tau_s"]) for r in rows[:3]], TAU)


def test_write_transient_is_all_or_nothing(result, tmp_path):
    out = tmp_path / "run"

    def extra(folder):
        (folder / "summary.txt").write_text("table\n")
        return ["summary.txt"]

    files = write_transient(result, out, extra=extra, stem="board")
    names = sorted(p.name for p in files)
    assert names == sorted(["summary.json", "transient.csv", "rc_networks.csv",
                            "rc_networks.json", "board_0000.vtu", "board_0001.vtu",
                            "board_0002.vtu", "board_0003.vtu", "board.pvd",
                            "board_history.png", "board_zth.png", "board_duty.png",
                            "summary.txt"])
    assert sorted(p.name for p in out.iterdir()) == names
    assert all(is_transient_output(n) for n in names)
    assert json.loads((out / "summary.json").read_text()) == result.summary
    before = {p.name: p.read_bytes() for p in out.iterdir()}

    def failing(folder):
        (folder / "half.txt").write_text("x")
        raise RuntimeError("disk full")

    changed = SimpleNamespace(**{**vars(result), "summary": {"other": 1}})
    with pytest.raises(RuntimeError, match="disk full"):
        write_transient(changed, out, extra=failing, stem="board")
    assert {p.name: p.read_bytes() for p in out.iterdir()} == before
    assert sorted(p.name for p in tmp_path.iterdir()) == ["run"]     # no scratch left

    (out / "notes.txt").write_text("mine")                          # the user's own file
    with pytest.raises(OutputFolderError, match="notes.txt"):
        write_transient(result, out, formats=["csv"])
    assert (out / "summary.json").read_bytes() == before["summary.json"]


def test_names_and_formats(result, tmp_path):
    for name in ("transient.csv", "rc_networks.json", "x_history.png", "x_0012.vtu",
                 "x.pvd", "x.vtu", "summary.txt"):
        assert is_transient_output(name), name
    for name in ("notes.txt", "x_12.vtu.bak", "rc_networks.xlsx"):
        assert not is_transient_output(name), name
    with pytest.raises(Heat2dError, match="unknown output format 'pdf'"):
        write_transient(result, tmp_path / "o", formats=["pdf"])
    files = write_transient(result, tmp_path / "o", formats=["csv"], stem="s")
    assert [p.name for p in files] == ["transient.csv"]


def _check_png(path) -> None:
    from matplotlib.image import imread

    assert path.stat().st_size > 20_000
    image = imread(path)
    colours = np.unique(image.reshape(-1, image.shape[-1]), axis=0)
    assert image.shape[0] > 400 and image.shape[1] > 700
    assert len(colours) > 50                          # drawn, not a blank canvas


def test_plots_are_drawn(result, tmp_path):
    from heat2d.transient.plots import plot_duty, plot_history, plot_zth

    for func in (plot_history, plot_zth, plot_duty):
        path = tmp_path / f"{func.__name__}.png"
        func(result, path)
        _check_png(path)
    linear = SimpleNamespace(**{**vars(result), "log_time": False})
    plot_history(linear, tmp_path / "linear.png")      # t = 0 kept on a linear axis
    _check_png(tmp_path / "linear.png")



def test_group_conductor_columns(result):
    """A conductor made of several shapes reports the max over its members and their
    volume-weighted mean; the volumes are the drawn rectangles (board 20 mm × 1.6 mm, pad
    4 mm × 0.07 mm: the mesh covers each exactly)."""
    from heat2d.transient.files import shape_columns

    model = result.model
    fake = SimpleNamespace(
        shapes=model.shapes, probes=model.probes, boundaries=model.boundaries,
        axisymmetric=False, conductors=(("both", model.shapes, 1.0),),
        members=lambda name: model.shapes if name == "both" else (model.shape(name),))
    cols = shape_columns(SimpleNamespace(**{**vars(result), "model": fake}))
    assert list(cols) == [PAD, "both"]
    h = result.history
    top, mean = cols["both"]
    np.testing.assert_array_equal(top, h.shape_max.max(axis=1))
    area = np.array([20 * 1.6, 4 * 0.07])
    np.testing.assert_allclose(mean, h.shape_mean @ area / area.sum(), rtol=1e-12)
