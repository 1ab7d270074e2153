"""Package figures: junction-to-boundary resistances, the split of each powered shape's
heat among the exits, shares of all heat out, and heat across cut lines.

Sources: "Inc" = Incropera, DeWitt, Bergman & Lavine, *Fundamentals of Heat and Mass
Transfer*, 6th ed., Wiley 2007 (§3.1 the thermal circuit: series and parallel
resistances, L/(kA) and 1/(hA); §4.2 the plate series).

Tolerances (why they are that size):
- ROUND_OFF = 1e-9 relative: where the discrete figure is exact (a field linear on each
  element, patch test, Strang & Fix, from memory; or a figure that is the discrete
  energy balance itself), only the round-off of a direct solve remains.
- HEATER = 1e-7 relative: the 1-D walls are heated by a thin, very conductive layer
  (k = 1e5 W/(m·K)) with uniform generation; its temperature is quadratic, which linear
  triangles do not reproduce. That layer's own rise P·L_h/(2 k_h A) is 3e-7 of the
  total, and the discretisation error of it a few per cent of that (about 2e-8 measured);
  the rest of the field is linear and exact.
"""

from __future__ import annotations

import math
import re

import numpy as np
import pytest

import heat2d
from heat2d import ModelError, cli
from heat2d.post.text import format_summary
from tests.common import verify_model

ROUND_OFF = 1e-9
HEATER = 1e-7

H_SLAB = 0.05            # wall height, m (the area A = H·depth with depth 1 m)
L_H, K_H = 0.002, 1e5    # heater layer: thickness m, conductivity W/(m·K)
L_A, K_A = 0.02, 2.0     # slab a
L_B, K_B = 0.01, 0.5     # slab b
H_FILM = 40.0            # convection on the outer face, W/(m²·K)
POWER = 30.0             # W (for the 1 m depth)

WALL = f"""
[model]
length_unit = "m"

[materials.heater]
k = {K_H}

[materials.a]
k = {K_A}

[materials.b]
k = {K_B}

[[shape]]
name = "chip"
material = "heater"
rect = {{ x = 0, y = 0, width = {L_H}, height = {H_SLAB} }}
power = {POWER}

[[shape]]
name = "slab_a"
material = "a"
rect = {{ x = {L_H}, y = 0, width = {L_A}, height = {H_SLAB} }}

[[shape]]
name = "slab_b"
material = "b"
rect = {{ x = {L_H + L_A}, y = 0, width = {L_B}, height = {H_SLAB} }}

[[boundary]]
name = "film"
on = "slab_b.right"
h = {H_FILM}
ambient = 25

[[cut]]
name = "mid_a"
through = [[{L_H + L_A / 2}, 0], [{L_H + L_A / 2}, {H_SLAB}]]

[mesh]
size = 0.004
"""
"""A composite wall heated at its insulated left face: chip | slab a | slab b | film."""

A = H_SLAB * 1.0
R_CHIP = L_H / (K_H * A)                       # the heater layer's own L/(kA)
R_A, R_B, R_FILM = L_A / (K_A * A), L_B / (K_B * A), 1 / (H_FILM * A)   # Inc §3.1


def run(text: str, **options) -> heat2d.Result:
    return heat2d.run(heat2d.parse(text), **options)


