"""Published transient conduction solutions: the references of the transient tests.

Each function takes SI values (s, m, W/(m·K), J/(m³·K)) and returns the exact figure
(series summed to convergence, or a Laplace-domain impedance inverted numerically).

Sources: Carslaw & Jaeger, *Conduction of Heat in Solids*, 2nd ed. (Oxford 1959), cited
"C&J" with its section; Incropera, DeWitt, Bergman & Lavine, *Fundamentals of Heat and
Mass Transfer*, 6th ed. (Wiley 2007), cited "Inc"; Zommer & Feucht, IEEE Trans. Electron
Devices 25 (1978) for the transmission-matrix impedance of a layer stack; Abate & Valkó,
Int. J. Numer. Meth. Engng 60 (2004) for the fixed Talbot inversion; Stehfest, Comm. ACM
13 (1970) for the Stehfest inversion.
"""

from __future__ import annotations

import math
from collections.abc import Callable, Sequence

import numpy as np
from scipy.special import erfc

__all__ = ["invert_stehfest", "invert_talbot", "lumped_cooling", "plane_wall_convection",
           "semi_infinite_step", "slab_foster", "slab_step", "stack_impedance",
           "two_layer_step", "wall_roots"]


def semi_infinite_step(t, k: float, rho_c: float, area: float = 1.0) -> np.ndarray:
    """Surface rise per watt of a semi-infinite solid under a uniform step of flux (C&J §2.9).

    ΔT/P = 2 √(t/π) / (A √(k ρc)).

    Parameters
    ----------
    t
        Time(s) since the step, s.
    k, rho_c
        Conductivity W/(m·K) and volumetric heat capacity J/(m³·K).
    area
        Heated area A, m².

    Returns
    -------
    numpy.ndarray
        Z(t), K/W.
    """
    t = np.asarray(t, dtype=float)
    return 2.0 * np.sqrt(t / math.pi) / (area * math.sqrt(k * rho_c))


def _ierfc(x: np.ndarray) -> np.ndarray:
    """ierfc(x) = exp(−x²)/√π − x erfc(x) (C&J Appendix II)."""
    return np.exp(-x * x) / math.sqrt(math.pi) - x * erfc(x)


def slab_step(t, L: float, k: float, rho_c: float, area: float = 1.0,
              terms: int = 200) -> np.ndarray:
    """Impedance of the heated face of a slab, flux on one face, the other isothermal.

    C&J ch. 3 (§3.3, eigenfunction series):
    Z/R = 1 − Σₙ 8/((2n−1)²π²) exp(−(2n−1)²π² Fo/4), R = L/(kA), Fo = αt/L².
    For Fo < 0.5 the equivalent image series (C&J §3.3, the semi-infinite law §2.9 with
    its images) Z/R = 2√Fo [1/√π + 2 Σₙ (−1)ⁿ ierfc(n/√Fo)] is used, which converges
    in a few terms where the eigenfunction series needs thousands.

    Parameters
    ----------
    t
        Time(s) since the step, s (≥ 0).
    L, k, rho_c
        Thickness m, conductivity W/(m·K), volumetric capacity J/(m³·K).
    area
        Face area, m².
    terms
        Terms of the eigenfunction series (used for Fo ≥ 0.5; 200 is far beyond the
        precision of doubles there).

    Returns
    -------
    numpy.ndarray
        Z(t), K/W, same shape as t.
    """
    t = np.asarray(t, dtype=float)
    fo = np.maximum(t, 0.0) * (k / rho_c) / L**2
    out = np.empty_like(fo)
    small = fo < 0.5
    f = fo[small]
    n = np.arange(1, 12)
    with np.errstate(divide="ignore", invalid="ignore"):
        img = _ierfc(n[None, :] / np.sqrt(f)[:, None])
    img = np.where(np.isfinite(img), img, 0.0)
    out[small] = 2 * np.sqrt(f) * (1 / math.sqrt(math.pi)
                                   + 2 * ((-1.0) ** n * img).sum(axis=1))
    m = 2 * np.arange(1, terms + 1) - 1
    f = fo[~small]
    series = (8 / (m**2 * math.pi**2))[None, :] * np.exp(
        -(m**2)[None, :] * math.pi**2 * f[:, None] / 4)
    out[~small] = 1 - series.sum(axis=1)
    return out * L / (k * area)


