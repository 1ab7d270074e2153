"""The published closed-form solutions behind the verification cases.

Each function takes SI values (m, W/(m·K), °C or K as stated) and returns the exact
figure. They are not called by ``heat2d verify``: the case table (``cases.toml``) holds
the reference numbers they give for the bundled models, and tests/test_verify.py
recomputes every one of those numbers from these functions and the model files' own
values, so the table cannot drift from the formulas.

Sources: Incropera, DeWitt, Bergman & Lavine, *Fundamentals of Heat and Mass Transfer*,
6th ed. (Wiley 2007), cited "Inc" with its section; Özişik, *Heat Conduction*, chapter on
nonlinear problems (from memory); reference-facts.md section 4 for the test values.
"""

from __future__ import annotations

import math
from collections.abc import Iterable

import numpy as np

SIGMA = 5.670374419e-8
"""Stefan–Boltzmann constant, W/(m²·K⁴) (CODATA 2018)."""
KELVIN = 273.15
"""0 °C in kelvin."""

__all__ = ["KELVIN", "SIGMA", "composite_wall_flux", "cylinder_heat_rate",
           "fin_convective_tip", "kirchhoff_slab", "plate_series", "radiating_face",
           "rod_generation", "slab_generation"]


def composite_wall_flux(t_hot: float, h_hot: float, layers: Iterable[tuple[float, float]],
                        contact: float, h_cold: float, t_cold: float) -> float:
    """Heat flux through a composite wall between two fluids (Inc §3.1).

    q″ = (T∞1 − T∞2) / (1/h1 + Σ Lᵢ/kᵢ + R″tc + 1/h2).

    Parameters
    ----------
    t_hot, t_cold
        Fluid temperatures on the two sides, °C.
    h_hot, h_cold
        Heat transfer coefficients on the two faces, W/(m²·K).
    layers
        (thickness m, conductivity W/(m·K)) of each layer, in series.
    contact
        Total contact resistance R″tc, m²·K/W.

    Returns
    -------
    float
        q″, W/m².
    """
    resistance = 1 / h_hot + sum(t / k for t, k in layers) + contact + 1 / h_cold
    return (t_hot - t_cold) / resistance


def slab_generation(x: float, half: float, qdot: float, k: float, h: float,
                    t_inf: float) -> float:
    """Temperature in a slab −L ≤ x ≤ L with uniform generation, both faces convecting
    (Inc §3.5.1): T(x) = Ts + q̇L²/(2k)(1 − x²/L²), Ts = T∞ + q̇L/h.

    Parameters
    ----------
    x, half
        Position and half-thickness L, m.
    qdot
        Generation q̇, W/m³.
    k, h
        Conductivity W/(m·K) and face coefficient W/(m²·K).
    t_inf
        Fluid temperature, °C.

    Returns
    -------
    float
        T(x), °C.
    """
    return t_inf + qdot * half / h + qdot * half**2 / (2 * k) * (1 - (x / half) ** 2)


def cylinder_heat_rate(r1: float, r2: float, k: float, t_in: float, h: float,
                       t_inf: float) -> float:
    """Heat rate per unit length through a pipe wall, bore held at T1, outside
    convecting (Inc §3.3.1, Table 3.3): q′ = (T1 − T∞)/(ln(r2/r1)/(2πk) + 1/(2πr2h)).

    Parameters
    ----------
    r1, r2
        Inner and outer radius, m.
    k, h
        Conductivity W/(m·K) and outer coefficient W/(m²·K).
    t_in, t_inf
        Bore and fluid temperatures, °C.

    Returns
    -------
    float
        q′, W/m.
    """
    return (t_in - t_inf) / (math.log(r2 / r1) / (2 * math.pi * k)
                             + 1 / (2 * math.pi * r2 * h))


def fin_convective_tip(k: float, t: float, length: float, h: float) -> tuple[float, float]:
    """Straight fin with a convective tip, per unit depth (P = 2, Ac = t) (Inc §3.6,
    Table 3.4 case A).

    Parameters
    ----------
    k, h
        Conductivity W/(m·K) and coefficient W/(m²·K).
    t, length
        Thickness and length, m.

    Returns
    -------
    tuple of float
        q′/θb in W/(m·K) and θtip/θb.
    """
    m = math.sqrt(2 * h / (k * t))
    big_m = math.sqrt(2 * h * k * t)
    r = h / (m * k)
    den = math.cosh(m * length) + r * math.sinh(m * length)
    return big_m * (math.sinh(m * length) + r * math.cosh(m * length)) / den, 1 / den


