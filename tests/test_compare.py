"""heat2d compare: two runs figure by figure with the combined error bars, the verdict,
the map and the command line."""

from __future__ import annotations

import json
import re
import shutil
from pathlib import Path

import pytest

import heat2d
import heat2d.verify
from heat2d import cli
from heat2d.compare import compare, compare_sides, load_side, plot_compare, write_comparison
from tests.common import board, verify_params

WALL = (Path(heat2d.verify.__file__).parent / "models" / "composite_wall.toml").read_text(
    encoding="utf-8")
KEYS = {"heat2d_version", "a", "b", "same_geometry", "shapes", "shape_means", "probes",
        "boundaries", "resistances", "hot_spot", "only_in_a", "only_in_b", "verdict",
        "caution"}
"""The keys of compare.json (docs/python-api.md, "Comparing two runs")."""


def flux_wall(q: float, **params: float) -> heat2d.Model:
    """The composite wall of heat2d verify with a heat flux q (W/m²) into the left face of
    slab A instead of its hot-side convection; the right face of B still convects to
    t_cold. Per unit area the heat crosses A, the contact, B and the film in series."""
    text = WALL.replace('h = "h_hot"\nambient = "t_hot"', 'heat_flux = "q"')
    text = text.replace("[params]\n", f"[params]\nq = {q}\n")
    for name, value in params.items():
        text = re.sub(rf"^{name} = [0-9.e-]+", f"{name} = {value}", text, flags=re.M)
    return heat2d.parse(text, source="wall.toml")


def series(p: dict, *, slab: str, mean: bool) -> float:
    """Incropera et al. §3.1 (series thermal circuit, per unit area, m²·K/W): the resistance
    from the hottest face (or the mean) of a slab to the cold-side fluid. T is linear in
    each slab, so its mean is the middle of the slab."""
    film_b = p["l_b"] * 1e-3 / p["k_b"] * (0.5 if mean and slab == "B" else 1.0) \
        + 1.0 / p["h_cold"]
    if slab == "B":
        return film_b
    return p["l_a"] * 1e-3 / p["k_a"] * (0.5 if mean else 1.0) + p["r_tc"] \
        + p["l_b"] * 1e-3 / p["k_b"] + 1.0 / p["h_cold"]


@pytest.fixture(scope="module")
def wall_runs():
    """A at q = 2000 W/m², B at 3000 W/m², C with slab A 1 mm thicker (a new mesh)."""
    return {"A": load_side(flux_wall(2000.0), label="A"),
            "B": load_side(flux_wall(3000.0), label="B"),
            "C": load_side(flux_wall(2000.0, l_a=5.0), label="B")}


def test_a_model_against_itself_changes_nothing(tmp_path):
    model = heat2d.parse(board(), source="board.toml")
    doc = compare(model, model)
    # Common practice: the same model solved twice on the same mesh gives the same
    # numbers bit for bit (the mesher and the direct solver are deterministic).
    assert doc["same_geometry"] is True
    assert set(doc) == KEYS
    entries = [*doc["shapes"].values(), *doc["shape_means"].values(),
               *doc["probes"].values(), doc["hot_spot"],
               *(e for row in doc["resistances"].values() for e in row.values())]
    assert len(doc["shapes"]) == 2 and list(doc["probes"]) == ["centre"]
    assert doc["resistances"]["pad"]["pad"]["a"] > 0       # the pad is powered
    assert all(e["delta"] == 0 for e in entries)
    assert all(e["delta_w"] == 0 for e in doc["boundaries"].values())
    assert not any(e["significant"] for e in [*entries, *doc["boundaries"].values()])
    assert doc["only_in_a"] == [] and doc["only_in_b"] == []
    assert "none of the 3 temperatures (shape maxima and probes) changed" in doc["verdict"]
    assert "pad max is the same in A and B" in doc["verdict"]