def slab_foster(L: float, k: float, rho_c: float, area: float = 1.0,
                n: int = 10) -> tuple[np.ndarray, np.ndarray]:
    """The exact Foster terms of :func:`slab_step` (C&J ch. 3 series read term by term).

    Rₙ = 8R/((2n−1)²π²), τₙ = 4L²/((2n−1)²π²α), R = L/(kA), n = 1 … n.

    Returns
    -------
    (numpy.ndarray, numpy.ndarray)
        R (K/W) and τ (s), slowest term first.
    """
    m = 2 * np.arange(1, n + 1) - 1
    r_total = L / (k * area)
    alpha = k / rho_c
    return 8 * r_total / (m**2 * math.pi**2), 4 * L**2 / (m**2 * math.pi**2 * alpha)


def lumped_cooling(t, h: float, area: float, rho_c: float, volume: float) -> np.ndarray:
    """Lumped-capacitance cooling θ/θᵢ = exp(−hA t/(ρc V)) (Inc §5.1, Eq. 5.6).

    Parameters
    ----------
    t
        Time(s), s.
    h, area
        Surface coefficient W/(m²·K) and cooled area m².
    rho_c, volume
        Volumetric capacity J/(m³·K) and volume m³.

    Returns
    -------
    numpy.ndarray
        (T − T∞)/(Tᵢ − T∞).
    """
    t = np.asarray(t, dtype=float)
    return np.exp(-h * area * t / (rho_c * volume))


def wall_roots(bi: float, count: int) -> np.ndarray:
    """The first `count` positive roots of ζ tan ζ = Bi (Inc §5.5.1, Eq. 5.39c).

    Root n lies in ((n−1)π, (n−1)π + π/2); found by bisection of ζ sin ζ − Bi cos ζ
    on those brackets (all roots at once).
    """
    lo = np.arange(count) * math.pi
    hi = lo + math.pi / 2
    def g(z): return z * np.sin(z) - bi * np.cos(z)
    g_lo = g(lo)
    for _ in range(80):
        mid = 0.5 * (lo + hi)
        g_mid = g(mid)
        same = np.sign(g_mid) == np.sign(g_lo)
        lo = np.where(same, mid, lo)
        g_lo = np.where(same, g_mid, g_lo)
        hi = np.where(same, hi, mid)
    return 0.5 * (lo + hi)


def plane_wall_convection(t, x: float, L: float, k: float, rho_c: float, h: float,
                          terms: int = 50) -> np.ndarray:
    """Plane wall −L ≤ x ≤ L, initially uniform, both faces convecting (Inc §5.5.1).

    θ/θᵢ = Σₙ Cₙ exp(−ζₙ² Fo) cos(ζₙ x/L), Cₙ = 4 sin ζₙ/(2ζₙ + sin 2ζₙ) (Eq. 5.39),
    ζₙ tan ζₙ = Bi = hL/k, Fo = αt/L².

    Returns
    -------
    numpy.ndarray
        (T − T∞)/(Tᵢ − T∞) at x, same shape as t.
    """
    t = np.asarray(t, dtype=float)
    zeta = wall_roots(h * L / k, terms)
    c = 4 * np.sin(zeta) / (2 * zeta + np.sin(2 * zeta))
    fo = t[..., None] * (k / rho_c) / L**2
    return (c * np.exp(-zeta**2 * fo) * np.cos(zeta * x / L)).sum(axis=-1)


