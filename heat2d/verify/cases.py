"""Verification against published closed-form solutions, run on the user's installation.

Each case builds a small model from the text in this module, solves it with heat2d and
compares the figures it reports with the exact answer, computed here from the published
formula (the references are those of the test suite, tests/test_reference.py and
tests/test_electronics.py). Every check is a record::

    {"case", "check", "source", "unit", "reference", "computed", "error", "tolerance",
     "basis", "passed"}

``error`` is |computed − reference| and ``tolerance`` the limit it must not exceed, both in
``unit``; ``basis`` says why the tolerance has its size. Three kinds of limits appear:

* round-off (1e-9 relative, or 1e-6 K after a Newton solve): the exact solution is linear
  on every element, so linear triangles reproduce it (the patch test; Strang & Fix,
  *An Analysis of the Finite Element Method*, 1973);
* an interpolation bound h²/8·|T''| (or a stated multiple of (h/L)²): the exact solution is
  smooth but curved, and linear elements converge at O(h²);
* the reference-facts tolerance of 1 % against a 1-D engineering model (the fin), whose own
  modelling error is of order the Biot number.

``heat2d verify`` prints the table, writes ``verify.json`` and ``verify.png`` (the
manufactured-solution errors against mesh size on log axes, with the expected slopes) and
exits with status 0 only when every check passes.
"""

from __future__ import annotations

import argparse
import json
import math
import os
import shutil
import sys
import tempfile
import time
from collections.abc import Callable, Iterable
from dataclasses import replace
from pathlib import Path
from typing import Any

import numpy as np

INC = "Incropera et al., Fundamentals of Heat and Mass Transfer, 6th ed."
"""The textbook most cases come from (Incropera, DeWitt, Bergman & Lavine, Wiley 2007)."""
OZISIK = "Özişik, Heat Conduction"
ROACHE = "Roache, J. Fluids Eng. 124:4 (2002)"
ROUND_OFF = 1e-9
"""Relative tolerance where the exact solution lies in the element space."""
NEWTON_K = 1e-6
"""Temperature tolerance (K) after a nonlinear solve: Newton stops below this change."""
SIGMA = 5.670374419e-8
"""Stefan–Boltzmann constant, W/(m²·K⁴) (CODATA 2018)."""
KELVIN = 273.15
ORDER_WINDOW = 0.2
"""Allowed distance of an observed convergence order from the design order: unstructured
meshes scatter the observed order by about ±0.1; a lost order would show as ~1."""

Record = dict[str, Any]


def check(case: str, what: str, source: str, unit: str, reference: float, computed: float,
          tolerance: float, basis: str) -> Record:
    """One comparison of a computed figure with its reference value."""
    error = abs(computed - reference)
    return {"case": case, "check": what, "source": source, "unit": unit,
            "reference": float(reference), "computed": float(computed), "error": float(error),
            "tolerance": float(tolerance), "basis": basis,
            "passed": bool(np.isfinite(computed) and error <= tolerance)}


def _run(text: str, refine: float = 1.0):
    import heat2d

    return heat2d.solve(heat2d.parse(text, source="verify"), refine=refine, estimate=False,
                        resistances=False)


def _heat(result, boundary: str) -> float:
    return result.summary["boundaries"][boundary]["heat_out_w"]


# ---------------------------------------------------------------------------------------
# Closed forms (each takes SI values and returns the exact figure)


def composite_wall_flux(t_hot: float, h_hot: float, layers: Iterable[tuple[float, float]],
                        contact: float, h_cold: float, t_cold: float) -> float:
    """q″ = (T∞1 − T∞2) / (1/h1 + Σ Lᵢ/kᵢ + R″tc + 1/h2), W/m² (Inc §3.1)."""
    resistance = 1 / h_hot + sum(t / k for t, k in layers) + contact + 1 / h_cold
    return (t_hot - t_cold) / resistance


def slab_generation(x: float, half: float, qdot: float, k: float, h: float,
                    t_inf: float) -> float:
    """T(x) = Ts + q̇L²/(2k)(1 − x²/L²), Ts = T∞ + q̇L/h (Inc §3.5.1)."""
    return t_inf + qdot * half / h + qdot * half**2 / (2 * k) * (1 - (x / half) ** 2)


def cylinder_heat_rate(r1: float, r2: float, k: float, t_in: float, h: float,
                       t_inf: float) -> float:
    """q′ = (T1 − T∞) / (ln(r2/r1)/(2πk) + 1/(2πr2h)), W/m (Inc §3.3.1, Table 3.3)."""
    return (t_in - t_inf) / (math.log(r2 / r1) / (2 * math.pi * k)
                             + 1 / (2 * math.pi * r2 * h))


