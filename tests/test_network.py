"""Foster fit, Cauer ladder, modal network and pulse superposition against references."""

import math

import numpy as np
import pytest
import scipy.linalg
import scipy.sparse as sp

from heat2d.errors import SolveError
from heat2d.transient.network import Foster, cauer, foster_fit, modal_network
from heat2d.transient.periodic import duty_family, periodic_peak, pulse_train_peak
from heat2d.verify.transient_forms import slab_foster, slab_step, two_layer_step

L, K_, RHO_C, AREA = 1.6e-3, 0.3, 1.9e6, 1e-4     # an FR4-like slab, 1 cm²
R_SLAB = L / (K_ * AREA)
ALPHA = K_ / RHO_C


def _slab_curve():
    """C&J ch. 3 slab step response at 10 points per decade over Fo = 1e-4 … 10."""
    t = np.logspace(-4, 1, 51) * L**2 / ALPHA
    return t, slab_step(t, L, K_, RHO_C, AREA)


def test_foster_fit_of_the_slab():
    t, z = _slab_curve()
    fit = foster_fit(t, z, R_SLAB)
    # reported error is the max |fit − z|/z over the points, below the 0.2 % target
    assert fit.error == pytest.approx(np.abs(fit.z(t) / z - 1).max(), rel=1e-9)
    assert fit.error < 0.002
    assert fit.rms <= fit.error
    assert np.all(fit.r >= 0) and np.all(fit.tau > 0)
    assert fit.r.sum() == pytest.approx(R_SLAB, rel=1e-9)     # Σ R = r_total imposed
    # C&J ch. 3: the slowest term R₁ = 8R/π², τ₁ = 4L²/(π²α). The default network (the
    # smallest within 0.2 % at every point: six terms here) recovers it within 1 %
    # (measured 0.36 %) ...
    r1, tau1 = (x[0] for x in slab_foster(L, K_, RHO_C, AREA, 1))
    assert len(fit.r) <= 7
    assert fit.r[-1] == pytest.approx(r1, rel=0.01)
    assert fit.tau[-1] == pytest.approx(tau1, rel=0.01)
    # ... and an eight-term network within 0.05 % (measured 0.027 %), 0.01 % at every point
    eight = foster_fit(t, z, R_SLAB, terms=8)
    assert len(eight.r) == 8
    assert eight.r[-1] == pytest.approx(r1, rel=5e-4)
    assert eight.tau[-1] == pytest.approx(tau1, rel=5e-4)
    assert eight.error < 2e-4
    six = eight
    assert six.r.sum() == pytest.approx(R_SLAB, rel=1e-9)


def test_foster_fit_of_a_two_layer_stack():
    # Zommer & Feucht 1978 transmission-matrix impedance (copper over FR4), fitted within 1 %;
    # its final value is the series resistance Σ Lᵢ/(kᵢA) (Incropera §3.1).
    layers = [(35e-6, 390.0, 3.44e6), (1.6e-3, 0.3, 1.9e6)]
    r_total = 35e-6 / (390 * AREA) + R_SLAB
    t = np.logspace(-6, 3, 91)
    z = two_layer_step(t, layers, AREA)
    fit = foster_fit(t, z, r_total)
    assert fit.error < 0.01
    assert fit.r.sum() == pytest.approx(r_total, rel=1e-9)
    assert np.all(fit.r >= 0)


def test_foster_fit_recovers_exact_terms():
    # A curve that is itself a two-term network is refitted to its own terms.
    r, tau = np.array([0.3, 1.2]), np.array([1e-3, 0.5])
    t = np.logspace(-5, 1, 61)
    truth = Foster(r=r, tau=tau)
    fit = foster_fit(t, truth.z(t), r.sum(), terms=2)
    assert fit.r == pytest.approx(r, rel=1e-5)
    assert fit.tau == pytest.approx(tau, rel=1e-5)


def test_foster_fit_rejects_a_bad_curve():
    with pytest.raises(SolveError):
        foster_fit([1.0], [0.5], 1.0)
    with pytest.raises(SolveError):
        foster_fit([1.0, 2.0], [0.5, 0.7], 0.0)


def test_cauer_of_one_term():
    # A single RC: the ladder is the same R and C = τ/R.
    lad = cauer(Foster(r=np.array([2.0]), tau=np.array([0.5])))
    assert lad.r == pytest.approx([2.0]) and lad.c == pytest.approx([0.25])


def test_cauer_foster_round_trip():
    t, z = _slab_curve()
    for net in (foster_fit(t, z, R_SLAB, terms=8),
                Foster(*(x[::-1] for x in slab_foster(L, K_, RHO_C, AREA, 12)))):
        lad = cauer(net)
        assert len(lad.r) == len(net.r)
        assert np.all(lad.r > 0) and np.all(lad.c > 0)   # an RC impedance has a passive ladder
        tt = np.logspace(-3, 1.5, 40) * net.tau.min()
        tt = np.concatenate([tt, np.logspace(-2, 1, 20) * net.tau.max()])
        assert lad.z(tt) == pytest.approx(net.z(tt), rel=1e-9)
        back = lad.foster()
        assert back.tau == pytest.approx(net.tau, rel=1e-9)
        assert back.r == pytest.approx(net.r, rel=1e-9)
        # Z(s → 0) = Σ R for both; Z(s → ∞) = 1/(sC₁) = Σ 1/(s Cᵢ_Foster) (the capacity
        # seen at the input: derived from the two expansions of Z(s))
        assert lad.r.sum() == pytest.approx(net.r.sum(), rel=1e-12)
        assert 1 / lad.c[0] == pytest.approx(np.sum(net.r / net.tau), rel=1e-12)