def test_junction_to_boundary_resistance_of_a_composite_wall_is_the_series_sum():
    r = run(WALL, estimate=False)
    p = r.summary["package"]["chip"]
    assert p["power_w"] == pytest.approx(POWER, rel=ROUND_OFF)
    assert p["basis"] == "linear"
    to = p["to"]["film"]
    # Series circuit (Inc §3.1, Eq. 3.19): from the chip's hottest point (its insulated
    # face) to the wall's outer surface: half the heater's own L/(kA) (uniform generation,
    # the flux grows linearly across it: Inc §3.5, from memory) + L/(kA) of each slab.
    assert to["resistance_k_per_w"] == pytest.approx(R_CHIP / 2 + R_A + R_B, rel=HEATER)
    # From the chip's mean: the quadratic profile's mean lies R_CHIP/3 above its cold side.
    assert to["resistance_from_mean_k_per_w"] == pytest.approx(R_CHIP / 3 + R_A + R_B,
                                                               rel=HEATER)
    # To the ambient the film adds 1/(hA) (Inc §3.1, Eq. 3.19).
    assert p["rise_k_per_w"] == pytest.approx(R_CHIP / 2 + R_A + R_B + R_FILM, rel=HEATER)
    # One exit: it takes all of the chip's heat (energy conservation, Inc §1.3).
    assert to["share"] == pytest.approx(1.0, rel=ROUND_OFF)
    assert to["heat_w"] == pytest.approx(POWER, rel=ROUND_OFF)
    # The same from the operating state: (T_max − T̄_surface)/P (one source, linear).
    t_max = r.summary["shapes"]["chip"]["max"]
    t_surface = r.summary["boundaries"]["film"]["mean_temperature"]
    assert (t_max - t_surface) / POWER == pytest.approx(to["resistance_k_per_w"],
                                                        rel=ROUND_OFF)


TWO_EXITS = WALL.replace(
    f"""rect = {{ x = 0, y = 0, width = {L_H}, height = {H_SLAB} }}""",
    f"""rect = {{ x = {L_A}, y = 0, width = {L_H}, height = {H_SLAB} }}""").replace(
    f"""rect = {{ x = {L_H}, y = 0, width = {L_A}, height = {H_SLAB} }}""",
    f"""rect = {{ x = 0, y = 0, width = {L_A}, height = {H_SLAB} }}""").replace(
    """[[boundary]]
name = "film\"""", """[[boundary]]
name = "plate"
on = "slab_a.left"
temperature = 20

[[boundary]]
name = "film\"""")
"""The chip between the slabs: slab a to a plate held at 20 °C on the left, slab b and
the film (ambient 25 °C) on the right."""


def test_a_source_with_two_exits_splits_in_inverse_proportion_to_their_resistances():
    r = run(TWO_EXITS, estimate=False)
    to = r.summary["package"]["chip"]["to"]
    # Parallel paths from the chip (Inc §3.1): Q1/Q2 = R2/R1. With generation in the
    # chip, each path counts from the chip's middle: T(left) − T(right) of the chip is
    # (Q2 − Q1)·R_chip/2, so the exact 1-D split uses R + R_chip/2 on both sides.
    r1 = R_CHIP / 2 + R_A
    r2 = R_CHIP / 2 + R_B + R_FILM
    assert to["plate"]["share"] == pytest.approx(r2 / (r1 + r2), rel=HEATER)
    assert to["film"]["share"] == pytest.approx(r1 / (r1 + r2), rel=HEATER)
    assert to["plate"]["heat_w"] == pytest.approx(POWER * r2 / (r1 + r2), rel=HEATER)
    # Junction-to-boundary (T_max − T̄_b)/P with all of P: to the held plate about the
    # two paths in parallel, r1·r2/(r1 + r2) (Inc §3.1). Exactly (1-D, uniform generation
    # in the chip, from the flux q(x) = −Q1 + P·x/L_h across it): the max lies where q = 0
    # and stands s1·R_a + s1²·R_chip/2 per watt above the plate, s1 = Q1/P; to the film's
    # surface less the drop across the film, s2·R_film.
    s1, s2 = r2 / (r1 + r2), r1 / (r1 + r2)
    assert to["plate"]["resistance_k_per_w"] == pytest.approx(s1 * R_A + s1**2 * R_CHIP / 2,
                                                              rel=HEATER)
    assert to["plate"]["resistance_k_per_w"] == pytest.approx(r1 * r2 / (r1 + r2), rel=1e-6)
    assert to["film"]["resistance_k_per_w"] == pytest.approx(
        s1 * R_A + s1**2 * R_CHIP / 2 - s2 * R_FILM, abs=HEATER * r1)   # error: the chip's
    # heat_share (the °C/W machinery's key) is the same share of that shape's heat.
    share = r.summary["thermal_resistance"]["heat_share"]["chip"]
    assert share["plate"] == pytest.approx(to["plate"]["share"], rel=ROUND_OFF)


