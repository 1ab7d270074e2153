"""Joule heating of conductors carrying current along the depth (heat2d.fem.joule)
against closed forms (heat2d.verify.joule_forms, each naming its source)."""

from __future__ import annotations

import math

import numpy as np
import pytest

import heat2d
from heat2d import ModelError
from heat2d.errors import SolveError
from heat2d.fem import joule
from heat2d.fem.assembly import assemble
from heat2d.fem.geometry import build_geometry
from heat2d.fem.mesh import build_mesh
from heat2d.verify import joule_forms as jf

H = 10.0
AMBIENT = 40.0

WIRE = """
[model]
length_unit = "mm"
depth = 1000

[materials.copper]
k = {k}
resistivity = 1.724e-8
temperature_coefficient = {alpha}

[[shape]]
name = "wire"
material = "copper"
circle = {{ x = 0, y = 0, r = 1 }}
current = {current}

[[boundary]]
name = "air"
on = "exterior"
h = {h}
ambient = {ambient}

[mesh]
size = {size}
"""


def system_of(text: str):
    return assemble(build_mesh(build_geometry(heat2d.parse(text))))


def wire(current: float, *, k: float = 390, alpha: float = 0.00393, h: float = H,
         size: float = 0.3):
    return system_of(WIRE.format(k=k, alpha=alpha, current=current, h=h, ambient=AMBIENT,
                                 size=size))


def polygon(system) -> tuple[float, float]:
    """Area (m²) and perimeter (m) of the meshed section, from the mesh points (the
    circle is meshed as a polygon; the closed forms take its actual size)."""
    mesh, s = system.mesh, system.model.unit_m
    p = mesh.points[mesh.triangles] * s
    d1, d2 = p[:, 1] - p[:, 0], p[:, 2] - p[:, 0]
    area = 0.5 * np.abs(d1[:, 0] * d2[:, 1] - d1[:, 1] * d2[:, 0]).sum()
    e = mesh.points[mesh.edges] * s
    return float(area), float(np.hypot(*(e[:, 1] - e[:, 0]).T).sum())


def lumped(system, alpha=jf.COPPER_ALPHA):
    """R₀ (Ω/m at ambient), R_θ (K·m/W) and α at ambient of the meshed wire."""
    area, perimeter = polygon(system)
    a = jf.alpha_at(alpha, 20.0, AMBIENT)
    r0 = jf.COPPER_RESISTIVITY * (1 + alpha * (AMBIENT - 20.0)) / area
    return r0, 1 / (H * perimeter), a


def test_round_wire_follows_the_lumped_law():
    # Ohm's + Newton's cooling laws: θ = x/(1 − αx), x = I²R₀R_θ (joule_forms).
    # Bi = h r0 / k ≈ 3e-5: the copper wire is isothermal to 1e-5 of its rise.
    r0, rth, a = lumped(wire(1.0))
    onset = jf.lumped_onset_current(r0, rth, a)
    for fraction in (0.3, 0.7, 0.9):
        current = fraction * onset
        system = wire(current)
        sol = joule.solve_joule(system)
        fig = joule.conductor_figures(system, sol.temperature)["wire"]
        theta = jf.lumped_wire_rise(current, r0, rth, a)
        assert fig["ambient_c"] == AMBIENT
        assert fig["mean_rise_k"] == pytest.approx(theta, rel=5e-3)
        assert fig["max_rise_k"] == pytest.approx(theta, rel=5e-3)
        # the resistance follows the linear law at the wire's temperature
        assert fig["resistance_ohm_per_m"] == pytest.approx(r0 * (1 + a * theta), rel=5e-3)
        assert fig["cold_resistance_ohm_per_m"] == pytest.approx(r0, rel=1e-12)
        assert fig["loss_w"] == pytest.approx(current**2 * fig["resistance_ohm_per_m"],
                                              rel=1e-12)
        assert fig["voltage_v"] == pytest.approx(current * fig["resistance_ohm_per_m"],
                                                 rel=1e-12)
    # At 0.9 of the onset current α x = 0.81: the rise is 1/(1 − 0.81) = 5.3 times the
    # rise without the resistivity feedback, so the feedback is really in the solve.
    assert theta > 4 * current**2 * r0 * rth


