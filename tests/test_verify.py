"""``heat2d verify``: the case table, its runs, the report and the exit status.

The table (heat2d/verify/cases.toml) is read here as the command reads it, and every
check of it is run. Every reference number it holds is recomputed from the closed forms
(heat2d/verify/closed_forms.py) and the values of the case's own model file, and the
closed forms are checked against the test values that reference-facts.md quotes for them
(section 4, "RF #n"; Inc = Incropera, DeWitt, Bergman & Lavine, *Fundamentals of Heat
and Mass Transfer*, 6th ed.), so neither a wrong formula nor a drifted number can make
a wrong result pass.
"""

from __future__ import annotations

import ast
import dataclasses
import functools
import json
import math
import tomllib
from collections.abc import Callable
from importlib.resources import as_file, files
from typing import NamedTuple

import pytest

import heat2d
from heat2d import Heat2dError, cli
from heat2d.verify import closed_forms as cf
from heat2d.verify import report, run, table
from heat2d.verify.table import Case, Check, TableError, parse_table, read_table

PNG = b"\x89PNG\r\n\x1a\n"
FIELDS = {"case", "check", "source", "unit", "reference", "computed", "error", "tolerance",
          "basis", "passed", "seconds"}
ROUND_OFF = 1e-9     # the table's round-off tolerance (patch test: Strang & Fix 1973)
NEWTON_K = 1e-6      # heat2d's Newton stop, K
TABLE = read_table()
CHECKS = [(c, k) for c in TABLE.cases for k in c.checks]
CHECK_IDS = [f"{c.name}-{k.check}" for c, k in CHECKS]


@functools.cache
def records_of(name: str) -> tuple[dict, ...]:
    """The records of one case, run once for every test that reads them."""
    return tuple(heat2d.verify.verify(cases=[name]))


def model_of(case: Case, check: Check) -> heat2d.Model:
    """The model (with the table's params) that ``check`` reads."""
    name, params = case.run_of(check)
    return table.load_model(name, dict(params))


# ---------------------------------------------------------------------------------------
# Every check of the table, run


@pytest.mark.parametrize("case, check", CHECKS, ids=CHECK_IDS)
def test_every_check_of_the_table_passes(case, check):
    records = [r for r in records_of(case.name) if r["check"] == check.check]
    assert len(records) == 1, [r["check"] for r in records_of(case.name)]
    r = records[0]
    assert FIELDS <= set(r), r
    assert r["passed"] is True, r
    assert r["reference"] == check.reference and r["unit"] == check.unit
    assert r["error"] == pytest.approx(abs(r["computed"] - r["reference"]), rel=1e-12,
                                       abs=1e-300)
    assert 0 <= r["error"] <= r["tolerance"]
    assert r["basis"] == check.basis and r["basis"]        # each tolerance is explained
    # Source: the book (or paper) and where in it.
    assert r["source"] == case.source
    assert any(s in r["source"] for s in ("Incropera", "Özişik", "Roache")), r["source"]
    if "Incropera" in r["source"]:
        assert "§" in r["source"]


def test_verify_passes_prints_the_table_and_writes_both_files(tmp_path, capsys):
    out = tmp_path / "v"
    assert cli.main(["verify", "--out", str(out)]) == 0
    assert sorted(p.name for p in out.iterdir()) == ["verify.json", "verify.png"]
    doc = json.loads((out / "verify.json").read_text())
    assert doc["passed"] is True and doc["failed"] == 0
    records = doc["records"]
    # One record per check of the table, in its order.
    assert doc["checks"] == len(records) == len(CHECKS)
    assert [(r["case"], r["check"]) for r in records] == [(c.name, k.check) for c, k in CHECKS]
    assert {r["case"] for r in records} == set(heat2d.verify.CASES) == set(TABLE.names)
    # The convergence study behind the plot: three meshes, errors falling with h.
    series = next(r["convergence"] for r in records if "convergence" in r)
    assert len(series["h"]) == len(TABLE.case("manufactured").refine) == 3
    assert series["h"] == sorted(series["h"], reverse=True)
    assert series["l2"] == sorted(series["l2"], reverse=True)
    png = (out / "verify.png").read_bytes()
    assert png[:8] == PNG and len(png) > 10_000
    printed = capsys.readouterr().out
    header = printed.splitlines()[0].split()
    assert header[:3] == ["case", "check", "source"]
    assert {"reference", "computed", "error", "tolerance", "pass"} <= set(header)
    assert f"{len(records)} of {len(records)} checks passed" in printed
    assert all(name in printed for name in heat2d.verify.CASES)