def fin_convective_tip(k: float, t: float, length: float, h: float) -> tuple[float, float]:
    """q′/θb (W/(m·K)) and θtip/θb of a straight fin with a convective tip, per unit depth
    (P = 2, Ac = t) (Inc §3.6, Table 3.4 case A)."""
    m = math.sqrt(2 * h / (k * t))
    big_m = math.sqrt(2 * h * k * t)
    r = h / (m * k)
    den = math.cosh(m * length) + r * math.sinh(m * length)
    return big_m * (math.sinh(m * length) + r * math.cosh(m * length)) / den, 1 / den


def plate_series(x: float, y: float, length: float, height: float, terms: int = 200) -> float:
    """θ* = (2/π) Σ ((−1)ⁿ⁺¹ + 1)/n · sin(nπx/L) sinh(nπy/L)/sinh(nπW/L) (Inc §4.2,
    Eq. 4.19); the sinh ratio is written with exponentials so large n do not overflow."""
    n = np.arange(1, 2 * terms, 2)                       # odd terms; even ones vanish
    lam = n * math.pi / length
    ratio = np.exp(lam * (y - height)) * np.expm1(-2 * lam * y) / np.expm1(-2 * lam * height)
    return float(4 / math.pi * np.sum(np.sin(lam * x) / n * ratio))


def radiating_face(k: float, thickness: float, t1: float, emissivity: float, t_sur: float,
                   h: float = 0.0, t_inf: float | None = None) -> tuple[float, float]:
    """Surface temperature Ts (K) and q″ (W/m²) of a slab whose face radiates and convects:
    k(T1 − Ts)/L = εσ(Ts⁴ − Tsur⁴) + h(Ts − T∞) (Inc §1.2.3, surface energy balance)."""
    from scipy.optimize import brentq

    t_air = t_sur if t_inf is None else t_inf

    def balance(ts: float) -> float:
        return (k * (t1 - ts) / thickness - emissivity * SIGMA * (ts**4 - t_sur**4)
                - h * (ts - t_air))

    ts = brentq(balance, min(t_sur, t_air), t1, xtol=1e-12, rtol=1e-15)
    return ts, k * (t1 - ts) / thickness


def kirchhoff_slab(k0: float, beta: float, t1: float, t2: float, thickness: float,
                   y: float) -> tuple[float, float]:
    """k = k0(1 + βT): q″ = k0[1 + β(T1 + T2)/2](T1 − T2)/L and T(y) from the Kirchhoff
    transform U = T + βT²/2, linear in y (Özişik, Heat Conduction, chapter on nonlinear
    problems, from memory; reference-facts.md problem 10)."""
    q = k0 * (1 + beta * (t1 + t2) / 2) * (t1 - t2) / thickness
    u1, u2 = t1 + beta * t1**2 / 2, t2 + beta * t2**2 / 2
    u = u1 + (u2 - u1) * y / thickness
    return q, (math.sqrt(1 + 2 * beta * u) - 1) / beta


def rod_generation(r: float, r0: float, qdot: float, k: float, h: float,
                   t_inf: float) -> float:
    """T(r) = Ts + q̇r0²/(4k)(1 − r²/r0²), Ts = T∞ + q̇r0/(2h) (Inc §3.5.2)."""
    return t_inf + qdot * r0 / (2 * h) + qdot * r0**2 / (4 * k) * (1 - (r / r0) ** 2)


# ---------------------------------------------------------------------------------------
# Cases


def case_composite_wall() -> list[Record]:
    """Two slabs with a contact resistance between them, convection on both faces."""
    name, source = "composite_wall", f"{INC} §3.1"
    la, ka, lb, kb, r_tc = 4.0, 0.8, 6.0, 15.0, 2.75e-4      # mm, W/(mK), m²K/W
    h1, t1, h2, t2, height = 40.0, 90.0, 20.0, 25.0, 3.0
    text = f"""
[model]
length_unit = "mm"
[materials.a]
k = {ka}
[materials.b]
k = {kb}
[[shape]]
name = "A"
material = "a"
rect = {{ x = 0, y = 0, width = {la}, height = {height} }}
[[shape]]
name = "B"
material = "b"
rect = {{ x = {la}, y = 0, width = {lb}, height = {height} }}
[[interface]]
name = "contact"
between = ["A", "B"]
resistance = {r_tc}
[[boundary]]
name = "hot"
on = "A.left"
h = {h1}
ambient = {t1}
[[boundary]]
name = "cold"
on = "B.right"
h = {h2}
ambient = {t2}
[mesh]
size = 0.5
"""
    r = _run(text)
    q = composite_wall_flux(t1, h1, [(la * 1e-3, ka), (lb * 1e-3, kb)], r_tc, h2, t2)
    area = height * 1e-3                                      # m² per metre of depth
    basis = "round-off: T is linear in each slab (patch test)"
    return [
        check(name, "heat flux q″", source, "W/m²", q, _heat(r, "cold") / area,
              ROUND_OFF * q, basis),
        check(name, "contact jump q″R″", source, "K", q * r_tc,
              r.summary["interfaces"]["contact"]["mean_jump"], ROUND_OFF * q * r_tc, basis),
        check(name, "hot face T", source, "°C", t1 - q / h1,
              r.summary["boundaries"]["hot"]["mean_temperature"], ROUND_OFF * t1, basis),
    ]