def test_round_wire_runaway_onset():
    # Runaway at α I² R₀ R_θ = 1 (joule_forms.lumped_onset_current).
    system = wire(1.0)
    r0, rth, a = lumped(system)
    onset = jf.lumped_onset_current(r0, rth, a)
    system = wire(1.5 * onset)
    with pytest.raises(SolveError, match=r"^.*thermal runaway: no steady state above "
                       r"about [0-9.]+ A in conductor wire") as info:
        joule.solve_joule(system)
    found = joule.runaway_onset(info.value)
    assert found == pytest.approx(onset, rel=0.02)
    # the bisection brackets the onset to joule.ONSET_RTOL
    assert found == pytest.approx(onset, rel=3 * joule.ONSET_RTOL)


def test_two_wires_two_fields():
    # Two separate wires (two conductors: a rank-two update) each follow the lumped law
    # for its own current; Newton converges quadratically with the full Jacobian.
    text = WIRE.format(k=390, alpha=0.00393, current=30, h=H, ambient=AMBIENT, size=0.3)
    text += """
[[shape]]
name = "other"
material = "copper"
circle = { x = 10, y = 0, r = 1 }
current = -45
"""
    system = system_of(text)
    sol = joule.solve_joule(system)
    figs = joule.conductor_figures(system, sol.temperature)
    r0, rth, a = lumped(wire(1.0))
    for name, amps in (("wire", 30.0), ("other", 45.0)):
        theta = jf.lumped_wire_rise(amps, r0, rth, a)
        assert figs[name]["mean_rise_k"] == pytest.approx(theta, rel=5e-3)
    assert figs["other"]["current_a"] == -45.0 and figs["other"]["voltage_v"] < 0
    assert len(sol.history) <= 4


def test_radial_profile_without_feedback():
    # α = 0: uniform q̇ = ρ J²; Incropera §3.5.2, T(r) = q̇r0²/(4k)(1 − r²/r0²) + Ts,
    # Ts = T∞ + q̇r0/(2h). A poor conductor (k = 0.1, h = 200) makes the inner rise half
    # of the total. Linear elements: the error falls as the square of the mesh size.
    r_m, current, k, h = 1e-3, 20.0, 0.1, 200.0

    def exact(r):
        return jf.wire_profile(r, r_m, current, jf.COPPER_RESISTIVITY, k, h, AMBIENT)

    inner = exact(0.0) - exact(r_m)
    assert inner == pytest.approx(exact(r_m) - AMBIENT, rel=0.01)
    errors = []
    for size in (0.16, 0.08):
        system = wire(current, k=k, alpha=0.0, h=h, size=size)
        T = joule.solve_joule(system).temperature
        r = np.hypot(*system.mesh.points.T) * system.model.unit_m
        errors.append(np.abs(T - exact(r)).max() / (exact(0.0) - AMBIENT))
        assert T.max() - T.min() == pytest.approx(inner, rel=0.02)
    assert errors[1] < 0.005                       # measured 0.2 %
    assert errors[0] / errors[1] > 3               # measured 3.8 (second order)


STACK = """
[model]
length_unit = "mm"
depth = 50

[materials.fr4]
kx = 1.06
ky = 0.34

[materials.copper]
k = 390
resistivity = 1.724e-8
temperature_coefficient = {alpha}

[[stack]]
name = "bus"
x = 0
y = 0
width = 10
current = 25
layers = [{{ name = "thin", thickness = 0.035, material = "copper" }},
          {{ name = "core", thickness = 0.2, material = "fr4" }},
          {{ name = "thick", thickness = 0.105, material = "copper" }}]

[[boundary]]
name = "air"
on = "exterior"
h = 15
ambient = 25

[mesh]
size = 0.5
"""


def test_parallel_conductors_share_the_current():
    # Kirchhoff + Ohm: I_k = I (1/R_k)/Σ 1/R_j, R_k = ρ/A_k (joule_forms.parallel_split).
    system = system_of(STACK.format(alpha=0.0))
    sol = joule.solve_joule(system)
    fig = joule.conductor_figures(system, sol.temperature)["bus"]
    areas = np.array([10 * 0.035, 10 * 0.105]) * 1e-6
    expected = jf.parallel_split(25.0, jf.COPPER_RESISTIVITY / areas)
    got = [fig["members"][f"bus.{n}"]["current_a"] for n in ("thin", "thick")]
    assert got == pytest.approx(expected, rel=1e-9)
    assert fig["resistance_ohm_per_m"] == pytest.approx(
        jf.COPPER_RESISTIVITY / areas.sum(), rel=1e-9)
    # energy balance: the I²R loss leaves through the convection boundary
    out = system.edge_heat_out(sol.temperature).sum()
    assert out == pytest.approx(fig["loss_w"], rel=1e-9)
    assert sum(m["loss_w"] for m in fig["members"].values()) == pytest.approx(
        fig["loss_w"], rel=1e-12)