def stack_impedance(s, layers: Sequence[tuple[float, float, float]], area: float = 1.0,
                    sink: str | float = "isothermal") -> np.ndarray:
    """Input impedance Z(s) (K/W, Laplace domain) of a layer stack (Zommer & Feucht 1978).

    Each layer has the transmission matrix [cosh γL, sinh γL/(kAγ); kAγ sinh γL, cosh γL],
    γ = √(s ρc/k); heat enters the top of the first layer; below the last layer the sink
    is isothermal (Z_load = 0) or a resistance in K/W. The product is taken from the
    sink upward in the equivalent form Z ← (Z + Z₀ tanh γL)/(1 + Z tanh(γL)/Z₀),
    Z₀ = 1/(kAγ), which does not overflow at large |s|.

    Parameters
    ----------
    s
        Complex Laplace variable(s), 1/s.
    layers
        (thickness m, k W/(m·K), ρc J/(m³·K)) from the heated face down.
    area
        Area, m².
    sink
        "isothermal" or a sink resistance, K/W.
    """
    s = np.asarray(s, dtype=complex)
    z = np.zeros_like(s) if sink == "isothermal" else np.full_like(s, float(sink))
    for thickness, k, rho_c in reversed(list(layers)):
        gamma = np.sqrt(s * rho_c / k)
        z0 = 1 / (k * area * gamma)
        th = np.tanh(gamma * thickness)
        z = (z + z0 * th) / (1 + z * th / z0)
    return z


def invert_talbot(f: Callable[[np.ndarray], np.ndarray], t, m: int = 32) -> np.ndarray:
    """Inverse Laplace transform by the fixed Talbot method (Abate & Valkó 2004, Eq. 26).

    r = 2M/(5t), s(θ) = rθ(cot θ + i), σ(θ) = θ + (θ cot θ − 1) cot θ,
    f(t) ≈ (r/M)[½ F(r) e^{rt} + Σₖ₌₁^{M−1} Re(e^{t s(θₖ)} F(s(θₖ))(1 + iσ(θₖ)))], θₖ = kπ/M.
    """
    t = np.atleast_1d(np.asarray(t, dtype=float))
    r = 2 * m / (5 * t)
    theta = np.arange(1, m) * math.pi / m
    cot = 1 / np.tan(theta)
    s = r[:, None] * theta * (cot + 1j)
    sigma = theta + (theta * cot - 1) * cot
    terms = np.exp(t[:, None] * s) * f(s) * (1 + 1j * sigma)
    head = 0.5 * np.exp(r * t) * f(r.astype(complex)).real
    return r / m * (head + terms.real.sum(axis=1))


def invert_stehfest(f: Callable[[np.ndarray], np.ndarray], t, n: int = 14) -> np.ndarray:
    """Inverse Laplace transform by the Stehfest method (Stehfest 1970), n even.

    f(t) ≈ (ln 2/t) Σᵢ₌₁ⁿ Vᵢ F(i ln 2/t), with the Stehfest weights Vᵢ.
    """
    t = np.atleast_1d(np.asarray(t, dtype=float))
    half = n // 2
    v = np.zeros(n)
    for i in range(1, n + 1):
        acc = 0.0
        for j in range((i + 1) // 2, min(i, half) + 1):
            acc += (j**half * math.factorial(2 * j)
                    / (math.factorial(half - j) * math.factorial(j) * math.factorial(j - 1)
                       * math.factorial(i - j) * math.factorial(2 * j - i)))
        v[i - 1] = (-1) ** (i + half) * acc
    a = math.log(2) / t
    s = a[:, None] * np.arange(1, n + 1)
    return a * (v * f(s.astype(complex)).real).sum(axis=1)


def two_layer_step(t, layers: Sequence[tuple[float, float, float]], area: float = 1.0,
                   sink: str | float = "isothermal", method: str = "talbot") -> np.ndarray:
    """Step-flux impedance Z(t) (K/W) at the heated face of a layer stack.

    Z(t) is the inverse transform of Z_in(s)/s, Z_in from :func:`stack_impedance`
    (transmission matrices, Zommer & Feucht 1978), inverted by the fixed Talbot method
    (Abate & Valkó 2004) or the Stehfest method (``method="stehfest"``). Any number of
    layers is accepted; two is the case named.
    """
    def f(s): return stack_impedance(s, layers, area, sink) / s
    t = np.asarray(t, dtype=float)
    if method == "talbot":
        out = invert_talbot(f, t.ravel())
    elif method == "stehfest":
        out = invert_stehfest(f, t.ravel())
    else:
        raise ValueError(f"unknown inversion {method!r}")
    return out.reshape(t.shape)
