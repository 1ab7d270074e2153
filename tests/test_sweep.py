"""Parameter sweeps: the table against single runs, reuse, skipping, failures, parallel runs.

Tolerance used throughout, ``ROUND_OFF`` = 1e-9 relative: a sweep reuses the mesh and
either the very factorization of an earlier variant (the same floating-point operations
as a fresh solve) or a refactorization with its stored ordering, which differs from a
fresh factorization only in rounding. On these ~700-node models the conduction matrix
has a condition number below ~1e6, so such differences stay near 1e-16 x 1e6 = 1e-10 at
worst; 1e-9 leaves a margin without hiding a wrong value (a real error here is
percent-sized).

``sweep.csv`` writes each number to the digits it carries (heat2d.sweep.table): a CSV
cell is compared with a single run as "the exact figure rounded to the written digit",
i.e. within half a unit of its last digit (plus ROUND_OFF), never loosely.
"""

from __future__ import annotations

import itertools
import json
import math
import re

import pytest

import heat2d
from heat2d import ModelError, cli
from heat2d.sweep import SweepProgress, parse_values, read_csv, sweep
from heat2d.sweep.grid import MAX_FOLDER_NAME, _folder_names, legacy_folder_name
from heat2d.sweep.table import cell_text, param_units
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


def half_unit(column: str, value: float) -> float:
    """Half a unit in the last digit sweep.csv writes for ``column`` (the rule in
    heat2d.sweep.table's docstring): 0.001 K, 0.01 s, or 6 / 2 significant digits."""
    if column == "solve_time_s":
        return 0.005
    if column == "max_temperature_c" or column.startswith(("probe:", "margin_k:")):
        return 0.0005
    digits = 2 if column == "max_temperature_error_k" else 6
    return 0.5 * 10.0 ** (math.floor(math.log10(abs(value))) - digits + 1) if value else 0.0


def assert_written(cell: float, exact: float, column: str, where: str = "") -> None:
    """The CSV cell is ``exact`` rounded to the written digit (up to ROUND_OFF)."""
    assert abs(cell - exact) <= half_unit(column, exact) + ROUND_OFF * abs(exact), (
        where, column, cell, exact)


def stored_rows(out, rows):
    """The full-precision rows kept in each variant's inputs.json, in the CSV's order."""
    return [json.loads((out / r["variant"] / "inputs.json").read_text())["row"] for r in rows]


def assert_same_csv(rows, reference):
    """Two sweep.csv tables of equal runs: text equal, numbers within one written unit
    (the exact figures agree to ROUND_OFF, yet may round to neighbouring digits)."""
    assert len(rows) == len(reference)
    for row, ref in zip(rows, reference, strict=True):
        assert list(row) == list(ref)
        for key, value in ref.items():
            if isinstance(value, float) and key != "solve_time_s" and key not in ("power", "t",
                                                                                  "h_air"):
                assert abs(row[key] - value) <= 2 * half_unit(key, value) + ROUND_OFF * abs(
                    value), (ref["variant"], key)
            elif key != "solve_time_s":
                assert row[key] == value, (ref["variant"], key)


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
    # The full grid, first param slowest; folders named NAME-VALUE_NAME-VALUE.
    assert [r["variant"] for r in rows[:2]] == ["power-0.5_h_air-10", "power-0.5_h_air-25"]
    assert [(r["power"], r["h_air"]) for r in rows] == list(
        itertools.product([0.5, 1.0, 1.5], [10.0, 25.0]))
    assert list(rows[0]) == ["variant", "power", "h_air", "max_temperature_c",
                             "hot_spot_shape", "probe:centre", "heat_out_w:rail",
                             "heat_out_w:air", "margin_k:pad", "solve_time_s", "status",
                             "error"]
    for row in rows:
        single = tmp_path / "single" / row["variant"]
        # The param cells are the values' own text: a --set of them rebuilds the variant.
        assert cli.main(["run", str(model_file), "--set", "t=2", "--set",
                         f"power={cell_text('power', row['power'], varied=['power'])}",
                         "--set", f"h_air={cell_text('h_air', row['h_air'], varied=['h_air'])}",
                         "--out", str(single), "--quiet"]) == 0
        s = json.loads((single / "summary.json").read_text())
        expected = {"max_temperature_c": s["temperature"]["max"],
                    "probe:centre": s["probes"]["centre"],
                    "heat_out_w:rail": s["boundaries"]["rail"]["heat_out_w"],
                    "heat_out_w:air": s["boundaries"]["air"]["heat_out_w"],
                    "margin_k:pad": s["limits"]["pad"]["margin"]}
        for key, value in expected.items():
            assert_written(row[key], value, key, row["variant"])
        assert row["hot_spot_shape"] == s["hot_spot"]["shape"] == "pad"
        assert row["status"] == "ok" and row["error"] is None
        # Times to 0.01 s (a reused factorization may take less: 0.00); exact in inputs.json.
        exact_time = stored_rows(out, [row])[0]["solve_time_s"]
        assert exact_time > 0 and row["solve_time_s"] == round(exact_time, 2)
        # The variant's own summary holds the same figures as the single run.
        own = json.loads((out / row["variant"] / "summary.json").read_text())
        assert own["temperature"]["max"] == pytest.approx(s["temperature"]["max"],
                                                          rel=ROUND_OFF)
        assert own["model"]["params"] == s["model"]["params"]
    assert sorted(p.name for p in (out / rows[0]["variant"]).iterdir()) == [
        "board.vtu", "inputs.json", "summary.json", "summary.txt"]
    assert (out / "sweep.png").read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"