def test_shares_of_all_heat_out_sum_to_one_and_differ_from_the_shapes_share_by_the_driven_flow():
    r = run(TWO_EXITS, estimate=False)
    b = r.summary["boundaries"]
    out = {name: v["heat_out_w"] for name, v in b.items()}
    leaving = sum(max(q, 0.0) for q in out.values())
    # Shares of all heat out: heat_out_w over the sum of the flows that leave the body
    # (definition, docs/model-format.md); both exits take heat out here, so they add to 1.
    assert sum(v["share_of_heat_out"] for v in b.values()) == pytest.approx(1.0,
                                                                          rel=ROUND_OFF)
    for name, v in b.items():
        assert v["share_of_heat_out"] == pytest.approx(out[name] / leaving, rel=ROUND_OFF)
    # Why they differ from the chip's shares (superposition, linear model): the 25 °C
    # ambient drives heat through the unpowered wall into the 20 °C plate,
    # (25 − 20)/(R_film + R_b + R_chip + R_a) (series, Inc §3.1; linear field, exact).
    driven = 5.0 / (R_FILM + R_B + R_CHIP + R_A)
    assert b["plate"]["heat_driven_by_boundary_values_w"] == pytest.approx(driven,
                                                                          rel=ROUND_OFF)
    assert b["film"]["heat_driven_by_boundary_values_w"] == pytest.approx(-driven,
                                                                         rel=ROUND_OFF)
    to = r.summary["package"]["chip"]["to"]
    for name in b:
        assert b[name]["heat_from_powered_shapes_w"] == pytest.approx(to[name]["heat_w"],
                                                                      rel=ROUND_OFF)
        assert out[name] == pytest.approx(to[name]["heat_w"]
                                          + b[name]["heat_driven_by_boundary_values_w"],
                                          rel=ROUND_OFF)
    assert b["plate"]["share_of_heat_out"] > to["plate"]["share"] + 0.01  # really differ
    text = format_summary(r.summary)
    assert "Junction-to-boundary resistance, K/W" in text
    assert "of all out: share of all heat leaving the body" in text
    assert "of its heat: share of that shape's heat" in text


def test_a_cut_across_a_one_dimensional_wall_carries_all_the_heat():
    r = run(WALL)
    cut = r.summary["cuts"]["mid_a"]
    # Everything the chip makes crosses slab a (energy conservation, Inc §1.3); the
    # weak-form crossing is the discrete balance of the left side, exact to round-off.
    assert cut["heat_w"] == pytest.approx(POWER, rel=ROUND_OFF)
    assert cut["generated_on_from_side_w"] == pytest.approx(POWER, rel=ROUND_OFF)
    assert cut["closed"] is False
    # The field is linear in the slab: the nested refinement finds nothing to change.
    assert 0 <= cut["heat_w_error"] < 1e-6 * POWER
    assert r.summary["errors"]["figures"]["cuts.mid_a.heat_w"]["error"] == cut["heat_w_error"]
    # The reverse direction reports the same heat with the other sign.
    back = run(WALL.replace(f"[[{L_H + L_A / 2}, 0], [{L_H + L_A / 2}, {H_SLAB}]]",
                            f"[[{L_H + L_A / 2}, {H_SLAB}], [{L_H + L_A / 2}, 0]]"),
               estimate=False)
    assert back.summary["cuts"]["mid_a"]["heat_w"] == pytest.approx(-POWER, rel=ROUND_OFF)


