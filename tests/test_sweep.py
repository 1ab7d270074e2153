"""Parameter sweeps: the table against single runs, reuse, skipping, failures, parallel runs.

Tolerance used throughout, ``ROUND_OFF`` = 1e-9 relative: a sweep reuses the mesh and
either the very factorization of an earlier variant (the same floating-point operations
as a fresh solve) or a refactorization with its stored ordering, which differs from a
fresh factorization only in rounding. On these ~700-node models the conduction matrix
has a condition number below ~1e6, so such differences stay near 1e-16 x 1e6 = 1e-10 at
worst; 1e-9 leaves a margin without hiding a wrong value (a real error here is
percent-sized).
"""

from __future__ import annotations

import itertools
import json

import pytest

import heat2d
from heat2d import ModelError, cli
from heat2d.sweep import SweepProgress, parse_values, read_csv, sweep
from tests.common import board

ROUND_OFF = 1e-9

# The shared board with a convection coefficient as a param and a limit on the pad.
SWEEP_BOARD = board({"power = 0.5\n": "power = 0.5\nh_air = 10\n",
                     "h = 10\nambient": 'h = "h_air"\nambient',
                     'power = "power"\n': 'power = "power"\nmax_temperature = 125\n'})


@pytest.fixture
def model_file(tmp_path):
    path = tmp_path / "board.toml"
    path.write_text(SWEEP_BOARD, encoding="utf-8")
    return path


def run_sweep(model_file, *args: str) -> int:
    return cli.main(["sweep", str(model_file), *args])


def assert_same_table(rows, reference):
    """Equal row by row: text exactly, numbers to ROUND_OFF; solve times differ by nature."""
    assert len(rows) == len(reference)
    for row, ref in zip(rows, reference, strict=True):
        assert list(row) == list(ref)
        for key, value in ref.items():
            if key == "solve_time_s":
                continue
            if isinstance(value, float):
                assert row[key] == pytest.approx(value, rel=ROUND_OFF), (ref["variant"], key)
            else:
                assert row[key] == value, (ref["variant"], key)


# -- reading --vary ------------------------------------------------------------------


def test_value_lists_and_ranges():
    assert parse_values("5,10,20") == [5.0, 10.0, 20.0]
    # start:stop:count includes both ends; steps are rounded to 12 digits so a 0.1 step
    # gives exactly the decimals a user would type with --set.
    assert parse_values("0.1:0.3:3") == [0.1, 0.2, 0.3]
    assert parse_values("0,1:2:3") == [0.0, 1.0, 1.5, 2.0]
    assert parse_values("3:3:1") == [3.0]
    # Expressions stay text (evaluated per variant); commas inside calls do not split.
    assert parse_values("2*t, min(1, 2)") == ["2*t", "min(1, 2)"]


@pytest.mark.parametrize("args, message", [
    (["--vary", "watts=1,2"], r'--vary watts: no such parameter in \[params\] to vary \(known: t, power, h_air\)'),
    (["--vary", "power="], r"--vary power: empty value list"),
    (["--vary", "power=1,,2"], r"--vary power: empty value in '1,,2'"),
    (["--vary", "power=1:2"], r"--vary power: malformed range '1:2': expected start:stop:count"),
    (["--vary", "power=1:2:x"], r"malformed range '1:2:x': expected start:stop:count"),
    (["--vary", "power=1:2:0"], r"malformed range '1:2:0': count must be a whole number >= 1, got 0"),
    (["--vary", "power=1:2:2.5"], r"count must be a whole number >= 1, got 2.5"),
    (["--vary", "power"], r"--vary: expected NAME=V1,V2,... or NAME=start:stop:count, got 'power'"),
    (["--vary", "power=1", "--vary", "power=2"], r"--vary power: given twice"),
    (["--vary", "power=2*watts"], r"--vary power: unknown name 'watts'"),
    (["--vary", "power=1,2", "--vary", "h_air=5", "--zip"], r"--zip needs lists of one length \(power: 2, h_air: 1\)"),
    (["--vary", "power=1", "--jobs", "0"], r"--jobs: must be a whole number >= 1, got 0"),
    (["--vary", "power=1", "--cluster", "tcp://127.0.0.1:1", "--cluster-timeout", "1"],
     r"--cluster: cannot use the Dask cluster at tcp://127.0.0.1:1: "),
])
def test_bad_sweep_input_exits_2_before_anything_runs(model_file, tmp_path, capsys, monkeypatch,
                                                      args, message):
    import re

    import heat2d.pipeline

    if "--cluster" in args:
        pytest.importorskip("distributed")
    solved = []
    monkeypatch.setattr(heat2d.pipeline.chain, "build_geometry", lambda *a, **k: solved.append(1))
    out = tmp_path / "out"
    assert run_sweep(model_file, *args, "--out", str(out)) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and err[0].startswith("error: "), err
    assert re.search(message, err[0]), err[0]
    assert not out.exists() and not solved