def case_generation_slab() -> list[Record]:
    """Slab with uniform generation, both faces convecting (RF #3 test values)."""
    name, source = "generation_slab", f"{INC} §3.5.1"
    qdot, half, k, h, t_inf, size = 1e6, 1.0, 1.0, 500.0, 20.0, 0.1   # W/m³, mm, ..., mm
    text = f"""
[model]
length_unit = "mm"
depth = 10
[materials.m]
k = {k}
[[shape]]
name = "slab"
material = "m"
rect = {{ x = {-half}, y = 0, width = {2 * half}, height = 0.5 }}
power_density = {qdot}
[[boundary]]
name = "left"
on = "slab.left"
h = {h}
ambient = {t_inf}
[[boundary]]
name = "right"
on = "slab.right"
h = {h}
ambient = {t_inf}
[mesh]
size = {size}
"""
    r = _run(text)
    t_max = slab_generation(0.0, half * 1e-3, qdot, k, h, t_inf)
    power = qdot * 2 * half * 0.5 * 10 * 1e-9                 # W for 10 mm depth
    # |T''| = q̇/k; nodal error of linear elements ≤ h²/8·|T''| (1-D interpolation bound).
    bound = (size * 1e-3) ** 2 / 8 * qdot / k
    return [
        check(name, "max temperature", source, "°C", t_max, r.max_temperature, bound,
              "interpolation bound h²/8·q̇/k, h = 0.1 mm"),
        check(name, "heat out per face", source, "W", power / 2, _heat(r, "right"),
              ROUND_OFF * power, "round-off: the face heat is the weak form tested with a "
              "linear function"),
        check(name, "surface temperature", source, "°C", t_inf + qdot * half * 1e-3 / h,
              r.summary["boundaries"]["left"]["mean_temperature"], ROUND_OFF * t_inf,
              "round-off: ∫h(T − T∞) over a face equals its heat exactly"),
    ]


def case_cylinder_wall() -> list[Record]:
    """Pipe wall (two circles), bore held at T1, outside convecting (per metre of depth)."""
    name, source = "cylinder_wall", f"{INC} §3.3.1, Table 3.3"
    r1, r2, k, t_in, h, t_inf, size = 10.0, 25.0, 15.0, 150.0, 100.0, 30.0, 1.0
    text = f"""
[model]
length_unit = "mm"
[materials.steel]
k = {k}
[[shape]]
name = "pipe"
material = "steel"
circle = {{ x = 0, y = 0, r = {r2} }}
[[shape]]
name = "bore"
void = true
circle = {{ x = 0, y = 0, r = {r1} }}
[[boundary]]
name = "inner"
on = "bore"
temperature = {t_in}
[[boundary]]
name = "outer"
on = "pipe"
h = {h}
ambient = {t_inf}
[mesh]
size = {size}
"""
    r = _run(text)
    q = cylinder_heat_rate(r1 * 1e-3, r2 * 1e-3, k, t_in, h, t_inf)
    # Circles are inscribed polygons with chords ≤ h: radius defect ≈ h²/(24r²) relative
    # (0.04 % at r1), and the field is O(h²) too; 0.2 % of q′ covers both at h = r1/10.
    return [check(name, "heat rate q′", source, "W/m", q, _heat(r, "outer"), 2e-3 * q,
                  "0.2 %: O(h²) polygon and field error at h = r1/10")]


def case_fin() -> list[Record]:
    """Steel fin, convective tip (RF #5 test values: k = 15, t = 1 mm, L = 50 mm, h = 25)."""
    name, source = "fin", f"{INC} §3.6, Table 3.4 case A"
    k, t, length, h, t_base, t_air = 15.0, 1.0, 50.0, 25.0, 100.0, 25.0
    text = f"""
[model]
length_unit = "mm"
[materials.steel]
k = {k}
[[shape]]
name = "fin"
material = "steel"
rect = {{ x = 0, y = 0, width = {length}, height = {t} }}
[[boundary]]
name = "base"
on = "fin.left"
temperature = {t_base}
[[boundary]]
name = "air"
on = "exterior"
h = {h}
ambient = {t_air}
[mesh]
size = 0.5
[[probe]]
name = "tip"
at = [{length}, {t / 2}]
"""
    r = _run(text)
    q_per_k, tip = fin_convective_tip(k, t * 1e-3, length * 1e-3, h)
    theta_b = t_base - t_air
    basis = "1 % against a 1-D model (its own error is O(Bi), Bi = ht/2k = 8e-4)"
    return [
        check(name, "q′/θb", source, "W/(m·K)", q_per_k, -_heat(r, "base") / theta_b,
              0.01 * q_per_k, basis),
        check(name, "θtip/θb", source, "1", tip,
              (r.summary["probes"]["tip"] - t_air) / theta_b, 0.01 * tip, basis),
    ]