def test_power_change_of_a_composite_wall_matches_the_series_circuit(wall_runs):
    a, b = wall_runs["A"], wall_runs["B"]
    doc = compare_sides(a, b)
    p = verify_params("composite_wall")
    dq = 1000.0                                      # W/m²
    dp = dq * p["height"] * 1e-3 * p["depth"] * 1e-3  # W through the wall: 3 W
    assert doc["same_geometry"] is True
    for slab in ("A", "B"):
        # Incropera §3.1: T − T∞ = q″ R″ in a series circuit, so ΔT = Δq″ R″; linear
        # triangles reproduce the piecewise-linear field to round-off (patch test), so
        # 1e-9 relative is round-off, not discretisation.
        for key, mean in (("shapes", False), ("shape_means", True)):
            e = doc[key][slab]
            assert e["delta"] == pytest.approx(dq * series(p, slab=slab, mean=mean),
                                               rel=1e-9)
            assert e["b"] - e["a"] == e["delta"]
            assert e["significant"] is True and e["error"] < 1e-6
    # Energy balance (Incropera §1.3): the extra watts leave through the cold face and
    # enter through the heated one (heat_out_w is negative where heat comes in).
    assert doc["boundaries"]["cold"]["delta_w"] == pytest.approx(dp, rel=1e-9)
    assert doc["boundaries"]["hot"]["delta_w"] == pytest.approx(-dp, rel=1e-9)
    assert doc["boundaries"]["cold"]["significant"] is True
    assert doc["resistances"] == {}                  # no powered shape: no °C/W matrix
    expected = dq * series(p, slab="A", mean=False)  # 55.675 K
    assert expected == pytest.approx(55.675, rel=1e-12)
    # 55.675 K printed with two decimals: 55.67 or 55.68 depending on round-off.
    assert re.search(r"^A max is 55\.6[78] K higher in B \(± [0-9.e-]+ K\): "
                     "larger than the error bars$", doc["verdict"], re.M)
    assert doc["verdict"].startswith("2 of 2 temperatures")
    # The reversed comparison says "lower".
    assert re.search(r"^A max is 55\.6[78] K lower in B \(± ", compare_sides(b, a)["verdict"],
                     re.M)


def test_a_geometry_change_gives_side_by_side_maps(wall_runs, tmp_path):
    a, c = wall_runs["A"], wall_runs["C"]
    doc = compare_sides(a, c)
    p = verify_params("composite_wall")
    assert doc["same_geometry"] is False
    # Incropera §3.1: 1 mm more of slab A adds q″ ΔL/k_A = 2000 × 0.001 / 0.8 = 2.5 K at
    # the heated face and leaves slab B (downstream of A) as it was.
    assert doc["shapes"]["A"]["delta"] == pytest.approx(2000.0 * 1e-3 / p["k_a"], rel=1e-9)
    b_max = doc["shapes"]["B"]
    assert abs(b_max["delta"]) < 1e-8 and b_max["significant"] is False
    assert re.search(r"B max is [0-9.e-]+ K (higher|lower) in B \(± [0-9.e-]+ K\): within "
                     "the error bars: no conclusion from these meshes|B max is the same",
                     doc["verdict"])
    assert "side by side" in doc["caution"]
    fig = plot_compare(a, c, tmp_path / "compare.png", same=False)
    titles = [ax.get_title(loc="left") for ax in fig.axes]
    assert any(t.startswith("A: max") for t in titles)
    assert any(t.startswith("B: max") for t in titles)
    assert not any("B minus A" in t for t in titles)
    assert (tmp_path / "compare.png").stat().st_size > 10_000
    same = plot_compare(a, wall_runs["B"], same=True)
    assert any(ax.get_title(loc="left").startswith("B minus A") for ax in same.axes)


def test_written_json_has_exactly_the_keys_and_no_nan(wall_runs, tmp_path):
    a, b = wall_runs["A"], wall_runs["B"]
    files = write_comparison(a, b, compare_sides(a, b), tmp_path / "cmp")
    assert sorted(f.name for f in files) == ["compare.json", "compare.png", "compare.txt"]

    def refuse(name):
        raise AssertionError(f"{name} in compare.json")

    doc = json.loads((tmp_path / "cmp" / "compare.json").read_text(), parse_constant=refuse)
    assert set(doc) == KEYS
    assert set(doc["a"]) == {"folder", "model", "title"}
    assert set(doc["shapes"]["A"]) == {"a", "b", "delta", "error", "significant"}
    assert set(doc["boundaries"]["cold"]) == {"a_w", "b_w", "delta_w", "error_w",
                                              "significant"}
    assert set(doc["hot_spot"]) == {"a", "b", "delta", "error", "significant", "same_shape"}
    text = (tmp_path / "cmp" / "compare.txt").read_text()
    # The caution every heat2d output carries (README).
    assert "confirm against measurements and component ratings" in text
    assert "larger than the error bars" in text


