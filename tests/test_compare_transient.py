"""heat2d compare of two transient runs (result folders or models): the peaks per shape,
the hottest moment, the limits' margins, the steady resistance and Z(t), the periodic
peaks side by side with B − A; a transient run against a steady one is refused.

References:
* linearity of the heat equation with constant properties (superposition, Carslaw &
  Jaeger, Conduction of Heat in Solids, 2nd ed., §1.14): with every power scaled by s,
  each rise above the held boundary scales by s, so B − A = (s − 1)(A − T_sink);
* the steady resistance of a slab, R = L/(kA) (Incropera et al., Fundamentals of Heat and
  Mass Transfer, 6th ed., §3.1), the same in both runs since only the powers change.
"""

from __future__ import annotations

import json
from pathlib import Path

import pytest

import heat2d
from heat2d.cli.main import main
from heat2d.compare import compare, compare_sides, format_comparison, load_side
from heat2d.errors import ModelError
from heat2d.report import read_compare, run_report
from heat2d.transient.run import run_transient
from tests.test_report import Page

SCALE = 1.25
T_SINK = 20.0
L, K, WIDTH, DEPTH = 1e-3, 1.0, 0.5e-3, 1e-3


def slab_text(scale: float = 1.0, *, transient: bool = True, limit: float = 32.0) -> str:
    """The pulsed slab of tests/test_report_transient.py with every power scaled."""
    pulse = (f"power_pulse = {{ power = {0.02 * scale}, width = 0.01, period = 0.05, "
             "count = 5 }\n" if transient else "")
    section = "[transient]\nend = 1\nfirst = 1e-3\n" if transient else ""
    return f'''[model]
title = "Pulsed slab"
length_unit = "mm"
depth = 1

[materials.slab]
k = {K}
density = 1000
specific_heat = 1000

[materials.heater]
k = 1000
density = 1
specific_heat = 50

[[shape]]
name = "slab"
material = "slab"
rect = {{ x = 0, y = 0, width = 0.5, height = 1 }}

[[shape]]
name = "heater"
material = "heater"
rect = {{ x = 0, y = 1, width = 0.5, height = 0.01 }}
power = {0.002 * scale}
{pulse}mesh_size = 0.01
max_temperature = {limit}

[[boundary]]
name = "sink"
on = "slab.bottom"
temperature = {T_SINK}

[[probe]]
name = "middle"
at = [0.25, 0.5]

[mesh]
size = 0.25

{section}'''


@pytest.fixture(scope="module")
def runs(tmp_path_factory) -> dict[str, Path]:
    """Result folders: A, B (every power × SCALE) and a steady run S of the same slab."""
    base = tmp_path_factory.mktemp("compare_transient")
    out = {}
    for key, text in (("A", slab_text()), ("B", slab_text(SCALE)),
                      ("S", slab_text(transient=False))):
        model = base / f"{key.lower()}.toml"
        model.write_text(text, encoding="utf-8")
        out[key] = base / key
        assert main(["run", str(model), "--out", str(out[key]), "--quiet"]) == 0
        out[key + "_model"] = model
    return out


@pytest.fixture(scope="module")
def doc(runs):
    return compare_sides(load_side(runs["A"], label="A"), load_side(runs["B"], label="B"))


def test_peaks_scale_with_the_powers(doc, runs):
    assert doc["mode"] == "transient"
    sa = json.loads((runs["A"] / "summary.json").read_text(encoding="utf-8"))
    for name in ("slab", "heater"):
        e = doc["shapes"][name]
        # Superposition (Carslaw & Jaeger §1.14): the rise scales with the powers; the
        # two marches take different steps, so they agree to their time-step error.
        assert e["delta"] == pytest.approx((SCALE - 1) * (e["a"] - T_SINK), abs=2e-3)
        assert e["error"] == pytest.approx(sa["shapes"][name]["max_error"]
                                           + json.loads((runs["B"] / "summary.json")
                                                        .read_text())["shapes"][name][
                                               "max_error"], rel=1e-12)
        assert e["significant"] is None          # no mesh error estimate
        assert e["a_time_s"] == e["b_time_s"] == pytest.approx(0.21, abs=1e-12)
    probe = doc["probes"]["middle"]
    assert probe["delta"] == pytest.approx((SCALE - 1) * (probe["a"] - T_SINK), abs=2e-3)
    hs = doc["hot_spot"]
    assert doc["same_geometry"] and doc["same_moment"] and hs["same_shape"]
    assert hs["delta"] == pytest.approx((SCALE - 1) * (hs["a"]["temperature"] - T_SINK),
                                        abs=2e-3)