def test_parallel_conductors_with_feedback_balance_energy():
    system = system_of(STACK.format(alpha=0.00393))
    sol = joule.solve_joule(system)
    fig = joule.conductor_figures(system, sol.temperature)["bus"]
    out = system.edge_heat_out(sol.temperature).sum()
    assert out == pytest.approx(fig["loss_w"], rel=1e-9)
    members = fig["members"]
    assert sum(m["current_a"] for m in members.values()) == pytest.approx(25.0, rel=1e-12)
    # hot: the resistance is above the cold value, and Newton converged quadratically
    assert fig["resistance_ohm_per_m"] > fig["cold_resistance_ohm_per_m"]
    changes = [c for _, c, _ in sol.history]
    assert len(changes) <= 6 and changes[-1] < 1e-6


def test_results_stage_counts_the_loss():
    # The solution's system carries the loss as generation: the summary's energy balance
    # closes (power in = heat out) and each member's power is its I²R loss.
    from heat2d.post.results import compute_results

    system = system_of(STACK.format(alpha=0.00393))
    sol = joule.solve_joule(system)
    fig = joule.conductor_figures(system, sol.temperature)["bus"]
    summary = compute_results(sol, resistances=False).summary
    balance = summary["energy_balance"]
    assert balance["power_in_w"] == pytest.approx(fig["loss_w"], rel=1e-12)
    assert abs(balance["relative_error"]) < 1e-9
    for name, member in fig["members"].items():
        assert summary["shapes"][name]["power_w"] == pytest.approx(member["loss_w"], rel=1e-12)


def test_jacobian_matches_finite_differences():
    # The Joule part of the Jacobian, local (ρ(T) at fixed E, in the sparse matrix) plus
    # global (E through G = ∫dA/ρ, the rank-one a bᵀ), against central differences of
    # the nodal Joule load.
    system = system_of(STACK.format(alpha=0.00393))
    found = joule.conductors(system)
    rng = np.random.default_rng(1)
    T = 60 + 200 * rng.random(system.K.shape[0])
    R, A, a, b, _ = joule.residual_and_jacobian(system, T, found)
    _, J = system.residual_and_jacobian(T)
    v = rng.standard_normal(len(T))
    eps = 1e-3

    def load(t):
        return joule.joule_state(system, t, found).load

    fd = -(load(T + eps * v) - load(T - eps * v)) / (2 * eps)
    local = (A - J) @ v
    rank_one = -a @ (b.T @ v)
    scale = np.abs(fd).max()
    assert np.abs(local + rank_one - fd).max() < 1e-6 * scale
    # both parts matter
    assert np.abs(local - fd).max() > 1e-2 * scale
    assert np.abs(rank_one - fd).max() > 1e-2 * scale


def test_axisymmetric_current_is_refused():
    text = WIRE.format(k=390, alpha=0.0, current=5, h=H, ambient=AMBIENT, size=0.3)
    text = text.replace('depth = 1000', 'axisymmetric = true').replace(
        "x = 0, y = 0, r = 1", "x = 2, y = 0, r = 1")
    system = system_of(text)
    with pytest.raises(ModelError, match="axisymmetric"):
        joule.solve_joule(system)


def test_adiabatic_trace_pulse_figures():
    # θ = [exp(αρ₂₀J²t/ρc) − 1]/α: 10 A through 35 × 250 µm copper for 10 ms, with
    # ρc = 8960 kg/m³ × 385 J/(kg·K): 74.4 K, and 65.3 K without α.
    with_alpha, without = jf.trace_pulse_check()
    assert with_alpha == pytest.approx(74.4, abs=0.05)
    assert without == pytest.approx(65.3, abs=0.05)
    j = 10 / (35e-6 * 250e-6)
    a = jf.COPPER_RESISTIVITY * j**2 * 0.01 / jf.COPPER_RHO_C
    assert with_alpha == pytest.approx(math.expm1(jf.COPPER_ALPHA * a) / jf.COPPER_ALPHA)
