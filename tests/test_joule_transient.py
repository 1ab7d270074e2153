"""Joule heating in the transient march (heat2d.transient.joule_stepper) against the
adiabatic pulse law (heat2d.verify.joule_forms), finite differences, the energy balance
and the steady Joule solve (heat2d.fem.joule.solve_joule)."""

from __future__ import annotations

import importlib
import math

import numpy as np
import pytest

import heat2d
from heat2d.fem import joule
from heat2d.fem.assembly import assemble
from heat2d.fem.geometry import build_geometry
from heat2d.fem.mesh import build_mesh
from heat2d.transient.forcing import forcing
from heat2d.transient.joule_stepper import JouleStepper, joule_steady_start
from heat2d.verify import joule_forms as jf

march_module = importlib.import_module("heat2d.transient.march")

TRACE = """
[model]
length_unit = "mm"
depth = 1
[materials.copper]
k = 390
density = 8960
specific_heat = 385
resistivity = 1.724e-8
temperature_coefficient = {alpha}
[[shape]]
name = "trace"
material = "copper"
rect = {{ x = 0, y = 0, width = 0.25, height = 0.035 }}
current_pulse = {{ current = 10, width = 0.01 }}
[[boundary]]
name = "air"
on = "trace"
h = 1e-3
ambient = 20
[transient]
end = 0.02
initial = 20
[mesh]
size = 0.02
"""
"""The worked example of joule_forms.trace_pulse_check: 10 A for 10 ms through a 35 µm ×
250 µm copper trace. The model needs a heat path: h = 1e-3 W/(m²·K) takes h·perimeter·θ
·t / (ρc·A·θ) = 2e-7 of the heat in 10 ms, far below the 0.5 % checked."""

BOARD = """
[model]
length_unit = "mm"
depth = 10
[materials.copper]
k = 390
density = 8960
specific_heat = 385
resistivity = 1.724e-8
temperature_coefficient = 0.00393
[materials.fr4]
k = 0.3
density = 1850
specific_heat = 1100
[[shape]]
name = "board"
material = "fr4"
rect = {{ x = -1, y = -0.4, width = 2, height = 0.4 }}
[[shape]]
name = "trace"
material = "copper"
rect = {{ x = -0.125, y = 0, width = 0.25, height = 0.035 }}
{current}
[[boundary]]
name = "plane"
on = "board.bottom"
temperature = 20
[[boundary]]
name = "air"
on = "exterior"
h = 20
ambient = 30
[transient]
end = 20
[mesh]
size = 0.1
"""
"""A copper trace on FR4 over a plane held at 20 °C, air above (a fixed boundary, a
convection boundary and a temperature-dependent resistivity)."""


def system_of(text: str):
    return assemble(build_mesh(build_geometry(heat2d.parse(text))))


def trace_rise(alpha: float) -> float:
    # joule_forms.adiabatic_pulse_rise: ρc dθ/dt = ρ₂₀(1 + αθ) J² integrated,
    # θ = [exp(α ρ₂₀ J² t / ρc) − 1] / α (θ = ρ₂₀ J² t / ρc for α = 0).
    j = 10 / (35e-6 * 250e-6)
    return jf.adiabatic_pulse_rise(j, 0.01, jf.COPPER_RESISTIVITY, alpha, jf.COPPER_RHO_C)


def test_trace_pulse_reference_figures():
    # joule_forms.trace_pulse_check: 74.4 K with α = 0.00393/K, 65.3 K with α = 0.
    with_alpha, without = jf.trace_pulse_check()
    assert with_alpha == pytest.approx(74.4, abs=0.05)
    assert without == pytest.approx(65.3, abs=0.05)
    assert trace_rise(jf.COPPER_ALPHA) == with_alpha