PLATE = (10.0, 20.0, 120.0)
"""The §4.2 plate of the verification cases: side (mm), T1 (three sides) and T2 (top), °C."""


def _plate_text(k: float, size: float, probes: dict[str, tuple[float, float]]) -> str:
    """The §4.2 plate as a model: conductivity ``k``, ``[mesh] size`` (mm), probes."""
    side, t1, t2 = PLATE
    return f"""
[model]
length_unit = "mm"
[materials.m]
k = {k}
[[shape]]
name = "plate"
material = "m"
rect = {{ x = 0, y = 0, width = {side}, height = {side} }}
[[boundary]]
name = "top"
on = "plate.top"
temperature = {t2}
[[boundary]]
name = "rest"
on = "exterior"
temperature = {t1}
[mesh]
size = {size}
""" + "".join(f'[[probe]]\nname = "{n}"\nat = [{x}, {y}]\n' for n, (x, y) in probes.items())


def case_plate() -> list[Record]:
    """Square plate, three sides at T1 and the top at T2: the centre is at 1/4 exactly."""
    name, source = "plate_series", f"{INC} §4.2, Eq. 4.19"
    side, t1, t2 = PLATE
    text = _plate_text(50, 0.25, {"centre": (5, 5), "off_centre": (7.5, 3)})
    r = _run(text)
    # Pointwise O(h²) away from the corners: h²/8·|θ''| ≈ (h/L)²·π²/8 ≈ 8e-4 of ΔT at
    # h = L/40; 2e-3 of ΔT allows for the scatter of pointwise errors on unstructured meshes.
    tol = 2e-3 * (t2 - t1)
    basis = "2e-3 of T2 − T1: O(h²) at h = L/40, away from the corner jumps"
    probes = r.summary["probes"]
    return [
        check(name, "centre θ* = 0.25", source, "°C", t1 + 0.25 * (t2 - t1), probes["centre"],
              tol, basis),
        check(name, "T at (0.75L, 0.3W)", source, "°C",
              t1 + (t2 - t1) * plate_series(7.5, 3.0, side, side), probes["off_centre"], tol,
              basis),
    ]


def case_radiating_slab() -> list[Record]:
    """Slab whose top radiates (and convects), base at T1 (RF #11 test values)."""
    name, source = "radiating_slab", f"{INC} §1.2.3"
    k, thickness, t1, eps, t_sur = 1.0, 10.0, 400.0, 0.9, 300.0
    records = []
    for h, label in ((0.0, "radiation"), (10.0, "rad. + h = 10")):
        face = (f"emissivity = {eps}\nsurroundings = {t_sur - KELVIN}\n" if h == 0 else
                f"h = {h}\nambient = {t_sur - KELVIN}\nemissivity = {eps}\n")
        text = f"""
[model]
length_unit = "mm"
depth = 1
[materials.m]
k = {k}
[[shape]]
name = "slab"
material = "m"
rect = {{ x = 0, y = 0, width = 2, height = {thickness} }}
[mesh]
size = 5
[[boundary]]
name = "base"
on = "slab.bottom"
temperature = {t1 - KELVIN}
[[boundary]]
name = "face"
on = "slab.top"
{face}"""
        r = _run(text)
        ts, q = radiating_face(k, thickness * 1e-3, t1, eps, t_sur, h)
        area = 2e-3 * 1e-3
        face_t = r.summary["boundaries"]["face"]["mean_temperature"] + KELVIN
        records += [
            check(name, f"Ts ({label})", source, "K", ts, face_t, NEWTON_K,
                  "Newton stop 1e-6 K: T is linear in y and uniform on the face"),
            check(name, f"q″ ({label})", source, "W/m²", q, _heat(r, "face") / area,
                  ROUND_OFF * q + k * NEWTON_K / (thickness * 1e-3),
                  "round-off plus the Newton stop's k·1e-6 K/L"),
        ]
    return records