def test_resistance_periodic_peak_and_margins(doc):
    z = doc["zth"]["heater"]
    # The same slab in both: R = L/(kA) (Incropera §3.1), Δ = 0 (solved directly on the
    # same mesh), and Z(t) per watt is the same at every decade.
    assert z["r_k_per_w"]["a"] == pytest.approx(L / (K * WIDTH * DEPTH), rel=1e-4)
    assert z["r_k_per_w"]["delta"] == pytest.approx(0.0, abs=1e-9 * z["r_k_per_w"]["a"])
    assert set(z["at"]) == {"0.001", "0.01", "0.1", "1"}
    for e in z["at"].values():
        assert abs(e["delta"]) < 1e-3 * e["a"]
    p = doc["periodic"]["heater"]
    # Each run's periodic peak comes from its own Foster fit of its marched Z(t): the
    # fits agree to their fit error (a few 1e-4 here), not to round-off.
    assert p["delta"] == pytest.approx((SCALE - 1) * (p["a"] - T_SINK), rel=1e-3)
    assert not p["same_train"] and p["b_train"]["pulse_w"] == pytest.approx(0.02 * SCALE)
    m = doc["margins"]["heater"]
    assert m["delta"] == pytest.approx(-doc["shapes"]["heater"]["delta"], abs=1e-12)
    assert m["a_exceeded"] is False and m["b_exceeded"] is (m["b"] < 0)


def test_text_and_verdict(doc):
    text = format_comparison(doc)
    assert "compare (transient runs)" in text
    e = doc["shapes"]["heater"]
    assert f"{e['a']:.3f}" in text and f"{e['b']:.3f}" in text and f"{e['delta']:.3f}" in text
    assert f"heater peak is {e['delta']:.2f} K higher in B" in doc["verdict"]
    assert "no mesh error estimate" in doc["verdict"]
    assert "at t = 0.21 s in both" in doc["verdict"]
    json.dumps(doc, allow_nan=False)             # compare.json holds no NaN


def test_two_transient_models_are_marched_when_given_the_solver():
    a = heat2d.parse(slab_text(), source="a.toml")
    b = heat2d.parse(slab_text(SCALE), source="b.toml")
    with pytest.raises(ModelError, match="transient model"):
        compare(a, b)
    doc = compare(a, b, transient=run_transient)
    e = doc["shapes"]["heater"]
    assert e["delta"] == pytest.approx((SCALE - 1) * (e["a"] - T_SINK), abs=2e-3)


def test_transient_against_steady_is_refused(runs, capsys):
    with pytest.raises(ModelError) as info:
        compare_sides(load_side(runs["A"], label="A"), load_side(runs["S"], label="B"))
    message = str(info.value)
    assert "\n" not in message
    assert str(runs["A"]) in message and str(runs["S"]) in message
    assert "transient" in message and "steady" in message
    assert main(["compare", str(runs["S"]), str(runs["A"]), "--out",
                 str(runs["A"].parent / "refused")]) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and "cannot compare a steady run with a transient run" in err[0]
    assert not (runs["A"].parent / "refused").exists()


def test_command_line_and_report_with_the_comparison(runs, tmp_path, capsys):
    out = tmp_path / "cmp"
    assert main(["compare", str(runs["A"]), str(runs["B"]), "--out", str(out),
                 "--quiet"]) == 0
    assert {p.name for p in out.iterdir()} == {"compare.json", "compare.txt", "compare.png"}
    saved = json.loads((out / "compare.json").read_text(encoding="utf-8"))
    assert saved["mode"] == "transient"
    parsed = Page(run_report(runs["A"], compare=read_compare(out)))
    assert "compare" in parsed.sections
    e = saved["shapes"]["heater"]
    assert f"{e['delta']:.2f} ± {e['error']:.2g}" in parsed.text
    r = saved["zth"]["heater"]["r_k_per_w"]
    assert f"{r['a']:.4g}" in parsed.text
    p = saved["periodic"]["heater"]
    assert f"{p['b']:.2f}" in parsed.text
    assert "Difference map (B − A) at the hottest moment" in parsed.text
    assert len(parsed.images) == 5               # the run's four and the comparison map