PANEL = """
[model]
length_unit = "mm"

[materials.m]
k = 3.0

[materials.n]
k = 40.0

[[shape]]
name = "lower"
material = "m"
rect = { x = 0, y = 0, width = 30, height = 4 }

[[shape]]
name = "upper"
material = "n"
rect = { x = 0, y = 4, width = 30, height = 2 }

[[shape]]
name = "hot"
material = "n"
rect = { x = 2, y = 1, width = 4, height = 2 }
power = 5

[[interface]]
name = "bond"
between = ["lower", "upper"]
resistance = 2e-4

[[boundary]]
name = "left_face"
on = "lower.left"
h = 500
ambient = 30

[[boundary]]
name = "right_face"
on = "upper.right"
temperature = 25

[[boundary]]
name = "cooler"
on = "lower.right"
h = 800
ambient = 20

[[cut]]
name = "middle"
through = [[15, 0], [16, 3], [14, 6]]

[mesh]
size = 0.8
"""
"""A 2-D panel: a powered block in a two-layer strip with a contact resistance between
the layers; a bent cut through the middle crosses the interface."""


NONLINEAR_PANEL = PANEL.replace("k = 3.0", "k = [[0, 3.0], [200, 2.0]]").replace(
    "h = 500\nambient = 30\n", "h = 500\nambient = 30\nemissivity = 0.9\nsurroundings = 30\n")
"""The panel with a k(T) table and a radiating left face (solved by Newton's method)."""


@pytest.mark.parametrize("text", [PANEL, NONLINEAR_PANEL], ids=["linear", "nonlinear"])
def test_a_cut_through_a_two_dimensional_model_closes_its_sides_energy_balance(text):
    r = run(text, estimate=False)
    assert r.summary["solver"]["nonlinear"] is (text is NONLINEAR_PANEL)
    s = r.summary
    q = s["cuts"]["middle"]["heat_w"]
    b = {n: v["heat_out_w"] for n, v in s["boundaries"].items()}
    # Energy balance of each side (Inc §1.3, conservation): walking from the bottom
    # (15, 0) up, the left of the line is the side with the block; that side's only boundary
    # is left_face, and the band around the line touches only insulated edges. So the
    # heat across = power generated there − heat out of that side's boundaries, and the
    # right side passes it on to its exits. The weak form makes this the discrete
    # balance itself, interface coupling included, with k and the radiation at the
    # solved state (the residual the boundary heat comes from): round-off.
    assert s["cuts"]["middle"]["generated_on_from_side_w"] == pytest.approx(5.0, rel=ROUND_OFF)
    power = s["energy_balance"]["generated_w"]
    assert q == pytest.approx(power - b["left_face"], rel=ROUND_OFF)
    assert q == pytest.approx(b["right_face"] + b["cooler"], rel=ROUND_OFF)
    assert abs(q) > 0.1 * power                       # a real flow, not round-off


def _plate_cut_exact(y_c: float, side: float, k: float, dt: float, depth_m: float,
                     terms: int = 400) -> float:
    """Heat down through the line y = y_c of the §4.2 plate, W: −k ∂T/∂y integrated over
    x, from the derivative of the series (Inc §4.2, Eq. 4.19) term by term (not from a
    reference mesh), with ∫₀ᴸ sin(λx) dx = 2/λ for odd n:
    Q = k·ΔT·depth·(8/π) Σ cosh(λ y_c)/(n sinh(λ W))."""
    n = np.arange(1, 2 * terms, 2)
    lam = n * math.pi / side
    # cosh(λy)/sinh(λW) with exponentials (no overflow): e^{λ(y−W)}(1 + e^{−2λy})/(1 − e^{−2λW})
    ratio = np.exp(lam * (y_c - side)) * (1 + np.exp(-2 * lam * y_c)) / -np.expm1(-2 * lam * side)
    return float(k * dt * depth_m * 8 / math.pi * np.sum(ratio / n))