def case_kirchhoff_slab() -> list[Record]:
    """Slab with k = k0(1 + βT), faces at 100 and 20 °C (RF #10 test values)."""
    name, source = "kirchhoff_slab", f"{OZISIK}, Kirchhoff transform"
    k0, beta, t_hot, t_cold, thickness, size = 0.3, 0.004, 100.0, 20.0, 1.6, 0.1
    # k is linear in T, so a two-point table over the range reached is exact.
    table = f"[[{t_cold}, {k0 * (1 + beta * t_cold)}], [{t_hot}, {k0 * (1 + beta * t_hot)}]]"
    text = f"""
[model]
length_unit = "mm"
depth = 1
[materials.resin]
k = {table}
[[shape]]
name = "slab"
material = "resin"
rect = {{ x = 0, y = 0, width = 1, height = {thickness} }}
[[boundary]]
name = "hot"
on = "slab.bottom"
temperature = {t_hot}
[[boundary]]
name = "cold"
on = "slab.top"
temperature = {t_cold}
[mesh]
size = {size}
[[probe]]
name = "mid"
at = [0.5, {thickness / 2}]
"""
    r = _run(text)
    q, t_mid = kirchhoff_slab(k0, beta, t_hot, t_cold, thickness * 1e-3, thickness * 1e-3 / 2)
    area = 1e-3 * 1e-3
    # Nodal error of k(T̄e) elements ~ β(hΔT/L)² (0.016 K at h = 0.1 mm), plus the
    # interpolation of the concave profile between nodes.
    bound = beta * (size * (t_hot - t_cold) / thickness) ** 2
    return [
        check(name, "q″", source, "W/m²", q, _heat(r, "cold") / area, ROUND_OFF * q,
              "round-off: the Kirchhoff flux is reproduced exactly (k linear in T)"),
        check(name, "T(L/2)", source, "°C", t_mid, r.summary["probes"]["mid"], bound,
              "β(hΔT/L)²: k taken at each element's mean temperature"),
    ]


def case_rod() -> list[Record]:
    """Axisymmetric solid rod with generation, convecting skin (RF #4 test values)."""
    name, source = "rod_generation", f"{INC} §3.5.2"
    r0, height, k, h, t_inf, size = 2.0, 1.0, 1.0, 1000.0, 19.0, 0.125
    qdot = 4 * k * 1.0 / (r0 * 1e-3) ** 2                    # ΔT_max = 1 K
    text = f"""
[model]
length_unit = "mm"
axisymmetric = true
[materials.m]
k = {k}
[[shape]]
name = "rod"
material = "m"
rect = {{ x = 0, y = 0, width = {r0}, height = {height} }}
power_density = {qdot}
[[boundary]]
name = "skin"
on = "rod.right"
h = {h}
ambient = {t_inf}
[mesh]
size = {size}
"""
    r = _run(text)
    t_max = rod_generation(0.0, r0 * 1e-3, qdot, k, h, t_inf)
    power = qdot * math.pi * (r0 * 1e-3) ** 2 * height * 1e-3
    dt_max = qdot * (r0 * 1e-3) ** 2 / (4 * k)
    return [
        check(name, "centre temperature", source, "°C", t_max, r.max_temperature,
              (size / r0) ** 2 * dt_max, "(h/r0)²·ΔTmax: O(h²) with the 2πr weights"),
        check(name, "heat out (= power)", source, "W", power, _heat(r, "skin"),
              ROUND_OFF * power, "round-off: exact source weights and energy balance"),
    ]


# Manufactured solution: T = eˣ cos(1.5y) + x²y in an orthotropic polygon (metres),
# q̇ = −(kx Txx + ky Tyy); every boundary node held at the exact T.
MMS_KX, MMS_KY = 3.0, 0.7
MMS_TEXT = f"""
[materials.m]
kx = {MMS_KX}
ky = {MMS_KY}
[[shape]]
name = "plate"
material = "m"
polygon = [[0, 0], [1.2, 0], [1.0, 0.9], [0.3, 1.0], [-0.1, 0.5]]
[[boundary]]
name = "outline"
on = "exterior"
temperature = 0
[mesh]
size = 0.1
"""
MMS_REFINE = (1.0, 2.0, 4.0)


def _mms_exact(x, y):
    return np.exp(x) * np.cos(1.5 * y) + x * x * y


def _mms_gradient(x, y):
    return np.stack([np.exp(x) * np.cos(1.5 * y) + 2 * x * y,
                     -1.5 * np.exp(x) * np.sin(1.5 * y) + x * x], axis=-1)


def _mms_source(x, y):
    # −(kx ∂²T/∂x² + ky ∂²T/∂y²), Txx = eˣcos(1.5y) + 2y, Tyy = −2.25 eˣcos(1.5y)
    return -(MMS_KX * (np.exp(x) * np.cos(1.5 * y) + 2 * y)
             - 2.25 * MMS_KY * np.exp(x) * np.cos(1.5 * y))