def _chain(n):
    """Linear FE on a 1-D slab of n elements, heated node 0, node n isothermal (removed);
    lumped (row-sum) capacity."""
    h = L / n
    g = K_ * AREA / h
    main = np.full(n, 2 * g)
    main[0] = g
    k = sp.diags([main, np.full(n - 1, -g), np.full(n - 1, -g)], [0, 1, -1], format="csr")
    c = np.full(n, RHO_C * AREA * h)
    c[0] /= 2
    e0 = np.zeros(n)
    e0[0] = 1.0
    return k, c, e0


def test_modal_network_against_dense_eigh():
    # scipy.linalg.eigh of the same generalised problem K φ = λ C φ (dense reference)
    k, c, e0 = _chain(400)
    net = modal_network(k, c, e0, e0, count=6)
    lam, phi = scipy.linalg.eigh(k.toarray(), np.diag(c), subset_by_index=[0, 5])
    r_ref = phi[0] ** 2 / lam
    assert net.tau[::-1] == pytest.approx(1 / lam, rel=1e-9)
    assert net.r[::-1] == pytest.approx(r_ref, rel=1e-8)


def test_modal_network_of_a_fine_slab():
    k, c, e0 = _chain(400)
    net = modal_network(k, c, e0, e0, count=6)
    r_ref, tau_ref = slab_foster(L, K_, RHO_C, AREA, 6)
    # C&J ch. 3: slowest term R₁ = 8R/π², τ₁ = 4L²/(π²α), within 1 % (measured ~1e-5)
    assert net.r[-1] == pytest.approx(r_ref[0], rel=0.01)
    assert net.tau[-1] == pytest.approx(tau_ref[0], rel=0.01)
    assert net.tau[::-1] == pytest.approx(tau_ref, rel=1e-3)
    # all modes together: Σ R = eᵀK⁻¹e = L/(kA) (series resistance, Incropera §3.1;
    # linear elements are nodally exact in 1-D)
    k, c, e0 = _chain(50)
    every = modal_network(k, c, e0, e0, count=50)
    assert every.r.sum() == pytest.approx(R_SLAB, rel=1e-10)


def test_periodic_single_pole_closed_form():
    # First-order RC in periodic steady state (derived from the superposition sum, a
    # geometric series): ΔT = P R (1 − e^{−tp/τ})/(1 − e^{−T/τ}).
    for tau, tp, period in [(1.0, 0.1, 0.5), (1.0, 1e-6, 1e-5), (10.0, 1e-3, 0.1),
                            (1e-3, 0.1, 0.2)]:
        net = Foster(r=np.array([2.0]), tau=np.array([tau]))
        exact = 3.0 * 2.0 * (1 - math.exp(-tp / tau)) / (1 - math.exp(-period / tau))
        assert periodic_peak(net, 3.0, tp, period) == pytest.approx(exact, rel=1e-8)
        assert periodic_peak(net.z, 3.0, tp, period) == pytest.approx(exact, rel=1e-8)


def test_periodic_limits_and_superposition():
    t, z = _slab_curve()
    net = foster_fit(t, z, R_SLAB, terms=6)
    tp = 1e-3 * net.tau.max()
    # D → 1: continuous power, P·R; D → 0: a single pulse, Z(tp)
    assert periodic_peak(net, 2.0, tp, tp / 0.999999) == pytest.approx(2 * R_SLAB, rel=1e-4)
    assert periodic_peak(net, 1.0, tp, tp / 1e-6) == pytest.approx(float(net.z(tp)), rel=1e-6)
    # linear: a multi-term network is the sum of its single-pole closed forms
    period = 20 * tp
    exact = np.sum(net.r * -np.expm1(-tp / net.tau) / -np.expm1(-period / net.tau))
    assert periodic_peak(net, 1.0, tp, period) == pytest.approx(exact, rel=1e-6)
    # a finite train (superposition, closed form of the truncated geometric series)
    count = 7
    train = np.sum(net.r * -np.expm1(-tp / net.tau) * -np.expm1(-count * period / net.tau)
                   / -np.expm1(-period / net.tau))
    assert pulse_train_peak(net, 1.0, tp, period, count) == pytest.approx(train, rel=1e-9)
    assert pulse_train_peak(net, 1.0, tp, period, 1) == pytest.approx(float(net.z(tp)))
    # a step response that never settles (semi-infinite law) has no periodic state
    with pytest.raises(SolveError):
        periodic_peak(np.sqrt, 1.0, 1.0, 2.0)
    with pytest.raises(SolveError):
        periodic_peak(net, 1.0, 2.0, 1.0)


def test_duty_family():
    net = Foster(r=np.array([0.5, 1.5]), tau=np.array([1e-3, 1.0]))
    widths = np.array([1e-4, 1e-2, 1.0])
    duties = (0.05, 0.5)
    fam = duty_family(net, widths, duties)
    assert fam.shape == (3, 3)
    assert fam[0] == pytest.approx(net.z(widths))
    for i, d in enumerate(duties):
        exact = (net.r * -np.expm1(-widths[:, None] / net.tau)
                 / -np.expm1(-widths[:, None] / (d * net.tau))).sum(1)
        assert fam[i + 1] == pytest.approx(exact, rel=1e-6)
    # higher duty, higher peak; all between Z(tp) and R
    assert np.all(np.diff(fam, axis=0) > 0) and np.all(fam <= 2.0)
    with pytest.raises(SolveError):
        duty_family(net, widths, (0.0,))