def test_a_wrong_reference_fails_with_exit_1(tmp_path, monkeypatch, capsys):
    # The fin's q′/θb reference 5 % off in the table: the fin's 1 % tolerance must catch it.
    fin = TABLE.case("fin")
    wrong = [dataclasses.replace(k, reference=1.05 * k.reference) if k.check == "q′/θb"
             else k for k in fin.checks]
    cases = tuple(dataclasses.replace(c, checks=tuple(wrong)) if c.name == "fin" else c
                  for c in TABLE.cases)
    monkeypatch.setattr(table, "read_table", lambda: dataclasses.replace(TABLE, cases=cases))
    out = tmp_path / "v"
    assert cli.main(["verify", "--case", "fin", "--out", str(out)]) == 1
    doc = json.loads((out / "verify.json").read_text())
    assert doc["passed"] is False and doc["failed"] == 1
    failed = [r for r in doc["records"] if not r["passed"]]
    assert [r["check"] for r in failed] == ["q′/θb"]
    assert failed[0]["error"] > failed[0]["tolerance"]
    captured = capsys.readouterr()
    assert "NO" in captured.out and "FAILED: fin" in captured.out
    assert "verification failed" in captured.err


def test_a_case_that_raises_is_a_failed_check(tmp_path, monkeypatch):
    real = table.load_model

    def broken(name, params=None):
        if name == "fin":
            raise RuntimeError("solver exploded")
        return real(name, params)

    monkeypatch.setattr(table, "load_model", broken)
    records = heat2d.verify.verify(cases=["fin", "composite_wall"])
    assert records[0]["passed"] is False
    assert "RuntimeError: solver exploded" in records[0]["check"]
    assert records[0]["basis"] == "the case raised" and records[0]["reference"] is None
    assert [r["case"] for r in records[1:]] == ["composite_wall"] * 3
    assert all(r["passed"] for r in records[1:])
    assert cli.main(["verify", "--case", "fin", "--out", str(tmp_path / "v")]) == 1
    # --debug stops at the exception instead (the command line prints it, exit 1).
    assert cli.main(["verify", "--case", "fin", "--debug", "--out", str(tmp_path / "w")]) == 1
    assert not (tmp_path / "w").exists()


def test_outputs_are_written_all_or_nothing(tmp_path, monkeypatch):
    def no_plot(records, path=None):
        raise OSError("disk full")

    monkeypatch.setattr(report, "plot_convergence", no_plot)
    out = tmp_path / "v"
    with pytest.raises(Heat2dError, match="cannot write outputs: disk full"):
        heat2d.verify.write_outputs(list(records_of("composite_wall")), out)
    # No verify.json without its plot: the folder was never created, nor a scratch sibling.
    assert not out.exists() and list(tmp_path.iterdir()) == []
    # Over an earlier complete pair, a failed write keeps that pair.
    monkeypatch.undo()
    good = heat2d.verify.write_outputs(list(records_of("composite_wall")), out)
    before = {f.name: f.read_bytes() for f in good}
    monkeypatch.setattr(report, "plot_convergence", no_plot)
    with pytest.raises(Heat2dError, match="cannot write outputs: disk full"):
        heat2d.verify.write_outputs([], out)
    assert {f.name: f.read_bytes() for f in out.iterdir()} == before
    assert [f.name for f in tmp_path.iterdir()] == ["v"]


def test_library_function_and_unknown_case():
    records = records_of("composite_wall")
    assert {r["case"] for r in records} == {"composite_wall"}
    with pytest.raises(ValueError, match=r"unknown verification case 'nope' \(choose from: "):
        heat2d.verify.verify(cases=["nope"])


def test_unknown_case_on_the_command_line_is_a_usage_error(tmp_path, capsys):
    with pytest.raises(SystemExit) as exc:
        cli.main(["verify", "--case", "nope", "--out", str(tmp_path)])
    assert exc.value.code == 2
    assert "invalid choice: 'nope'" in capsys.readouterr().err