# Dunavant's 6-point rule, exact for degree-4 polynomials (Int. J. Numer. Meth. Eng.
# 21:1129, 1985): barycentric points; weights sum to 1.
_QA, _QB = 0.445948490915965, 0.091576213509771
QUAD_POINTS = np.array([[1 - 2 * _QA, _QA, _QA], [_QA, 1 - 2 * _QA, _QA],
                        [_QA, _QA, 1 - 2 * _QA], [1 - 2 * _QB, _QB, _QB],
                        [_QB, 1 - 2 * _QB, _QB], [_QB, _QB, 1 - 2 * _QB]])
QUAD_WEIGHTS = np.array([0.223381589678011] * 3 + [0.109951743655322] * 3)


def manufactured_errors(refine: float) -> tuple[float, float, float, int]:
    """L2 and energy-norm errors of the manufactured solution, the mesh size
    h = √(mean triangle area) and the node count, on the mesh refined by ``refine``."""
    import heat2d

    from ..fem.assembly import assemble
    from ..fem.geometry import build_geometry
    from ..fem.mesh import build_mesh
    from ..fem.solver import solve

    mesh = build_mesh(build_geometry(heat2d.parse(MMS_TEXT, source="verify"), refine=refine))
    system = assemble(mesh)
    tri, points = mesh.triangles, mesh.points
    p = points[tri]                                                       # (m, 3, 2)
    d1, d2 = p[:, 1] - p[:, 0], p[:, 2] - p[:, 0]
    area = 0.5 * np.abs(d1[:, 0] * d2[:, 1] - d1[:, 1] * d2[:, 0])
    q = np.einsum("ki,tid->tkd", QUAD_POINTS, p)                          # (m, 6, 2)
    w = area[:, None] * QUAD_WEIGHTS
    x, y = q[..., 0], q[..., 1]
    # F_i = ∫ q̇ φ_i dA (depth 1 m)
    load = np.einsum("tk,ki->ti", w * _mms_source(x, y), QUAD_POINTS)
    F = np.bincount(tri.ravel(), load.ravel(), minlength=len(points))
    boundary = np.unique(mesh.edges)
    solution = solve(replace(system, F=F, fixed=boundary,
                             fixed_value=_mms_exact(*points[boundary].T)))
    T = solution.temperature
    th = np.einsum("ki,ti->tk", QUAD_POINTS, T[tri])
    l2 = math.sqrt(np.sum(w * (th - _mms_exact(x, y)) ** 2))
    grad = (system.gradient @ T).reshape(2, -1).T[:, None, :]
    e = grad - _mms_gradient(x, y)
    energy = math.sqrt(np.sum(w * (system.kx[:, None] * e[..., 0] ** 2
                                   + system.ky[:, None] * e[..., 1] ** 2)))
    return l2, energy, math.sqrt(area.mean()), len(points)


def _slope(h: list[float], e: list[float]) -> float:
    """Least-squares slope of log e against log h."""
    return float(np.polyfit(np.log(h), np.log(e), 1)[0])


def case_manufactured() -> list[Record]:
    """Convergence rate of a manufactured solution over three meshes refined by 2."""
    name, source = "manufactured", ROACHE
    rows = [manufactured_errors(f) for f in MMS_REFINE]
    l2, energy, h, nodes = (list(col) for col in zip(*rows, strict=True))
    series = {"h": h, "nodes": nodes, "l2": l2, "energy": energy}
    basis = "design order ± 0.2 (scatter of unstructured meshes ±0.1)"
    out = [check(name, "L2 order", source, "1", 2.0, _slope(h, l2), ORDER_WINDOW, basis),
           check(name, "energy-norm order", source, "1", 1.0, _slope(h, energy), ORDER_WINDOW,
                 basis)]
    for record in out:
        record["convergence"] = series
    return out


def case_error_estimate() -> list[Record]:
    """The run's own ± must cover its true error: the plate of §4.2 on a coarse mesh,
    with the default error estimate, at points away from nodes and near a singular
    corner (where the top's temperature jumps)."""
    import heat2d

    name, source = "error_estimate", f"{INC} §4.2, Eq. 4.19"
    side, t1, t2 = PLATE
    points = {"centre": (5.0, 5.0), "near_top": (2.5, 8.0), "low": (7.3, 2.1),
              "corner": (9.3, 9.1)}
    text = _plate_text(10, 0.7, points)
    r = heat2d.solve(heat2d.parse(text, source="verify"), resistances=False)
    basis = "the run's own reported error (± of the default estimate) must cover the truth"
    records = [check(name, f"T({x:g}, {y:g}) within ±", source, "°C",
                     t1 + (t2 - t1) * plate_series(x, y, side, side), r.summary["probes"][n],
                     r.summary["probe_errors"][n], basis)
               for n, (x, y) in points.items()]
    # The mean is 1/4 of the way from T1 to T2 exactly (four rotated copies superpose to
    # a plate with every side at T2).
    plate = r.summary["shapes"]["plate"]
    records.append(check(name, "mean θ* = 0.25 within ±", source, "°C",
                         t1 + 0.25 * (t2 - t1), plate["mean"], plate["mean_error"], basis))
    # A ± too large to say anything would pass the checks above: the centre's must also
    # be small against the field (O(h²) puts it near 0.2 % of T2 − T1 on this mesh).
    records.append(check(name, "centre ± < 1 % of ΔT", source, "K", 0.0,
                         r.summary["probe_errors"]["centre"], 0.01 * (t2 - t1),
                         "an estimate must be informative as well as cover the truth"))
    return records