def test_cluster_without_the_optional_dependency_exits_2(model_file, tmp_path, capsys,
                                                          monkeypatch):
    import sys

    monkeypatch.setitem(sys.modules, "distributed", None)        # import fails
    out = tmp_path / "out"
    assert run_sweep(model_file, "--vary", "power=1", "--cluster", "tcp://127.0.0.1:8786",
                     "--out", str(out)) == 2
    assert capsys.readouterr().err.strip() == (
        "error: --cluster: running on a cluster needs the optional dependency "
        "'distributed': pip install \"heat2d[cluster]\"")
    assert not out.exists()


def test_library_raises_model_error_for_bad_vary(tmp_path):
    model = heat2d.parse(SWEEP_BOARD)
    with pytest.raises(ModelError, match=r"--vary watts: no such parameter"):
        sweep(model, {"watts": [1]}, out=tmp_path / "out")
    with pytest.raises(ModelError, match=r"--vary power: empty value list"):
        sweep(model, {"power": []}, out=tmp_path / "out")
    with pytest.raises(ModelError, match=r"malformed range '1:2'"):
        sweep(model, {"power": "1:2"}, out=tmp_path / "out")
    assert not (tmp_path / "out").exists()


# -- the table against single runs ------------------------------------------------------


def test_every_row_equals_a_single_heat2d_run(model_file, tmp_path):
    out = tmp_path / "sweep"
    # --set applies to every variant; power changes only the load vector (the sweep
    # reuses the factorization), h_air the matrix (it refactorizes on the same mesh).
    assert run_sweep(model_file, "--vary", "power=0.5,1,1.5", "--vary", "h_air=10,25",
                     "--set", "t=2", "--out", str(out), "--quiet") == 0
    rows = read_csv(out / "sweep.csv")
    # The full grid, first param slowest.
    assert [(r["power"], r["h_air"]) for r in rows] == list(
        itertools.product([0.5, 1.0, 1.5], [10.0, 25.0]))
    assert list(rows[0]) == ["variant", "power", "h_air", "max_temperature_c",
                             "hot_spot_shape", "probe:centre", "heat_out_w:rail",
                             "heat_out_w:air", "margin_k:pad", "solve_time_s", "status",
                             "error"]
    for row in rows:
        single = tmp_path / "single" / row["variant"]
        assert cli.main(["run", str(model_file), "--set", "t=2", "--set",
                         f"power={row['power']!r}", "--set", f"h_air={row['h_air']!r}",
                         "--out", str(single), "--quiet"]) == 0
        s = json.loads((single / "summary.json").read_text())
        expected = {"max_temperature_c": s["temperature"]["max"],
                    "probe:centre": s["probes"]["centre"],
                    "heat_out_w:rail": s["boundaries"]["rail"]["heat_out_w"],
                    "heat_out_w:air": s["boundaries"]["air"]["heat_out_w"],
                    "margin_k:pad": s["limits"]["pad"]["margin"]}
        for key, value in expected.items():
            assert row[key] == pytest.approx(value, rel=ROUND_OFF), (row["variant"], key)
        assert row["hot_spot_shape"] == s["hot_spot"]["shape"] == "pad"
        assert row["status"] == "ok" and row["error"] is None and row["solve_time_s"] > 0
        # The variant's own summary holds the same figures as the single run.
        own = json.loads((out / row["variant"] / "summary.json").read_text())
        assert own["temperature"]["max"] == pytest.approx(s["temperature"]["max"],
                                                          rel=ROUND_OFF)
        assert own["model"]["params"] == s["model"]["params"]
    assert sorted(p.name for p in (out / rows[0]["variant"]).iterdir()) == [
        "board.vtu", "inputs.json", "summary.json", "summary.txt"]
    assert (out / "sweep.png").read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"


def test_zip_pairs_the_lists_and_plots_one_line(tmp_path):
    model = heat2d.parse(SWEEP_BOARD)
    table = sweep(model, {"power": [0.5, 1.0, 1.5], "h_air": "10:30:3"}, zip=True)
    assert [(r["power"], r["h_air"]) for r in table.rows] == [(0.5, 10.0), (1.0, 20.0),
                                                              (1.5, 30.0)]
    assert len(table.plot().axes[0].get_lines()) == 1
    grid = sweep(model, {"power": [0.5, 1.0], "h_air": [10, 20, 30]})
    # One line per value of the second param, each over the first param's values.
    lines = grid.plot().axes[0].get_lines()
    assert len(lines) == 3 and all(len(line.get_xdata()) == 2 for line in lines)