@pytest.fixture(scope="module")
def board_folders(tmp_path_factory):
    tmp_path = tmp_path_factory.mktemp("board")
    model = tmp_path / "board.toml"
    model.write_text(board(), encoding="utf-8")
    bigger = tmp_path / "bigger.toml"
    bigger.write_text(board({"power = 0.5": "power = 1.0"}), encoding="utf-8")
    assert cli.main(["run", str(model), "--out", str(tmp_path / "a"), "--quiet"]) == 0
    assert cli.main(["run", str(model), "--out", str(tmp_path / "plain"), "--quiet",
                     "--no-estimate"]) == 0
    return tmp_path, model, bigger


def test_cli_compares_a_folder_with_a_model(board_folders, capsys):
    tmp, _, bigger = board_folders
    out = tmp / "cmp"
    assert cli.main(["compare", str(tmp / "a"), str(bigger), "--out", str(out)]) == 0
    printed = capsys.readouterr().out
    assert sorted(p.name for p in out.iterdir()) == ["compare.json", "compare.png",
                                                     "compare.txt"]
    doc = json.loads((out / "compare.json").read_text())
    assert doc["same_geometry"] is True              # the VTU read back has the same nodes
    # A linear model (Incropera §3.1): doubling the power doubles every rise above the
    # fixed 50 °C rail and 40 °C air, and leaves the °C/W matrix as it was.
    r = doc["resistances"]["pad"]["pad"]
    assert r["delta"] == pytest.approx(0.0, abs=1e-9 * r["a"])
    # Mean of shape i = its mean at zero power + P R_ii (model-format.md, thermal
    # resistance matrix): 0.5 W more in the pad raises its mean by 0.5 R, to round-off.
    assert doc["shape_means"]["pad"]["delta"] == pytest.approx(0.5 * r["a"], rel=1e-9)
    assert re.search(r"^pad +[0-9.]+ +[0-9.]+ +[0-9.]+ +[0-9.e-]+  YES$", printed, re.M)
    assert "pad max is" in printed and "larger than the error bars" in printed
    assert "Estimates only" in printed


def test_a_run_without_estimate_has_unknown_significance(board_folders):
    tmp, model, _ = board_folders
    doc = compare(tmp / "plain", model)
    assert doc["a"]["folder"] == str(tmp / "plain")
    assert doc["verdict"].splitlines()[0] == "no error estimate in A: significance unknown"
    assert doc["shapes"]["pad"]["error"] is None
    assert doc["shapes"]["pad"]["significant"] is None
    assert doc["shapes"]["pad"]["delta"] == 0        # same model, same mesh
    assert "(no error bars): significance unknown" in doc["verdict"]


def test_items_in_one_run_only_are_listed_not_compared(board_folders):
    tmp, model, _ = board_folders
    extra = tmp / "probe2.toml"
    extra.write_text(board(extra='\n[[probe]]\nname = "corner"\nat = [1, 0.1]\n'),
                     encoding="utf-8")
    doc = compare(model, extra)
    assert doc["only_in_b"] == ["probe corner"] and doc["only_in_a"] == []
    assert list(doc["probes"]) == ["centre"]


@pytest.mark.parametrize("case", ["missing", "no summary", "units"])
def test_bad_input_exits_2_with_one_line_naming_the_path(board_folders, capsys, case):
    tmp, _, _ = board_folders
    b = tmp / f"b-{case.replace(' ', '-')}"
    if case == "missing":
        b = tmp / "nothere"
    elif case == "no summary":
        b.mkdir()
    else:
        shutil.copytree(tmp / "a", b)
        summary = json.loads((b / "summary.json").read_text())
        summary["units"]["length"] = "m"
        (b / "summary.json").write_text(json.dumps(summary))
    out = tmp / f"cmp-{case.replace(' ', '-')}"
    assert cli.main(["compare", str(tmp / "a"), str(b), "--out", str(out)]) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and err[0].startswith(f"error: {b}: "), err
    assert not out.exists()


def test_a_folder_without_vtu_is_compared_without_a_map(board_folders, tmp_path):
    tmp, model, _ = board_folders
    bare = tmp_path / "bare"
    shutil.copytree(tmp / "a", bare, ignore=shutil.ignore_patterns("*.vtu"))
    a, b = load_side(bare, label="A"), load_side(model, label="B")
    doc = compare_sides(a, b)
    assert not a.has_mesh and doc["same_geometry"] is False
    assert doc["shapes"]["pad"]["delta"] == 0        # same model: same figures
    fig = plot_compare(a, b, tmp_path / "compare.png", same=False)
    assert any("no mesh" in t.get_text() for ax in fig.axes for t in ax.texts)