def plate_series(x: float, y: float, length: float, height: float, terms: int = 200) -> float:
    """θ* = (T − T1)/(T2 − T1) in a rectangle with three sides at T1 and the top at T2
    (Inc §4.2, Eq. 4.19): (2/π) Σ ((−1)ⁿ⁺¹ + 1)/n · sin(nπx/L) sinh(nπy/L)/sinh(nπW/L).

    The sinh ratio is written with exponentials so large n do not overflow.

    Parameters
    ----------
    x, y
        The point, in the unit of ``length`` and ``height``.
    length, height
        Width L and height W of the rectangle.
    terms
        Number of odd terms summed (the even ones vanish).

    Returns
    -------
    float
        θ*, dimensionless.
    """
    n = np.arange(1, 2 * terms, 2)
    lam = n * math.pi / length
    ratio = np.exp(lam * (y - height)) * np.expm1(-2 * lam * y) / np.expm1(-2 * lam * height)
    return float(4 / math.pi * np.sum(np.sin(lam * x) / n * ratio))


def radiating_face(k: float, thickness: float, t1: float, emissivity: float, t_sur: float,
                   h: float = 0.0, t_inf: float | None = None) -> tuple[float, float]:
    """Slab whose face radiates (and convects), base held at T1 (Inc §1.2.3, surface
    energy balance): k(T1 − Ts)/L = εσ(Ts⁴ − Tsur⁴) + h(Ts − T∞).

    Parameters
    ----------
    k, thickness
        Conductivity W/(m·K) and thickness L, m.
    t1, t_sur, t_inf
        Base, surroundings and air temperatures, K (``t_inf`` defaults to ``t_sur``).
    emissivity
        ε of the face.
    h
        Convection coefficient of the face, W/(m²·K).

    Returns
    -------
    tuple of float
        Ts in K and q″ in W/m².
    """
    from scipy.optimize import brentq

    t_air = t_sur if t_inf is None else t_inf

    def balance(ts: float) -> float:
        return (k * (t1 - ts) / thickness - emissivity * SIGMA * (ts**4 - t_sur**4)
                - h * (ts - t_air))

    ts = brentq(balance, min(t_sur, t_air), t1, xtol=1e-12, rtol=1e-15)
    return ts, k * (t1 - ts) / thickness


def kirchhoff_slab(k0: float, beta: float, t1: float, t2: float, thickness: float,
                   y: float) -> tuple[float, float]:
    """Slab with k = k0(1 + βT), faces at T1 and T2 (Özişik, Heat Conduction, chapter on
    nonlinear problems, from memory; reference-facts.md problem 10).

    q″ = k0[1 + β(T1 + T2)/2](T1 − T2)/L; T(y) from the Kirchhoff transform
    U = T + βT²/2, which is linear in y.

    Parameters
    ----------
    k0, beta
        k0 in W/(m·K), β in 1/°C.
    t1, t2
        Face temperatures at y = 0 and y = L, °C.
    thickness, y
        L and the point, m.

    Returns
    -------
    tuple of float
        q″ in W/m² and T(y) in °C.
    """
    q = k0 * (1 + beta * (t1 + t2) / 2) * (t1 - t2) / thickness
    u1, u2 = t1 + beta * t1**2 / 2, t2 + beta * t2**2 / 2
    u = u1 + (u2 - u1) * y / thickness
    return q, (math.sqrt(1 + 2 * beta * u) - 1) / beta


def rod_generation(r: float, r0: float, qdot: float, k: float, h: float,
                   t_inf: float) -> float:
    """Temperature in a long solid rod with uniform generation and a convecting skin
    (Inc §3.5.2): T(r) = Ts + q̇r0²/(4k)(1 − r²/r0²), Ts = T∞ + q̇r0/(2h).

    Parameters
    ----------
    r, r0
        Radius and rod radius, m.
    qdot
        Generation q̇, W/m³.
    k, h
        Conductivity W/(m·K) and skin coefficient W/(m²·K).
    t_inf
        Fluid temperature, °C.

    Returns
    -------
    float
        T(r), °C.
    """
    return t_inf + qdot * r0 / (2 * h) + qdot * r0**2 / (4 * k) * (1 - (r / r0) ** 2)