def series(fig):
    """The plotted series of a sweep figure (not its limit lines or markers)."""
    return [line for line in fig.axes[0].get_lines() if line.get_gid() == "series"]


def test_zip_pairs_the_lists_and_plots_one_line(tmp_path):
    model = heat2d.parse(SWEEP_BOARD)
    table = sweep(model, {"power": [0.5, 1.0, 1.5], "h_air": "10:30:3"}, zip=True)
    assert [(r["power"], r["h_air"]) for r in table.rows] == [(0.5, 10.0), (1.0, 20.0),
                                                              (1.5, 30.0)]
    assert len(series(table.plot())) == 1
    grid = sweep(model, {"power": [0.5, 1.0], "h_air": [10, 20, 30]})
    # One line per value of the second param, each over the first param's values.
    lines = series(grid.plot())
    assert len(lines) == 3 and all(len(line.get_xdata()) == 2 for line in lines)


# -- what sweep.csv writes, folder names, the plot ------------------------------------


@pytest.mark.parametrize("column, value, text", [
    # Temperatures and margins: 0.001 K, a fixed step (no "-0.000" for a tiny negative).
    ("max_temperature_c", 116.723456, "116.723"),
    ("probe:centre", 40.0, "40.000"),
    ("margin_k:pad", -1.5504, "-1.550"),
    ("margin_k:pad", -0.0004, "0.000"),
    # Heat flows: 6 significant digits whatever their size; no exponent below 1e16.
    ("heat_out_w:air", 0.123456789, "0.123457"),
    ("heat_out_w:air", -1234567.89, "-1234570"),
    ("heat_out_w:air", 3.2e-07, "3.2e-07"),
    ("heat_out_w:air", -0.0, "0"),
    # Error estimates: 2 significant digits; solve times: 0.01 s.
    ("max_temperature_error_k", 0.0123456, "0.012"),
    ("max_temperature_error_k", 1.26, "1.3"),
    ("solve_time_s", 0.126, "0.13"),
    # Params: the shortest text of the value used, as a user types it.
    ("power", 0.1, "0.1"), ("power", 10.0, "10"), ("power", 1e-05, "1e-05"),
    ("power", 0.30000000000000004, "0.30000000000000004"),
    ("hot_spot_shape", "pad", "pad"), ("max_temperature_c", None, ""),
])
def test_csv_cells_carry_the_digits_of_their_kind(column, value, text):
    # The precision rule of heat2d.sweep.table (chosen there; values worked by hand).
    assert cell_text(column, value, varied=["power"]) == text
    if text:
        assert text == value or float(text) == pytest.approx(value, abs=half_unit(column, value))