def test_current_pulse_edges_are_breaks():
    system = system_of(BOARD.format(current="current_pulse = { current = 5, width = 0.2, "
                                    "period = 1, count = 3, delay = 0.5 }"))
    drive = forcing(system)
    assert drive.breaks(20.0) == pytest.approx([0.5, 0.7, 1.5, 1.7, 2.5, 2.7])
    # left limit at the end of a step: the value inside the step that ends on the edge
    assert drive.currents(0.7, left=0.01)[0] == 5.0
    assert drive.currents(0.7)[0] == 0.0
    assert drive.initial_current[0] == 0.0
    # Zth-like forcing (explicit powers) carries no current
    assert not forcing(system, power={"trace": 1.0}).has_current


def test_stepper_jacobian_matches_finite_differences():
    # d(H + sR)/dT of the stage: the sparse part (local ρ(T)) minus the rank-one field
    # part a bᵀ, against central differences of the stepper's own residual.
    system = system_of(BOARD.format(current="current = 12"))
    drive = forcing(system)
    start = np.full(system.K.shape[0], 20.0)
    stepper = JouleStepper(system, drive, start, None, "direct")
    rng = np.random.default_rng(3)
    T = 40 + 30 * rng.random(len(start))
    R, J = stepper.residual(T, 1.0, jacobian=True)
    a, b = stepper.low_rank
    free = stepper.free
    v = rng.standard_normal(len(T))
    v[~free] = 0
    eps = 1e-2                         # K (the load is smooth in T; round-off below)
    fd = (stepper.residual(T + eps * v, 1.0) - stepper.residual(T - eps * v, 1.0)) / (2 * eps)
    rank_one = a @ (b.T @ v[free])
    full = J[free][:, free] @ v[free] - rank_one
    scale = np.abs(rank_one).max()
    assert np.abs(full - fd[free]).max() < 1e-6 * scale          # measured 1.3e-8
    # without the rank-one part the Jacobian misses it all
    assert np.abs(J[free][:, free] @ v[free] - fd[free]).max() > 0.5 * scale


def tr_bdf2(stepper, T, t_end: float, n: int) -> np.ndarray:
    """n fixed TR-BDF2 steps (the stages of heat2d.transient.march) to t_end."""
    g = 2 - math.sqrt(2)
    a, c = 1 / (g * (2 - g)), (1 - g) ** 2 / (g * (2 - g))
    free, h, t = stepper.free, t_end / n, 0.0
    for _ in range(n):
        s = g * h / 2
        heat_n, res_n = stepper.H(T), stepper.residual(T, t)
        mid = stepper.stage(s, heat_n[free] - s * res_n[free], t + g * h, T)
        T = stepper.stage(s, a * stepper.H(mid)[free] - c * heat_n[free], t + h,
                          T + (mid - T) / g, h)
        t += h
    return T


@pytest.mark.parametrize("woodbury", [True, False])
def test_stepper_adiabatic_trace_pulse(woodbury, monkeypatch):
    # joule_forms.adiabatic_pulse_rise / trace_pulse_check (the energy balance
    # ρc dθ/dt = ρ(θ) J² with ρ linear in temperature): 74.41 K after 10 ms.
    monkeypatch.setattr(JouleStepper, "woodbury", woodbury)
    system = system_of(TRACE.format(alpha=jf.COPPER_ALPHA))
    start = np.full(system.K.shape[0], 20.0)
    stepper = JouleStepper(system, forcing(system), start, None, "direct")
    T = tr_bdf2(stepper, start, 0.01, 40)
    rise = float(T.mean() - 20)
    assert rise == pytest.approx(trace_rise(jf.COPPER_ALPHA), rel=5e-3)   # measured 1.8e-6
    assert T.max() - T.min() < 1e-6 * rise                  # uniform: no gradient
    if woodbury:
        iterations = stepper.iterations
        # the rank-one part applied: fewer modified-Newton iterations than without it
        plain = JouleStepper(system, forcing(system), start, None, "direct")
        plain.woodbury = False
        tr_bdf2(plain, start, 0.01, 40)
        assert iterations < plain.iterations               # measured 160 < 280


