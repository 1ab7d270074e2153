"""The transient reference solutions against published values and against each other."""

import math

import numpy as np
import pytest

from heat2d.verify.transient_forms import (
    invert_stehfest,
    invert_talbot,
    lumped_cooling,
    plane_wall_convection,
    semi_infinite_step,
    slab_foster,
    slab_step,
    two_layer_step,
    wall_roots,
)

FO = np.array([0.01, 0.1, 0.40528, 1.0, 3.0])


def test_slab_step_table():
    # Carslaw & Jaeger 2nd ed. ch. 3 (§3.3): Z/R = 1 − Σ 8/((2n−1)²π²) exp(−(2n−1)²π²Fo/4),
    # values at Fo = 0.01, 0.1, 0.40528, 1, 3.
    expected = [0.11284, 0.35682, 0.70179, 0.93126, 0.99951]
    L, k, rho_c, area = 2e-3, 5.0, 2e6, 3e-4
    t = FO * L**2 * rho_c / k
    z = slab_step(t, L, k, rho_c, area) / (L / (k * area))
    assert z == pytest.approx(expected, abs=1e-5)


def test_slab_step_branches_agree():
    # C&J §3.3: the image series (Fo < 0.5) and the eigenfunction series are the same
    # function; summed with 2·10⁵ eigen terms they agree to 1e-9 on both sides of the switch.
    fo = np.array([0.02, 0.2, 0.4999, 0.5001, 0.8])
    m = 2 * np.arange(1, 200001) - 1
    ref = 1 - (8 / (m**2 * math.pi**2) * np.exp(-np.outer(fo, m**2) * math.pi**2 / 4)).sum(1)
    assert slab_step(fo, 1.0, 1.0, 1.0) == pytest.approx(ref, abs=1e-9)


def test_slab_early_time_is_semi_infinite():
    # C&J §2.9: before the heat reaches the far face the slab is a semi-infinite solid,
    # ΔT/P = 2√(t/π)/(A√(kρc)); at Fo = 1e-3 the image terms are below exp(−1000).
    L, k, rho_c, area = 1e-3, 2.0, 1.5e6, 1e-4
    t = np.array([1e-6, 1e-4, 1e-3]) * L**2 * rho_c / k
    assert slab_step(t, L, k, rho_c, area) == pytest.approx(
        semi_infinite_step(t, k, rho_c, area), rel=1e-12)


def test_slab_foster_sums_to_series():
    # C&J ch. 3 series term by term: Σ Rₙ(1 − e^{−t/τₙ}) equals the series; Σ Rₙ → R = L/(kA)
    # (Σ 8/((2n−1)²π²) = 1).
    r, tau = slab_foster(1e-3, 3.0, 2e6, 2e-4, n=4000)
    assert r.sum() == pytest.approx(1e-3 / (3.0 * 2e-4), rel=1e-4)
    t = np.array([0.1, 0.5, 2.0]) * tau[0]
    # the truncated terms (τ < t/10⁶) have all saturated: their share R − Σ Rₙ is added
    z = (r * (1 - np.exp(-t[:, None] / tau))).sum(1) + (1e-3 / (3.0 * 2e-4) - r.sum())
    assert z == pytest.approx(slab_step(t, 1e-3, 3.0, 2e6, 2e-4), rel=1e-8)


def test_lumped_cooling():
    # Incropera §5.1, Eq. 5.6: θ/θᵢ = exp(−t/τ), τ = ρcV/(hA): at t = τ it is e⁻¹.
    tau = 8e5 * 1e-6 / (25 * 1e-3)
    assert float(lumped_cooling(tau, 25, 1e-3, 8e5, 1e-6)) == pytest.approx(math.exp(-1))