def test_quiet_prints_only_the_count(tmp_path, capsys):
    assert cli.main(["verify", "--case", "composite_wall", "--quiet",
                     "--out", str(tmp_path)]) == 0
    assert capsys.readouterr().out.strip() == "3 of 3 checks passed"


# ---------------------------------------------------------------------------------------
# The table against the closed forms and its model files


class Expect(NamedTuple):
    """What a check must hold: its reference, and where given its tolerance (a number,
    or the summary path of the run's own ±) and its conversion of the figure."""

    reference: float
    tolerance: float | str | None = None
    divide: float = 1.0
    offset: float = 0.0


def composite_wall(m: heat2d.Model, p: dict) -> dict[str, Expect]:
    # Inc §3.1: q″ = ΔT∞/(1/h1 + ΣL/k + R″ + 1/h2); faces and the jump follow from q″.
    u = m.unit_m
    q = cf.composite_wall_flux(p["t_hot"], p["h_hot"], [(p["l_a"] * u, p["k_a"]),
                                                        (p["l_b"] * u, p["k_b"])],
                               p["r_tc"], p["h_cold"], p["t_cold"])
    return {"heat flux q″": Expect(q, ROUND_OFF * q, divide=p["height"] * u * m.depth_m),
            "contact jump q″R″": Expect(q * p["r_tc"], ROUND_OFF * q * p["r_tc"]),
            "hot face T": Expect(p["t_hot"] - q / p["h_hot"], ROUND_OFF * p["t_hot"])}


def generation_slab(m: heat2d.Model, p: dict) -> dict[str, Expect]:
    # Inc §3.5.1 (RF #3); the maximum within h²/8·|T''| = h²/8·q̇/k.
    u, half = m.unit_m, p["half"] * m.unit_m
    power = p["qdot"] * 2 * half * p["height"] * u * m.depth_m
    return {"max temperature": Expect(
                cf.slab_generation(0.0, half, p["qdot"], p["k"], p["h"], p["t_inf"]),
                (p["size"] * u) ** 2 / 8 * p["qdot"] / p["k"]),
            "heat out per face": Expect(power / 2, ROUND_OFF * power),
            "surface temperature": Expect(p["t_inf"] + p["qdot"] * half / p["h"],
                                          ROUND_OFF * p["t_inf"])}


def cylinder_wall(m: heat2d.Model, p: dict) -> dict[str, Expect]:
    # Inc §3.3.1, Table 3.3: q′ per metre of depth, the heat of a model 1 m deep.
    u = m.unit_m
    assert m.depth_m == 1.0
    q = cf.cylinder_heat_rate(p["r1"] * u, p["r2"] * u, p["k"], p["t_in"], p["h"],
                              p["t_inf"])
    return {"heat rate q′": Expect(q, 2e-3 * q)}


def fin(m: heat2d.Model, p: dict) -> dict[str, Expect]:
    # Inc §3.6, Table 3.4 case A, per metre of depth (the model is 1 m deep); the tip
    # probe sits at the tip, mid-thickness.
    u = m.unit_m
    assert m.depth_m == 1.0
    q, tip = cf.fin_convective_tip(p["k"], p["t"] * u, p["length"] * u, p["h"])
    theta_b = p["t_base"] - p["t_air"]
    probe = next(pr for pr in m.probes if pr.name == "tip")
    assert (probe.x, probe.y) == (p["length"], p["t"] / 2)
    return {"q′/θb": Expect(q, 0.01 * q, divide=-theta_b),
            "θtip/θb": Expect(tip, 0.01 * tip, divide=theta_b, offset=-p["t_air"])}


def plate_probes(m: heat2d.Model, p: dict) -> dict[str, float]:
    # Inc §4.2, Eq. 4.19 at each probe of the model.
    return {pr.name: p["t1"] + (p["t2"] - p["t1"]) * cf.plate_series(pr.x, pr.y, p["side"],
                                                                   p["side"])
            for pr in m.probes}


def plate(m: heat2d.Model, p: dict) -> dict[str, Expect]:
    t = plate_probes(m, p)
    tol = 2e-3 * (p["t2"] - p["t1"])
    return {"centre θ* = 0.25": Expect(t["centre"], tol),
            "T at (0.75L, 0.3W)": Expect(t["off_centre"], tol)}