def test_sweep_csv_text_reads_back_at_the_written_digits(model_file, tmp_path):
    out = tmp_path / "sweep"
    table = sweep(heat2d.load(model_file), {"power": [0.5, 1.0], "h_air": [10, 25]},
                  out=out, estimate=True)
    lines = (out / "sweep.csv").read_text(encoding="utf-8").splitlines()
    header = lines[0].split(",")
    patterns = {"max_temperature_c": r"-?\d+\.\d{3}", "probe:centre": r"-?\d+\.\d{3}",
                "margin_k:pad": r"-?\d+\.\d{3}", "solve_time_s": r"\d+\.\d{2}",
                "power": r"0\.5|1", "h_air": r"10|25"}
    for line in lines[1:]:
        cells = dict(zip(header, line.split(","), strict=True))
        for column, pattern in patterns.items():
            assert re.fullmatch(pattern, cells[column]), (column, cells[column])
        for column, digits in (("heat_out_w:rail", 6), ("heat_out_w:air", 6),
                               ("max_temperature_error_k", 2)):
            # Significant digits: the mantissa's, without its sign, point and the zeros
            # that only place it (the shortest text has no other trailing zeros).
            mantissa = cells[column].split("e")[0].lstrip("-").replace(".", "")
            assert 1 <= len(mantissa.strip("0")) <= digits, (column, cells[column])
    # read_csv gives each figure rounded to its written digit (rows in memory: exact).
    for row, exact in zip(read_csv(out / "sweep.csv"), table.rows, strict=True):
        for column in ("max_temperature_c", "max_temperature_error_k", "probe:centre",
                       "heat_out_w:rail", "heat_out_w:air", "margin_k:pad", "solve_time_s"):
            assert_written(row[column], exact[column], column, row["variant"])
        assert (row["power"], row["h_air"]) == (exact["power"], exact["h_air"])


FORBIDDEN = set('=,:*?"<>|\\/ ')
"""Characters a folder name may not hold on Windows, macOS or Linux, plus = and ,."""


def test_folder_names_are_safe_unique_and_bounded():
    grid = [{"h_air": 1e-3, "t": -2.0}, {"h_air": 0.5, "t": "2*t + min(1, 2)"},
            {"h_air": 1e-05, "t": 1e16}, {"h_air": 10.0, "t": "T"}, {"h_air": 10.0, "t": "t"}]
    names = _folder_names(grid)
    # Values read as written (-2 after its "-"); an expression keeps its letters and
    # digits, other characters become "~"; "T" and "t" differ only by case: suffixed.
    assert names == ["h_air-0.001_t--2", "h_air-0.5_t-2~t~+~min~1~2",
                     "h_air-1e-05_t-1e+16", "h_air-10_t-T", "h_air-10_t-t_copy2"]
    long = [{"a_rather_long_param_name": v, "another_long_name": "x" * 60} for v in (1.0, 2.0)]
    names += _folder_names(long)
    for name in names:
        assert not FORBIDDEN & set(name) and not name.endswith(".") and name[0].isalpha()
        assert len(name) <= MAX_FOLDER_NAME
    assert len({n.lower() for n in names}) == len(names)
    # A long name keeps its readable start and ends in a digest of the exact values.
    assert names[-1].startswith("a_rather_long_param_name-2_another") and names[-1] != names[-2]


def test_rerun_skips_by_digest_and_carries_on_an_old_named_folder(model_file, tmp_path):
    out = tmp_path / "sweep"
    vary = {"power": [0.5, 1.0], "h_air": [10, 25]}
    first = sweep(heat2d.load(model_file), vary, out=out)
    assert sorted(p.name for p in out.iterdir() if p.is_dir()) == [
        "power-0.5_h_air-10", "power-0.5_h_air-25", "power-1_h_air-10", "power-1_h_air-25"]
    # A folder as earlier heat2d sweeps named it (NAME=VALUE,...): the next sweep renames
    # it to its name now and, its digest still matching, reads its row back.
    old = out / legacy_folder_name({"power": 0.5, "h_air": 10.0}, 0)
    assert old.name == "power=0.5,h_air=10"
    (out / "power-0.5_h_air-10").rename(old)
    again = sweep(heat2d.load(model_file), vary, out=out)
    assert sorted(again.skipped) == sorted(r["variant"] for r in first.rows)
    assert not old.exists() and (out / "power-0.5_h_air-10" / "inputs.json").is_file()
    assert_same_table(again.rows, first.rows)
    # An old folder whose inputs changed is renamed too, then solved again in place.
    (out / "power-1_h_air-25").rename(out / "power=1,h_air=25")
    model_file.write_text(SWEEP_BOARD.replace("k = 385", "k = 390"), encoding="utf-8")
    changed = sweep(heat2d.load(model_file), vary, out=out)
    assert changed.skipped == [] and not (out / "power=1,h_air=25").exists()
    stored = json.loads((out / "power-1_h_air-25" / "inputs.json").read_text())
    assert stored["values"] == {"power": 1.0, "h_air": 25.0}
    assert stored["row"]["max_temperature_c"] == changed.rows[3]["max_temperature_c"]


