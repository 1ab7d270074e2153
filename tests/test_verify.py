"""``heat2d verify``: the bundled verification cases, their report and exit status.

The closed forms in heat2d/verify.py are checked here against the test values that
reference-facts.md quotes for them (section 4, "RF #n"; Inc = Incropera, DeWitt, Bergman &
Lavine, *Fundamentals of Heat and Mass Transfer*, 6th ed.), so a wrong formula cannot make
a wrong result pass.
"""

from __future__ import annotations

import json
import math

import pytest

from heat2d import Heat2dError, cli
from heat2d.verify import cases as verify

PNG = b"\x89PNG\r\n\x1a\n"
FIELDS = {"case", "check", "source", "unit", "reference", "computed", "error", "tolerance",
          "basis", "passed"}


def test_verify_passes_prints_the_table_and_writes_both_files(tmp_path, capsys):
    out = tmp_path / "v"
    assert cli.main(["verify", "--out", str(out)]) == 0
    assert sorted(p.name for p in out.iterdir()) == ["verify.json", "verify.png"]
    doc = json.loads((out / "verify.json").read_text())
    assert doc["passed"] is True and doc["failed"] == 0
    records = doc["records"]
    assert doc["checks"] == len(records)
    # Every bundled case ran and reported at least one check.
    assert {r["case"] for r in records} == set(verify.CASES)
    for r in records:
        assert FIELDS <= set(r), r
        assert r["passed"] is True
        assert r["error"] == pytest.approx(abs(r["computed"] - r["reference"]), rel=1e-12,
                                           abs=1e-300)
        assert 0 <= r["error"] <= r["tolerance"]
        assert r["basis"]                                   # each tolerance is explained
        # Source: the book (or paper) and where in it.
        assert any(s in r["source"] for s in ("Incropera", "Özişik", "Roache")), r["source"]
        if "Incropera" in r["source"]:
            assert "§" in r["source"]
    # The convergence study behind the plot: three meshes, errors falling with h.
    series = next(r["convergence"] for r in records if "convergence" in r)
    assert len(series["h"]) == 3
    assert series["h"] == sorted(series["h"], reverse=True)
    assert series["l2"] == sorted(series["l2"], reverse=True)
    png = (out / "verify.png").read_bytes()
    assert png[:8] == PNG and len(png) > 10_000
    printed = capsys.readouterr().out
    header = printed.splitlines()[0].split()
    assert header[:3] == ["case", "check", "source"]
    assert {"reference", "computed", "error", "tolerance", "pass"} <= set(header)
    assert f"{len(records)} of {len(records)} checks passed" in printed
    assert all(name in printed for name in verify.CASES)


def test_a_wrong_reference_fails_with_exit_1(tmp_path, monkeypatch, capsys):
    # A fin closed form 5 % off: the fin's 1 % tolerance must catch it.
    right = verify.fin_convective_tip

    def wrong(*args):
        q, tip = right(*args)
        return 1.05 * q, tip

    monkeypatch.setattr(verify, "fin_convective_tip", wrong)
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
    def broken():
        raise RuntimeError("solver exploded")

    monkeypatch.setitem(verify.CASES, "fin", broken)
    records = verify.verify(cases=["fin", "composite_wall"])
    assert records[0]["passed"] is False
    assert "RuntimeError: solver exploded" in records[0]["check"]
    assert all(r["passed"] for r in records[1:])
    assert cli.main(["verify", "--case", "fin", "--out", str(tmp_path / "v")]) == 1
    # --debug stops at the exception instead (the command line prints it, exit 1).
    assert cli.main(["verify", "--case", "fin", "--debug", "--out", str(tmp_path / "w")]) == 1
    assert not (tmp_path / "w").exists()


def test_outputs_are_written_all_or_nothing(tmp_path, monkeypatch):
    def no_plot(records, path=None):
        raise OSError("disk full")

    monkeypatch.setattr(verify, "plot_convergence", no_plot)
    out = tmp_path / "v"
    with pytest.raises(Heat2dError, match="cannot write outputs: disk full"):
        verify.write_outputs(verify.verify(cases=["composite_wall"]), out)
    assert list(out.iterdir()) == []                    # no verify.json without its plot


def test_library_function_and_unknown_case():
    records = verify.verify(cases=["composite_wall"])
    assert {r["case"] for r in records} == {"composite_wall"}
    with pytest.raises(ValueError, match=r"unknown verification case 'nope' \(choose from: "):
        verify.verify(cases=["nope"])


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
# The reference formulas against the values published (or computed) in reference-facts.md