CASES: dict[str, Callable[[], list[Record]]] = {
    "composite_wall": case_composite_wall,
    "generation_slab": case_generation_slab,
    "cylinder_wall": case_cylinder_wall,
    "fin": case_fin,
    "plate_series": case_plate,
    "radiating_slab": case_radiating_slab,
    "kirchhoff_slab": case_kirchhoff_slab,
    "rod_generation": case_rod,
    "manufactured": case_manufactured,
    "error_estimate": case_error_estimate,
}
"""Verification cases by name; each returns its check records."""


def verify(*, cases: Iterable[str] | None = None, raise_errors: bool = False
           ) -> list[Record]:
    """Run verification cases and return their check records.

    Parameters
    ----------
    cases
        Names from :data:`CASES`; all by default.
    raise_errors
        Let an exception inside a case propagate instead of recording it as a failure.

    Returns
    -------
    list of dict
        One record per check (see the module docstring). A case that raises gives one
        failed record whose ``check`` holds the exception.

    Raises
    ------
    ValueError
        An unknown case name.
    """
    names = list(CASES) if cases is None else list(cases)
    unknown = [n for n in names if n not in CASES]
    if unknown:
        raise ValueError(f"unknown verification case {unknown[0]!r} (choose from: "
                         f"{', '.join(sorted(CASES))})")
    records: list[Record] = []
    for name in names:
        start = time.perf_counter()
        try:
            new = CASES[name]()
        except Exception as exc:  # a case that cannot run has failed verification
            if raise_errors:
                raise
            new = [{"case": name, "check": f"{type(exc).__name__}: {exc}", "source": "",
                    "unit": "", "reference": None, "computed": None, "error": None,
                    "tolerance": None, "basis": "the case raised", "passed": False}]
        seconds = time.perf_counter() - start
        for record in new:
            record["seconds"] = seconds
        records += new
    return records


# ---------------------------------------------------------------------------------------
# Report: table, verify.json, verify.png


def _num(value: float | None, spec: str) -> str:
    return "-" if value is None else format(value, spec)


def format_table(records: list[Record]) -> str:
    """The records as a fixed-width table, one line per check, and a count of passes."""
    head = (f"{'case':<16} {'check':<24} {'source':<32} {'reference':>13} {'computed':>13} "
            f"{'error':>9} {'tolerance':>9} {'unit':<8} pass")
    lines = [head, "-" * len(head)]
    for r in records:
        short = _short_source(r["source"])
        lines.append(
            f"{r['case'][:16]:<16} {r['check'][:24]:<24} {short[:32]:<32} "
            f"{_num(r['reference'], '.7g'):>13} {_num(r['computed'], '.7g'):>13} "
            f"{_num(r['error'], '.2e'):>9} {_num(r['tolerance'], '.2e'):>9} "
            f"{r['unit'][:8]:<8} {'yes' if r['passed'] else 'NO'}")
    passed = sum(r["passed"] for r in records)
    lines += ["", f"{passed} of {len(records)} checks passed"
              + ("" if passed == len(records) else
                 f"; FAILED: {', '.join(sorted({r['case'] for r in records if not r['passed']}))}"),
              f"Incropera = {INC} (Incropera, DeWitt, Bergman & Lavine, Wiley 2007); "
              "Özişik = Heat Conduction (nonlinear problems, from memory); "
              f"Roache 2002 = {ROACHE}"]
    return "\n".join(lines)


def _short_source(source: str) -> str:
    """'Incropera §4.2 Eq. 4.19' for the table; the records keep the full reference."""
    for full, short in ((INC, "Incropera"), (OZISIK, "Özişik"), (ROACHE, "Roache 2002")):
        if source.startswith(full):
            return short + source[len(full):].replace(",", "")
    return source