def test_wall_roots_and_series():
    # Incropera 6th ed. Table 5.1: Bi = 1: ζ₁ = 0.8603 rad, C₁ = 1.1191; Bi = 0.1: ζ₁ = 0.3111.
    assert wall_roots(1.0, 1)[0] == pytest.approx(0.8603, abs=1e-4)
    assert wall_roots(0.1, 1)[0] == pytest.approx(0.3111, abs=1e-4)
    z = wall_roots(1.0, 5)
    assert z * np.tan(z) == pytest.approx(1.0, abs=1e-10)
    # Inc §5.5.2, Eq. 5.41: for Fo > 0.2 the one-term form C₁ exp(−ζ₁²Fo) is within 2 %;
    # at Fo = 1 the higher terms are below 1e-4.
    c1 = 1.1191
    theta0 = plane_wall_convection(np.array([1.0]), 0.0, 1.0, 1.0, 1.0, 1.0)[0]
    assert theta0 == pytest.approx(c1 * math.exp(-0.8603**2), abs=3e-4)
    # initial condition: Σ Cₙ cos(ζₙ x/L) → 1 inside the wall (Inc Eq. 5.39a at Fo = 0)
    assert plane_wall_convection(np.array([0.0]), 0.3, 1.0, 1.0, 1.0, 1.0, terms=4000)[0] == \
        pytest.approx(1.0, abs=2e-3)


def test_inversions_on_a_known_transform():
    # Abate & Valkó 2004: L{1 − e^{−t}} = 1/(s(s+1)); fixed Talbot with M = 32 is good to
    # ~1e-10 in doubles, Stehfest with n = 14 to ~1e-5.
    def f(s): return 1 / (s * (s + 1))
    t = np.array([0.01, 0.3, 1.0, 5.0])
    exact = 1 - np.exp(-t)
    assert invert_talbot(f, t) == pytest.approx(exact, abs=1e-9)
    assert invert_stehfest(f, t) == pytest.approx(exact, abs=1e-4)


def test_stack_of_identical_layers_is_the_slab():
    # Two layers of the same material form one slab: the transmission-matrix impedance
    # (Zommer & Feucht 1978) inverted numerically equals C&J ch. 3 series.
    L, k, rho_c, area = 1e-3, 10.0, 2e6, 1e-4
    t = np.array([1e-4, 1e-2, 0.1, 0.40528, 1.0, 3.0]) * L**2 * rho_c / k
    slab = slab_step(t, L, k, rho_c, area)
    layers = [(0.3e-3, k, rho_c), (0.7e-3, k, rho_c)]
    talbot = two_layer_step(t, layers, area)
    stehfest = two_layer_step(t, layers, area, method="stehfest")
    assert talbot == pytest.approx(slab, rel=1e-8)
    assert stehfest == pytest.approx(talbot, rel=2e-4)


def test_two_layer_limits():
    # A thin, highly conductive but massive top layer over a slab: at late times the stack
    # approaches its series resistance Σ Lᵢ/(kᵢA) (Inc §3.1 series resistance); at early
    # times the top layer behaves as a semi-infinite solid (C&J §2.9).
    layers = [(1e-4, 400.0, 3.4e6), (1.6e-3, 0.3, 1.9e6)]
    r_total = 1e-4 / 400 + 1.6e-3 / 0.3
    t_late = 200 * 1.6e-3**2 * 1.9e6 / 0.3
    assert float(two_layer_step(t_late, layers)) == pytest.approx(r_total, rel=1e-6)
    t_early = 1e-3 * 1e-4**2 * 3.4e6 / 400
    assert float(two_layer_step(t_early, layers)) == pytest.approx(
        float(semi_infinite_step(t_early, 400.0, 3.4e6)), rel=1e-6)
    talbot = two_layer_step(np.logspace(-6, 1, 8), layers)
    stehfest = two_layer_step(np.logspace(-6, 1, 8), layers, method="stehfest")
    assert stehfest == pytest.approx(talbot, rel=1e-3)
    assert np.all(np.diff(talbot) > 0)