def test_param_units_come_from_the_keys_they_feed():
    # Units of the keys from docs/model-format.md; the params of the bundled control board.
    units = param_units(heat2d.load("models/control_board.toml"))
    assert units["p_die"] == "W"                     # power = "p_die"
    assert units["ambient"] == units["t_rail"] == "°C"
    assert units["h_air"] == units["h_conv"] == "W/(m²·K)"   # h = "h_air" = "h_conv + h_rad"
    assert units["via_pitch"] == units["t_outer"] == "mm"    # terms of x = "... - 2*via_pitch"
    # Only in products or powers (h_conv = 1.42 * (dT_est / board_height)**0.25): unknown.
    assert "dT_est" not in units and "board_height" not in units


def test_plot_labels_units_and_draws_the_limit(tmp_path):
    model = heat2d.parse(SWEEP_BOARD)
    table = sweep(model, {"power": [0.5, 1.0, 1.5], "h_air": [10, 25]})
    fig = table.plot(tmp_path / "sweep.png")
    ax = fig.axes[0]
    assert ax.get_xlabel() == "power, W" and ax.get_ylabel() == "hot-spot temperature, °C"
    assert ax.get_legend().get_title().get_text() == "h_air, W/(m²·K)"
    # The pad holds the hot spot and has max_temperature = 125: one dashed line there,
    # named after the pad.
    limits = [line for line in ax.get_lines() if line.get_gid() == "limit"]
    assert len(limits) == 1 and list(limits[0].get_ydata()) == [125, 125]
    assert [t.get_text() for t in ax.texts if t.get_gid() == "limit-label"] == [
        "pad limit 125 °C"]
    # Ringed: exactly the variants whose margin is negative.
    over = [line for line in ax.get_lines() if line.get_gid() == "exceeded"]
    expected = sorted((r["power"], r["max_temperature_c"]) for r in table.rows
                      if r["margin_k:pad"] < 0)
    assert expected and sorted(zip(over[0].get_xdata(), over[0].get_ydata(),
                                                  strict=True)) == expected
    # Without a limit, no line; a param whose unit cannot be told keeps its name alone.
    plain = heat2d.parse(SWEEP_BOARD.replace("max_temperature = 125\n", "").replace(
        "t = 1.6", 't = 1.6\nscale = 1').replace('power = "power"', 'power = "power * scale"'))
    fig = sweep(plain, {"scale": [1, 2]}).plot()
    assert fig.axes[0].get_xlabel() == "scale"
    assert not [line for line in fig.axes[0].get_lines() if line.get_gid() != "series"]


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
    assert "failed: t-0: " in captured.err and "failed: t-0.5: " in captured.err
    assert "3 variants: 1 ok, 2 failed" in captured.out
    assert not (out / "t-0").exists() or not (out / "t-0" / "inputs.json").exists()
    assert (out / "sweep.png").exists()


def test_a_sweep_with_no_valid_variant_is_bad_input(model_file, tmp_path, capsys):
    # Every value makes an invalid model (no board height): nothing can run, so the sweep
    # is refused as input (exit 2, one line naming the file, nothing written).
    out = tmp_path / "sweep"
    assert run_sweep(model_file, "--vary", "t=0,-1", "--out", str(out)) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and "no variant is a valid model; the first, t-0:" in err[0]
    assert "board.toml" in err[0] and 'rect.height: must be > 0, got 0' in err[0]
    assert not out.exists()


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
    stored = json.loads((out / "power-0.5_h_air-10" / "inputs.json").read_text())
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
    jobs, serial = (read_csv(tmp_path / d / "sweep.csv") for d in ("jobs", "serial"))
    assert_same_csv(jobs, serial)
    assert_same_table(stored_rows(tmp_path / "jobs", jobs),
                      stored_rows(tmp_path / "serial", serial))


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
    serial = read_csv(tmp_path / "serial" / "sweep.csv")
    assert_same_csv(rows, serial)
    assert_same_table(stored_rows(out, rows), stored_rows(tmp_path / "serial", serial))
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