def test_closed_forms_reproduce_the_quoted_test_values():
    # RF #5 (Inc §3.6, Table 3.4 case A): k = 15, t = 1 mm, L = 50 mm, h = 25 →
    # q′/θb = 0.8610 W/(m·K), θtip/θb = 0.1081 (4 significant figures: ±5e-5).
    q, tip = verify.fin_convective_tip(15.0, 1e-3, 50e-3, 25.0)
    assert q == pytest.approx(0.8610, abs=5e-5)
    assert tip == pytest.approx(0.1081, abs=5e-5)
    # RF #11 (Inc §1.2.3): k = 1, L = 10 mm, T1 = 400 K, ε = 0.9, Tsur = 300 K →
    # Ts = 392.074 K, q″ = 792.6; with h = 10 also: 384.524 K, 1547.6 W/m² (as quoted).
    ts, q = verify.radiating_face(1.0, 0.01, 400.0, 0.9, 300.0)
    assert ts == pytest.approx(392.074, abs=5e-4) and q == pytest.approx(792.6, abs=0.05)
    ts, q = verify.radiating_face(1.0, 0.01, 400.0, 0.9, 300.0, h=10.0)
    assert ts == pytest.approx(384.524, abs=5e-4) and q == pytest.approx(1547.6, abs=0.05)
    # RF #10 (Özişik): k0 = 0.3, β = 0.004, 100 → 20 °C, L = 1.6 mm → q″ = 18 600 W/m²,
    # T(L/2) = 62.57 °C.
    q, mid = verify.kirchhoff_slab(0.3, 0.004, 100.0, 20.0, 1.6e-3, 0.8e-3)
    assert q == pytest.approx(18600, rel=1e-12)
    assert mid == pytest.approx(62.57, abs=5e-3)
    # RF #3 (Inc §3.5.1): q̇ = 1e6 W/m³, L = 1 mm, k = 1 → ΔTmax = 0.5 K; Ts = T∞ + q̇L/h.
    assert verify.slab_generation(0.0, 1e-3, 1e6, 1.0, 500.0, 20.0) == pytest.approx(
        20.0 + 2.0 + 0.5, rel=1e-15)
    # RF #4 (Inc §3.5.2): r0 = 2 mm, q̇ = 1e6 → ΔTmax = 1.0 K; Ts = T∞ + q̇r0/(2h).
    assert verify.rod_generation(0.0, 2e-3, 1e6, 1.0, 1000.0, 19.0) == pytest.approx(
        19.0 + 1.0 + 1.0, rel=1e-15)
    # RF #7 (Inc Eq. 4.19): the centre of the square is at θ* = 1/4 exactly (superposition
    # of four rotated copies); 200 odd terms converge there far below 1e-12.
    assert verify.plate_series(0.5, 0.5, 1.0, 1.0) == pytest.approx(0.25, abs=1e-12)
    # RF #2 (Inc Table 3.3): conduction alone is the limit h → ∞.
    assert verify.cylinder_heat_rate(0.01, 0.025, 15.0, 150.0, 1e12, 30.0) == pytest.approx(
        2 * math.pi * 15.0 * 120.0 / math.log(2.5), rel=1e-9)
    # RF #1 (Inc §3.1): one slab between two fluids, no contact: q″ = ΔT/(1/h1 + L/k + 1/h2).
    assert verify.composite_wall_flux(100.0, 10.0, [(0.1, 1.0)], 0.0, 10.0, 0.0) == \
        pytest.approx(100.0 / 0.3, rel=1e-15)


def test_error_estimate_case_fails_when_the_estimate_is_wrong(monkeypatch):
    # The case compares each figure with the run's own ± (Inc Eq. 4.19 as the truth). The
    # largest true/± there is about 0.35, so a third of the estimate must fail at that
    # figure; and a ± a hundred times too large must fail the check that it is informative.
    from heat2d.post import estimate

    assert all(r["passed"] for r in verify.case_error_estimate())
    real = estimate.nested

    def scaled(factor):
        def nested(result, fine):
            errors = real(result, fine)
            for figure in errors["figures"].values():
                figure["error"] *= factor
            return errors
        return nested

    monkeypatch.setattr(estimate, "nested", scaled(1 / 3))
    failed = {r["check"] for r in verify.case_error_estimate() if not r["passed"]}
    assert failed and all("within ±" in c for c in failed)
    monkeypatch.setattr(estimate, "nested", scaled(100))
    failed = {r["check"] for r in verify.case_error_estimate() if not r["passed"]}
    assert failed == {"centre ± < 1 % of ΔT"}