def plot_convergence(records: list[Record], path: str | Path | None = None):
    """Errors of the manufactured solution against mesh size on log axes, with lines of
    the expected slopes (2 in L2, 1 in the energy norm); saved to ``path`` if given."""
    from matplotlib.figure import Figure

    fig = Figure(figsize=(6.4, 4.8), layout="constrained")
    ax = fig.subplots()
    series = next((r["convergence"] for r in records if "convergence" in r), None)
    if series is None:
        ax.text(0.5, 0.5, "no convergence study was run", ha="center", va="center",
                transform=ax.transAxes)
        ax.set_axis_off()
    else:
        h = np.array(series["h"])
        for key, label, slope, marker in (("l2", "L2 error, K·m", 2, "o"),
                                          ("energy", "energy-norm error, √(W·K/m)", 1, "s")):
            e = np.array(series[key])
            line, = ax.loglog(h, e, marker=marker, label=f"{label}, observed slope "
                              f"{_slope(list(h), list(e)):.2f}")
            # the expected slope, drawn parallel just below the finest point
            ax.loglog(h, 0.5 * e[-1] * (h / h[-1]) ** slope, "--", color=line.get_color(),
                      alpha=0.6, label=f"expected slope {slope}")
        ax.set_xlabel("mesh size h = √(mean triangle area), m")
        ax.set_ylabel("error")
        ax.grid(True, which="both", alpha=0.3)
        ax.legend(fontsize="small")
    ax.set_title("heat2d verify: manufactured solution (Roache 2002)")
    if path is not None:
        fig.savefig(path, dpi=120)
    return fig


def write_outputs(records: list[Record], out_dir: str | Path, *,
                  seconds: float | None = None) -> list[Path]:
    """Write ``verify.json`` and ``verify.png`` into ``out_dir``, both or neither."""
    from ..errors import Heat2dError
    from ..version import __version__

    out = Path(out_dir)
    try:
        out.mkdir(parents=True, exist_ok=True)
        scratch = Path(tempfile.mkdtemp(prefix=".heat2d-verify-", dir=out))
    except OSError as exc:
        raise Heat2dError(f"cannot create output folder: {exc}", file=str(out)) from None
    try:
        document = {"heat2d_version": __version__, "passed": all(r["passed"] for r in records),
                    "checks": len(records), "failed": sum(not r["passed"] for r in records),
                    "seconds": seconds, "records": [_finite(r) for r in records]}
        (scratch / "verify.json").write_text(json.dumps(document, indent=2, allow_nan=False)
                                             + "\n", encoding="utf-8")
        plot_convergence(records, scratch / "verify.png")
        final = []
        for name in ("verify.json", "verify.png"):
            os.replace(scratch / name, out / name)
            final.append(out / name)
        return final
    except OSError as exc:
        raise Heat2dError(f"cannot write outputs: {exc}", file=str(out)) from None
    finally:
        shutil.rmtree(scratch, ignore_errors=True)


def _finite(record: Record) -> Record:
    """The record with NaN or infinite numbers as None (JSON has no NaN)."""
    return {k: (None if isinstance(v, float) and not math.isfinite(v) else v)
            for k, v in record.items()}


# ---------------------------------------------------------------------------------------
# Command line (heat2d/cli.py registers these)


def add_verify_arguments(parser: argparse.ArgumentParser) -> None:
    """Options of ``heat2d verify``."""
    parser.add_argument("--out", metavar="DIR", default="verify-results",
                        help="folder for verify.json and verify.png (default: verify-results)")
    parser.add_argument("--case", action="append", choices=sorted(CASES), metavar="NAME",
                        help="run only this case (repeatable; default: all of "
                             f"{', '.join(CASES)})")
    parser.add_argument("--quiet", action="store_true",
                        help="print only failures and the final count")
    parser.add_argument("--debug", action="store_true",
                        help="stop at a case that raises and show its traceback")
    parser.set_defaults(refine=1.0)     # the command line checks it for every command


def run_verify_command(args: argparse.Namespace) -> int:
    """Run the cases, print the table, write the files; 0 if every check passed, else 1."""
    start = time.perf_counter()
    records = verify(cases=args.case, raise_errors=args.debug)
    seconds = time.perf_counter() - start
    table = format_table(records)
    if args.quiet:      # the failed rows (with the header) and the count
        lines = table.splitlines()
        failed = [line for line in lines[2:-3] if line.endswith(" NO")]
        table = "\n".join((lines[:2] + failed + [""] if failed else []) + [lines[-2]])
    print(table)
    files = write_outputs(records, args.out, seconds=seconds)
    if not args.quiet:
        print(f"\n{len(records)} checks in {seconds:.1f} s; wrote "
              + ", ".join(str(f) for f in files))
    ok = all(r["passed"] for r in records)
    if not ok:
        print("verification failed: see the rows marked NO", file=sys.stderr)
    return 0 if ok else 1
