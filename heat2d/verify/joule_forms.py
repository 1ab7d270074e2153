"""Closed forms for conductors heated by their own current (Joule heating).

SI values throughout (m, Ω·m, A, W/(m·K), °C or K as stated). Per unit length of a long
straight conductor: resistance R′ = ρ/A (Ω/m), loss I²R′ (W/m), thermal resistance to
ambient R′θ (K·m/W).

Sources: Ohm's law and Newton's law of cooling for the lumped wire (derived below);
Incropera, DeWitt, Bergman & Lavine, *Fundamentals of Heat and Mass Transfer*, 6th ed.,
§3.5.2 (cylinder with uniform generation) for the radial profile; the adiabatic pulse is
the energy balance ρc dθ/dt = ρ(θ) J² integrated in closed form; current division
between parallel resistances is Kirchhoff's current law with Ohm's law.
"""

from __future__ import annotations

import math
from collections.abc import Sequence

import numpy as np

from .closed_forms import rod_generation

COPPER_RESISTIVITY = 1.724e-8
"""Ω·m at 20 °C, annealed copper (the IACS standard, 100 % conductivity; from memory)."""
COPPER_ALPHA = 0.00393
"""1/K at 20 °C, annealed copper (from memory, as the standard tabulates it)."""
COPPER_RHO_C = 8960.0 * 385.0
"""J/(m³·K): copper density 8960 kg/m³ times specific heat 385 J/(kg·K) (room temperature,
from memory). These are the values that give the trace-pulse figures of
:func:`trace_pulse_check` (74.4 K, 65.3 K without α)."""

__all__ = ["COPPER_ALPHA", "COPPER_RESISTIVITY", "COPPER_RHO_C", "adiabatic_pulse_rise",
           "alpha_at", "lumped_onset_current", "lumped_wire_rise", "parallel_split",
           "trace_pulse_check", "wire_profile"]


def alpha_at(alpha: float, t_ref: float, t: float) -> float:
    """The temperature coefficient referred to temperature t (°C) for the linear law
    ρ = ρ_ref (1 + α (T − T_ref)): ρ = ρ(t) (1 + α_t (T − t)), α_t = α / (1 + α (t − T_ref))."""
    return alpha / (1 + alpha * (t - t_ref))


def lumped_wire_rise(current: float, r0: float, r_theta: float, alpha: float) -> float:
    """Rise θ (K) of an isothermal conductor over ambient, resistivity linear in temperature.

    Ohm's law gives the loss P = I² R₀ (1 + α θ) (R₀, α at the ambient temperature);
    Newton's law of cooling gives θ = P R_θ. Together θ = I² R₀ R_θ (1 + α θ), so

        θ = x / (1 − α x),   x = I² R₀ R_θ,

    with no steady state (thermal runaway) once α x ≥ 1: returns ``inf`` there.

    Parameters
    ----------
    current
        I, A.
    r0
        Resistance per unit length at ambient, Ω/m.
    r_theta
        Thermal resistance per unit length to ambient, K·m/W (a wire of perimeter p in a
        coefficient h: 1/(h p)).
    alpha
        Temperature coefficient referred to ambient, 1/K (:func:`alpha_at`).
    """
    x = current**2 * r0 * r_theta
    if alpha * x >= 1:
        return math.inf
    return x / (1 - alpha * x)


def lumped_onset_current(r0: float, r_theta: float, alpha: float) -> float:
    """The runaway current of :func:`lumped_wire_rise`: α I² R₀ R_θ = 1, A."""
    return math.inf if alpha <= 0 else math.sqrt(1 / (alpha * r0 * r_theta))


def wire_profile(r: np.ndarray | float, r0: float, current: float, resistivity: float,
                 k: float, h: float, t_inf: float) -> np.ndarray | float:
    """Temperature (°C) at radius r (m) of a round wire of radius r0 (m) carrying current
    I (A) uniformly (constant resistivity ρ, Ω·m), conductivity k, in a coefficient h to
    t_inf: Incropera §3.5.2 with q̇ = ρ J² = ρ I² / (π r0²)²."""
    qdot = resistivity * (current / (math.pi * r0**2)) ** 2
    return rod_generation(r, r0, qdot, k, h, t_inf)


def adiabatic_pulse_rise(current_density: float, duration: float, resistivity: float,
                         alpha: float, rho_c: float) -> float:
    """Rise θ (K) of a conductor heated adiabatically by a constant current density J (A/m²)
    for ``duration`` (s), starting at the reference temperature of the resistivity.

    ρc dθ/dt = ρ_ref (1 + α θ) J²  ⇒  θ = [exp(α ρ_ref J² t / ρc) − 1] / α
    (and θ = ρ_ref J² t / ρc for α = 0).
    """
    a = resistivity * current_density**2 * duration / rho_c
    if alpha == 0:
        return a
    return math.expm1(alpha * a) / alpha


def trace_pulse_check() -> tuple[float, float]:
    """The worked example: 10 A through a 35 µm × 250 µm copper trace for 10 ms from
    20 °C, with :data:`COPPER_RHO_C`: (rise with α, rise without α), K; 74.4 and 65.3."""
    j = 10 / (35e-6 * 250e-6)
    return (adiabatic_pulse_rise(j, 0.01, COPPER_RESISTIVITY, COPPER_ALPHA, COPPER_RHO_C),
            adiabatic_pulse_rise(j, 0.01, COPPER_RESISTIVITY, 0.0, COPPER_RHO_C))


def parallel_split(current: float, resistances: Sequence[float]) -> np.ndarray:
    """Currents (A) of parallel conductors sharing ``current``: the same voltage across
    each, so I_k = I (1/R_k) / Σ_j 1/R_j (Kirchhoff's current law with Ohm's law)."""
    g = 1 / np.asarray(resistances, dtype=float)
    return current * g / g.sum()