def error_estimate(m: heat2d.Model, p: dict) -> dict[str, Expect]:
    t = plate_probes(m, p)
    out = {f"T({pr.x:g}, {pr.y:g}) within ±": Expect(t[pr.name], f"probe_errors/{pr.name}")
           for pr in m.probes if pr.name in ("centre", "near_top", "low", "corner")}
    # The mean is T1 + (T2 − T1)/4 exactly (four rotated copies superpose to T2 all round).
    out["mean θ* = 0.25 within ±"] = Expect(p["t1"] + 0.25 * (p["t2"] - p["t1"]),
                                            "shapes/plate/mean_error")
    out["centre ± < 1 % of ΔT"] = Expect(0.0, 0.01 * (p["t2"] - p["t1"]))
    return out


def radiating(label: str) -> Callable[[heat2d.Model, dict], dict[str, Expect]]:
    def expect(m: heat2d.Model, p: dict) -> dict[str, Expect]:
        # Inc §1.2.3, surface energy balance (RF #11); area of the face per its depth.
        u = m.unit_m
        # Without surroundings of its own, a convecting face radiates to its air.
        t_sur = p.get("t_sur_k", p.get("t_air_k"))
        ts, q = cf.radiating_face(p["k"], p["thickness"] * u, p["t1_k"], p["eps"], t_sur,
                                  p.get("h", 0.0), p.get("t_air_k"))
        return {f"Ts ({label})": Expect(ts, NEWTON_K, offset=cf.KELVIN),
                f"q″ ({label})": Expect(q, ROUND_OFF * q + p["k"] * NEWTON_K
                                        / (p["thickness"] * u),
                                        divide=p["width"] * u * m.depth_m)}
    return expect


def kirchhoff(m: heat2d.Model, p: dict) -> dict[str, Expect]:
    # Özişik (Kirchhoff transform; RF #10): q″ and T at the mid probe; T(L/2) within
    # β(hΔT/L)².
    u = m.unit_m
    probe = next(pr for pr in m.probes if pr.name == "mid")
    assert probe.y == p["thickness"] / 2
    q, t_mid = cf.kirchhoff_slab(p["k0"], p["beta"], p["t_hot"], p["t_cold"],
                                 p["thickness"] * u, probe.y * u)
    bound = p["beta"] * (p["size"] * (p["t_hot"] - p["t_cold"]) / p["thickness"]) ** 2
    return {"q″": Expect(q, ROUND_OFF * q, divide=p["width"] * u * m.depth_m),
            "T(L/2)": Expect(t_mid, bound)}


def rod(m: heat2d.Model, p: dict) -> dict[str, Expect]:
    # Inc §3.5.2 (RF #4): centre within (h/r0)²·ΔTmax; heat out = the power.
    u, r0 = m.unit_m, p["r0"] * m.unit_m
    dt_max = p["qdot"] * r0**2 / (4 * p["k"])
    assert dt_max == pytest.approx(p["dt_max"], rel=1e-15)
    power = p["qdot"] * math.pi * r0**2 * p["height"] * u
    return {"centre temperature": Expect(
                cf.rod_generation(0.0, r0, p["qdot"], p["k"], p["h"], p["t_inf"]),
                (p["size"] / p["r0"]) ** 2 * dt_max),
            "heat out (= power)": Expect(power, ROUND_OFF * power)}


def manufactured(m: heat2d.Model, p: dict) -> dict[str, Expect]:
    # Linear elements: L2 error O(h²), energy-norm error O(h) (Strang & Fix, 1973).
    return {"L2 order": Expect(2.0, 0.2), "energy-norm order": Expect(1.0, 0.2)}


EXPECT = {"composite_wall": composite_wall, "generation_slab": generation_slab,
          "cylinder_wall": cylinder_wall, "fin": fin, "plate_series": plate,
          "radiating_slab/radiating_slab": radiating("radiation"),
          "radiating_slab/radiating_slab_h": radiating("rad. + h = 10"),
          "kirchhoff_slab": kirchhoff, "rod_generation": rod, "manufactured": manufactured,
          "error_estimate": error_estimate}