# -- reuse ----------------------------------------------------------------------------


def test_values_only_variants_share_one_mesh_and_one_factorization_per_matrix(monkeypatch):
    import heat2d.fem.solver
    import heat2d.pipeline

    meshes, factors = [], []
    build_mesh, factor_init = heat2d.pipeline.chain.build_mesh, heat2d.fem.solver.Factor.__init__

    def counting_mesh(geometry):
        meshes.append(geometry)
        return build_mesh(geometry)

    def counting_factor(self, *args, **kwargs):
        factors.append(1)
        factor_init(self, *args, **kwargs)

    monkeypatch.setattr(heat2d.pipeline.chain, "build_mesh", counting_mesh)
    monkeypatch.setattr(heat2d.fem.solver.Factor, "__init__", counting_factor)
    model = heat2d.parse(SWEEP_BOARD)
    # h_air varies fastest in the grid, but the run order groups equal matrices: powers
    # only change the load vector, so 2 factorizations serve all 6 variants.
    table = sweep(model, {"power": [0.5, 1.0, 1.5], "h_air": [10, 25]})
    assert not table.failed
    assert len(meshes) == 1 and len(factors) == 2
    # A param that moves a shape edge needs a new mesh per value.
    meshes.clear()
    sweep(model, {"t": [1.6, 2.0], "power": [0.5, 1.0]})
    assert len(meshes) == 2
    # Reuse does not change the answers (ROUND_OFF): each variant against a fresh solve.
    for row in table.rows:
        fresh = heat2d.solve(model.with_params(power=row["power"], h_air=row["h_air"]),
                             estimate=False)
        assert row["max_temperature_c"] == pytest.approx(fresh.max_temperature,
                                                         rel=ROUND_OFF)


def test_estimate_column_equals_the_estimate_of_a_single_run():
    model = heat2d.parse(SWEEP_BOARD)
    table = sweep(model, {"power": [0.5, 1.0], "h_air": [10, 25]}, estimate=True)
    assert table.columns.index("max_temperature_error_k") == 4
    for row in table.rows:
        single = heat2d.solve(model.with_params(power=row["power"], h_air=row["h_air"]))
        # The estimate is built from differences between three meshes' figures (about
        # 1 K here) of temperatures near 100 °C, so ROUND_OFF in the temperatures can
        # become ~1e-7 relative in the estimate; 1e-6 allows for that.
        assert row["max_temperature_error_k"] == pytest.approx(
            single.summary["temperature"]["max_error"], rel=1e-6)
        assert row["max_temperature_c"] == pytest.approx(single.max_temperature,
                                                         rel=ROUND_OFF)


# -- failures, skipping ----------------------------------------------------------------


def test_a_failed_variant_is_recorded_and_the_others_run(model_file, tmp_path, capsys):
    out = tmp_path / "sweep"
    # t = 0: the board has no height (bad model for that value); t = 0.5: the probe at
    # y = 0.8 is above the thinner board (fails while solving); t = 1.6 is fine.
    assert run_sweep(model_file, "--vary", "t=0,0.5,1.6", "--out", str(out)) == 1
    rows = read_csv(out / "sweep.csv")
    assert [r["status"] for r in rows] == ["failed", "failed", "ok"]
    assert 'shape "board": rect.height: must be > 0, got 0' in rows[0]["error"]
    assert 'probe "centre": at = [10, 0.8] is not inside the body' in rows[1]["error"]
    assert rows[0]["max_temperature_c"] is None and rows[2]["max_temperature_c"] > 40
    captured = capsys.readouterr()
    assert "failed: t=0: " in captured.err and "failed: t=0.5: " in captured.err
    assert "3 variants: 1 ok, 2 failed" in captured.out
    assert not (out / "t=0").exists() or not (out / "t=0" / "inputs.json").exists()
    assert (out / "sweep.png").exists()