def test_steady_start_matches_steady_joule_solve():
    # joule_steady_start with the current before t = 0 (the first value of the steps)
    # equals the steady Joule solve of the same model with that constant current.
    system = system_of(BOARD.format(current="current_steps = [[0, 3], [1, 5]]"))
    drive = forcing(system)
    T = joule_steady_start(system, drive, "direct")
    ref = joule.solve_joule(system_of(BOARD.format(current="current = 3")),
                            method="direct").temperature
    assert np.abs(T - ref).max() < 1e-9 * np.abs(ref).max()
    assert T.max() > 25                                   # the 3 A do heat the trace


def test_steady_start_uses_h_at_time_zero():
    # An h that follows a table starts from its value at t = 0 (60, not the base 20):
    # the start equals the steady Joule solve of the model with h = 60.
    text = BOARD.format(current="current = 4")
    tabled = text.replace("h = 20\n", "h = 20\nh_table = [[0, 60], [1, 60]]\n")
    assert tabled != text
    system = system_of(tabled)
    T = joule_steady_start(system, forcing(system), "direct")
    ref = joule.solve_joule(system_of(text.replace("h = 20", "h = 60")),
                            method="direct").temperature
    base = joule.solve_joule(system_of(text), method="direct").temperature
    assert np.abs(T - ref).max() < 1e-9 * np.abs(ref).max()     # measured 4e-15 K
    assert np.abs(base - ref).max() > 1.0                          # 3.6 K apart


@pytest.mark.parametrize("alpha", [jf.COPPER_ALPHA, 0.0])
def test_march_adiabatic_trace_pulse(alpha):
    # joule_forms.adiabatic_pulse_rise: 74.41 K (α = 0.00393/K), 65.28 K (α = 0).
    system = system_of(TRACE.format(alpha=alpha))
    hist = march_module.march(system, times=[0.005, 0.01, 0.015, 0.02], initial=20.0)
    rise = hist.shape_mean[:, 0] - 20
    assert rise[2] == pytest.approx(trace_rise(alpha), rel=5e-3)    # measured 2.4e-4
    assert rise[4] == pytest.approx(rise[2], rel=1e-6)      # off after the pulse
    assert 0.01 in hist.step_ends                            # landed on the pulse edge
    # input power: I²ρ(T)/A over the depth at the mean temperature reached
    rho = jf.COPPER_RESISTIVITY * (1 + alpha * rise[2])
    assert hist.power_in[2] == pytest.approx(100 * rho / (35e-6 * 250e-6) * 1e-3, rel=1e-6)
    assert hist.power_in[3] == 0.0
    assert hist.energy["relative_error"] < 1e-6


def test_march_energy_balance_with_joule_loss():
    # Energy conservation: ∫P dt (I²R included) = stored + out, to 1e-6 of the input.
    system = system_of(BOARD.format(current="current_pulse = { current = 5, width = 0.2, "
                                    "period = 0.5, count = 3 }"))
    hist = march_module.march(system, times=np.geomspace(1e-3, 2.0, 16), initial=20.0)
    e = hist.energy
    assert e["input_j"] > 0
    assert e["relative_error"] < 1e-6                      # measured 9e-12
    assert np.all(np.isin([0.2, 0.5, 0.7, 1.0, 1.2], np.round(hist.step_ends, 12)))


def test_march_current_step_reaches_steady_joule_solve():
    # A current step 3 A -> 5 A at t = 1 s from the steady state at 3 A: after 20 s
    # (about 30 time constants of the board) the field equals the steady Joule solve at
    # 5 A (heat2d.fem.joule.solve_joule) to 1e-5 of the rise.
    system = system_of(BOARD.format(current="current_steps = [[0, 3], [1, 5]]"))
    hist = march_module.march(system, times=np.geomspace(1e-3, 20.0, 16))
    ref = joule.solve_joule(system_of(BOARD.format(current="current = 5")),
                            method="direct").temperature
    start = joule.solve_joule(system_of(BOARD.format(current="current = 3")),
                              method="direct").temperature
    assert hist.shape_max[0, 1] == pytest.approx(start.max(), rel=1e-9)
    rise = ref.max() - 20
    assert np.abs(hist.final - ref).max() < 1e-5 * rise    # measured 4.0e-9
    assert hist.energy["relative_error"] < 1e-6