@pytest.mark.parametrize("y_c", [5.0, 7.5])
def test_the_cuts_error_estimate_covers_the_true_error_on_the_plate(y_c):
    model = verify_model("plate", size=0.5).edited(
        lambda d: d.setdefault("cut", []).append(
            {"name": "across", "through": [[0, y_c], [10, y_c]]}))
    r = heat2d.run(model)
    cut = r.summary["cuts"]["across"]
    k, dt = 50.0, 100.0                 # plate.toml: k = 50 W/(m·K), T2 − T1 = 120 − 20
    exact = _plate_cut_exact(y_c, 10.0, k, dt, model.depth_m)
    # The series converges: the terms fall as e^{−λ(W − y_c)}.
    assert exact == pytest.approx(_plate_cut_exact(y_c, 10.0, k, dt, model.depth_m, 800),
                                  rel=1e-12)
    error = abs(cut["heat_w"] - exact)
    assert error <= cut["heat_w_error"]                 # the ± covers the true error
    # and is of use. The plate's top corners jump from T2 to T1 (a singularity of
    # unbounded energy): the heat through a line converges slowly, and a cut that does
    # not lie on mesh edges reads the flux up to half a triangle off the line, so on
    # this mesh (h = L/20) the true error is 5 to 6 % and the ± about twice that
    # (measured on h = L/10 ... L/80: true error / ± between 0.50 and 0.56).
    assert cut["heat_w_error"] < 0.15 * exact
    assert error > 0.02 * exact                         # a real error to cover


BAD_CUTS = [
    # (the cut's keys, the message, the line named: 0 the [[cut]] header, 2 `through`)
    ('through = [[1, 1]]', r'cut "c": through: a cut needs at least 2 points', 2),
    ('through = [[0.01, 0], [0.01, 0.05], [0.01, 0.05]]', r'cut "c": through\[2\]: repeats',
     2),
    ('through = [[0.01, 0], [0.01, 0.3]]', r'cut "c": through\[1\] = \[0.01, 0.3\] is outside',
     0),
    ('through = [[0.01, 0], [0.01, 0.02]]', r'cut "c": does not separate the body', 0),
    ('through = [[0.03, 0.01], [0.0301, 0.01], [0.0301, 0.0101], [0.03, 0.01]]',
     r'cut "c": does not separate the mesh', 0),
    ('through = [[-1, -1], [1, -1], [1, 1], [-1, 1], [-1, -1]]',
     r'cut "c": through\[0\] = \[-1, -1\] is outside the body', 0),
    ('at = [1, 2]', r'cut "c": unknown key .at.', 2),
    ('through = "x"', r'cut "c": through: a cut needs at least 2 points \[x, y\], got .x.', 2),
]


@pytest.mark.parametrize(("spec", "message", "offset"), BAD_CUTS)
def test_bad_cuts_are_refused_with_the_entry_and_line(spec, message, offset, tmp_path,
                                                      capsys):
    text = WALL + f'\n[[cut]]\nname = "c"\n{spec}\n'
    header = text.splitlines().index('name = "c"')      # 0-based name line = 1-based header
    path = tmp_path / "wall.toml"
    path.write_text(text, encoding="utf-8")
    # Bad input exits 2 naming the file, the entry and its line, and writes nothing
    # (project rule, DEVELOPERS.md "Errors").
    assert cli.main(["run", str(path), "--out", str(tmp_path / "out"), "--quiet",
                     "--no-estimate"]) == 2
    err = capsys.readouterr().err
    assert len(err.strip().splitlines()) == 1, err
    assert re.search(message, err), err
    assert f"(line {header + offset})" in err, err
    assert not (tmp_path / "out").exists()


def test_a_duplicate_cut_name_is_refused():
    text = WALL + '\n[[cut]]\nname = "mid_a"\nthrough = [[0.01, 0], [0.01, 0.05]]\n'
    with pytest.raises(ModelError, match=r'cut "mid_a": name already used by another cut'):
        heat2d.parse(text)