def test_rerun_skips_variants_whose_inputs_are_unchanged(model_file, tmp_path):
    out = tmp_path / "sweep"
    vary = {"power": [0.5, 1.0], "h_air": [10, 25]}

    def run(model, vary=vary, **options):
        events: list[SweepProgress] = []
        table = sweep(model, vary, out=out, progress=events.append, **options)
        return table, [e.row["variant"] for e in events if e.was_skipped]

    first, skipped = run(heat2d.load(model_file))
    assert skipped == [] and not first.failed
    again, skipped = run(heat2d.load(model_file))
    assert len(skipped) == 4
    assert_same_table(again.rows, first.rows)
    assert again.column("solve_time_s") == first.column("solve_time_s")      # read back
    # A longer list solves only the new values.
    _, skipped = run(heat2d.load(model_file), {"power": [0.5, 1.0, 2.0], "h_air": [10, 25]})
    assert len(skipped) == 4
    # Comments and layout are not inputs; a value that reaches the model is.
    model_file.write_text("# reworded notes\n\n" + SWEEP_BOARD, encoding="utf-8")
    _, skipped = run(heat2d.load(model_file))
    assert len(skipped) == 4
    model_file.write_text(SWEEP_BOARD.replace("k = 385", "k = 390"), encoding="utf-8")
    changed, skipped = run(heat2d.load(model_file))
    assert skipped == []
    assert changed.rows[0]["max_temperature_c"] != first.rows[0]["max_temperature_c"]
    stored = json.loads((out / "power=0.5,h_air=10" / "inputs.json").read_text())
    assert stored["row"]["max_temperature_c"] == changed.rows[0]["max_temperature_c"]
    # force runs everything; so does another option that changes the outputs (refine).
    _, skipped = run(heat2d.load(model_file), force=True)
    assert skipped == []
    _, skipped = run(heat2d.load(model_file), refine=1.5)
    assert skipped == []


def test_progress_bar_shows_variants_done_and_time_left(model_file, tmp_path, capsys):
    assert run_sweep(model_file, "--vary", "power=0.5,1,1.5", "--out",
                     str(tmp_path / "s")) == 0
    lines = capsys.readouterr().err.strip().splitlines()
    # stderr is not a terminal under pytest: one line per variant.
    assert len(lines) == 3
    assert "1/3 variants" in lines[0] and "left" in lines[0]
    assert "3/3 variants" in lines[-1] and "done in" in lines[-1]


# -- parallel and distributed ----------------------------------------------------------


def test_jobs_gives_the_serial_table(model_file, tmp_path):
    # Two geometries (t) with two powers each: each process gets one geometry.
    vary = ["--vary", "power=0.5,1", "--vary", "t=1.6,2"]
    assert run_sweep(model_file, *vary, "--out", str(tmp_path / "serial"), "--quiet") == 0
    assert run_sweep(model_file, *vary, "--jobs", "2", "--out", str(tmp_path / "jobs"),
                     "--quiet") == 0
    assert_same_table(read_csv(tmp_path / "jobs" / "sweep.csv"),
                      read_csv(tmp_path / "serial" / "sweep.csv"))


def test_dask_cluster_gives_the_serial_table(model_file, tmp_path):
    distributed = pytest.importorskip("distributed")
    vary = ["--vary", "power=0.5,1,1.5", "--vary", "h_air=10,25"]
    assert run_sweep(model_file, *vary, "--out", str(tmp_path / "serial"), "--quiet") == 0
    # Two single-thread workers in this process, reached over TCP on loopback like a
    # remote cluster (tasks and files are serialized both ways); worker processes would
    # add only their start-up time here (--jobs covers separate processes).
    with distributed.LocalCluster(host="127.0.0.1", n_workers=2, threads_per_worker=1,
                                  processes=False, protocol="tcp",
                                  dashboard_address=None) as cluster:
        out = tmp_path / "cluster"
        assert run_sweep(model_file, *vary, "--cluster", cluster.scheduler_address,
                         "--out", str(out), "--quiet") == 0
    rows = read_csv(out / "sweep.csv")
    assert_same_table(rows, read_csv(tmp_path / "serial" / "sweep.csv"))
    # The files came back from the workers; each worker built one mesh for its run of
    # variants and reused it for the rest (a reused mesh records no geometry time).
    fresh = 0
    for row in rows:
        folder = out / row["variant"]
        assert (folder / "board.vtu").is_file() and (folder / "inputs.json").is_file()
        fresh += "geometry" in json.loads((folder / "summary.json").read_text())["timings_s"]
    assert fresh == 2


# -- the example studies ---------------------------------------------------------------


@pytest.mark.parametrize("script, columns", [
    ("via_pitch_copper.py", ["via pitch mm", "1 oz", "2 oz"]),
    ("spreader_airflow.py", ["air m/s", "h W/m2K", "0.3 mm", "3 mm"]),
])
def test_example_studies_write_their_table_and_plot(tmp_path, capsys, script, columns):
    import importlib.util
    from pathlib import Path

    root = Path(__file__).resolve().parent.parent
    spec = importlib.util.spec_from_file_location(script[:-3], root / "examples" / script)
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    out = tmp_path / "study"
    assert module.main(["--quick", "--jobs", "1", "--out", str(out)]) == 0
    printed = capsys.readouterr().out.splitlines()
    assert all(c in printed[1] for c in columns)
    assert len(printed) >= 4                          # title, header, two rows
    assert len(read_csv(out / "sweep.csv")) == 4 and (out / "sweep.png").is_file()