@pytest.mark.parametrize("case, check", CHECKS, ids=CHECK_IDS)
def test_table_values_are_the_closed_forms_of_the_model_files(case, check):
    model = model_of(case, check)
    key = case.name if case.name in EXPECT else f"{case.name}/{case.run_of(check)[0]}"
    expected = EXPECT[key](model, dict(model.params))
    assert check.check in expected, f"no closed form for {case.name}: {check.check}"
    want = expected[check.check]
    assert check.reference == pytest.approx(want.reference, rel=1e-12, abs=1e-300)
    assert check.divide == pytest.approx(want.divide, rel=1e-12)
    assert check.offset == pytest.approx(want.offset, rel=1e-12, abs=1e-300)
    if isinstance(want.tolerance, str):
        assert check.tolerance.read == want.tolerance
    else:
        assert check.tolerance.read is None
        assert check.tolerance.limit(check.reference, {}) == pytest.approx(want.tolerance,
                                                                           rel=1e-12)


def _names(value) -> set[str]:
    """Names used by the expressions in a TOML value."""
    if isinstance(value, dict | list):
        items = value.values() if isinstance(value, dict) else value
        return set().union(set(), *map(_names, items))
    try:
        return {n.id for n in ast.walk(ast.parse(value, mode="eval"))
                if isinstance(n, ast.Name)} if isinstance(value, str) else set()
    except SyntaxError:                         # a name or title, not an expression
        return set()


@pytest.mark.parametrize("name", sorted({c.model for c in TABLE.cases}
                                        | {k.model for _, k in CHECKS if k.model}))
def test_model_files_run_on_their_own_and_use_their_params(name, tmp_path, capsys):
    # Each model is a plain model file: `heat2d check` meshes it; the title names the
    # source; every [params] value is used by the model, so the values the closed forms
    # read are the values the run solves.
    resource = table.model_file(name)
    data = tomllib.loads(resource.read_text(encoding="utf-8"))
    title = data["model"]["title"]
    assert any(s in title for s in ("Incropera", "Özişik", "Roache")), title
    params = data.get("params", {})
    used = _names({k: v for k, v in data.items() if k != "params"}) | _names(params)
    assert set(params) <= used, sorted(set(params) - used)
    with as_file(resource) as path:
        assert cli.main(["check", str(path)]) == 0
    assert "model is valid" in capsys.readouterr().out


def test_every_model_file_belongs_to_a_case():
    models = {c.model for c in TABLE.cases} | {k.model for _, k in CHECKS if k.model}
    found = {f.name.removesuffix(".toml")
             for f in files(table.PACKAGE).joinpath(table.MODELS_DIR).iterdir()
             if f.name.endswith(".toml")}
    assert found == models


@pytest.mark.parametrize("change, message", [
    (lambda d: d["case"][0].__setitem__("tolerence", {}), r"unknown key 'tolerence'"),
    (lambda d: d["case"][0]["check"][0].pop("basis"), r"missing basis"),
    (lambda d: d["case"][0]["check"][0].__setitem__("reference", "805.7"),
     r"reference: expected float"),
    (lambda d: d["case"][0]["check"][0].__setitem__("tolerance", {"read": "a", "abs": 1}),
     r"read alone"),
    (lambda d: d["case"][0].__setitem__("book", "nobody"), r"book 'nobody' is not in"),
    (lambda d: d["case"].append(d["case"][0]), r"'composite_wall' appears more than once"),
], ids=["unknown-key", "no-basis", "text-reference", "read-and-abs", "book", "repeated"])
def test_a_malformed_table_is_an_error(change, message):
    data = tomllib.loads(files(table.PACKAGE).joinpath(table.TABLE_FILE).read_text(
        encoding="utf-8"))
    change(data)
    with pytest.raises(TableError, match=message):
        parse_table(data)


# ---------------------------------------------------------------------------------------
# The reference formulas against the values published (or computed) in reference-facts.md


def test_closed_forms_reproduce_the_quoted_test_values():
    # RF #5 (Inc §3.6, Table 3.4 case A): k = 15, t = 1 mm, L = 50 mm, h = 25 →
    # q′/θb = 0.8610 W/(m·K), θtip/θb = 0.1081 (4 significant figures: ±5e-5).
    q, tip = cf.fin_convective_tip(15.0, 1e-3, 50e-3, 25.0)
    assert q == pytest.approx(0.8610, abs=5e-5)
    assert tip == pytest.approx(0.1081, abs=5e-5)
    # RF #11 (Inc §1.2.3): k = 1, L = 10 mm, T1 = 400 K, ε = 0.9, Tsur = 300 K →
    # Ts = 392.074 K, q″ = 792.6; with h = 10 also: 384.524 K, 1547.6 W/m² (as quoted).
    ts, q = cf.radiating_face(1.0, 0.01, 400.0, 0.9, 300.0)
    assert ts == pytest.approx(392.074, abs=5e-4) and q == pytest.approx(792.6, abs=0.05)
    ts, q = cf.radiating_face(1.0, 0.01, 400.0, 0.9, 300.0, h=10.0)
    assert ts == pytest.approx(384.524, abs=5e-4) and q == pytest.approx(1547.6, abs=0.05)
    # RF #10 (Özişik): k0 = 0.3, β = 0.004, 100 → 20 °C, L = 1.6 mm → q″ = 18 600 W/m²,
    # T(L/2) = 62.57 °C.
    q, mid = cf.kirchhoff_slab(0.3, 0.004, 100.0, 20.0, 1.6e-3, 0.8e-3)
    assert q == pytest.approx(18600, rel=1e-12)
    assert mid == pytest.approx(62.57, abs=5e-3)
    # RF #3 (Inc §3.5.1): q̇ = 1e6 W/m³, L = 1 mm, k = 1 → ΔTmax = 0.5 K; Ts = T∞ + q̇L/h.
    assert cf.slab_generation(0.0, 1e-3, 1e6, 1.0, 500.0, 20.0) == pytest.approx(
        20.0 + 2.0 + 0.5, rel=1e-15)
    # RF #4 (Inc §3.5.2): r0 = 2 mm, q̇ = 1e6 → ΔTmax = 1.0 K; Ts = T∞ + q̇r0/(2h).
    assert cf.rod_generation(0.0, 2e-3, 1e6, 1.0, 1000.0, 19.0) == pytest.approx(
        19.0 + 1.0 + 1.0, rel=1e-15)
    # RF #7 (Inc Eq. 4.19): the centre of the square is at θ* = 1/4 exactly (superposition
    # of four rotated copies); 200 odd terms converge there far below 1e-12.
    assert cf.plate_series(0.5, 0.5, 1.0, 1.0) == pytest.approx(0.25, abs=1e-12)
    # RF #2 (Inc Table 3.3): conduction alone is the limit h → ∞.
    assert cf.cylinder_heat_rate(0.01, 0.025, 15.0, 150.0, 1e12, 30.0) == pytest.approx(
        2 * math.pi * 15.0 * 120.0 / math.log(2.5), rel=1e-9)
    # RF #1 (Inc §3.1): one slab between two fluids, no contact: q″ = ΔT/(1/h1 + L/k + 1/h2).
    assert cf.composite_wall_flux(100.0, 10.0, [(0.1, 1.0)], 0.0, 10.0, 0.0) == \
        pytest.approx(100.0 / 0.3, rel=1e-15)


def test_error_estimate_case_fails_when_the_estimate_is_wrong(monkeypatch):
    # The case compares each figure with the run's own ± (Inc Eq. 4.19 as the truth). The
    # largest true/± there is about 0.35, so a third of the estimate must fail at that
    # figure; and a ± a hundred times too large must fail the check that it is informative.
    from heat2d.post import estimate

    case = TABLE.case("error_estimate")
    assert all(r["passed"] for r in run.run_case(case))
    real = estimate.nested

    def scaled(factor):
        def nested(result, fine):
            errors = real(result, fine)
            for figure in errors["figures"].values():
                figure["error"] *= factor
            return errors
        return nested

    monkeypatch.setattr(estimate, "nested", scaled(1 / 3))
    failed = {r["check"] for r in run.run_case(case) if not r["passed"]}
    assert failed and all("within ±" in c for c in failed)
    monkeypatch.setattr(estimate, "nested", scaled(100))
    failed = {r["check"] for r in run.run_case(case) if not r["passed"]}
    assert failed == {"centre ± < 1 % of ΔT"}
