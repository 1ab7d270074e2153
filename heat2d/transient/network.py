"""RC networks of a thermal impedance: Foster fit, Cauer ladder, modal network.

A Foster network Z(t) = Σ Rᵢ (1 − exp(−t/τᵢ)) is fitted to a step-response curve by
non-negative least squares on a dense set of candidate time constants, then merged to
few terms refitted with free τ. The Cauer ladder with the same driving-point impedance is
found by the continued-fraction expansion of Z(s) = Σ Rᵢ/(1 + sτᵢ) in exact rational
arithmetic. The modal network reads the Foster terms off the generalised eigenproblem
K φ = λ C φ of the finite-element model.
"""

from __future__ import annotations

from dataclasses import dataclass
from fractions import Fraction

import numpy as np
from scipy.optimize import least_squares, nnls

from ..errors import SolveError

__all__ = ["Cauer", "Foster", "cauer", "foster_fit", "modal_network"]

TARGET = 0.002
"""Fit error below which the smallest Foster network is accepted: max |fit − z|/z over the
points, relative to the curve at each time. At 0.2 % the slab of Carslaw & Jaeger ch. 3
(Fourier numbers 1e-4 to 10) gets six terms and its slowest term within 0.4 %; at 1 %,
five terms lump faster modes into the slowest, 1.2 % off."""
EIG_TOL = 1e-8
"""Relative accuracy of the modal network's Ritz pairs (eigsh ``tol``): its eigenvalues
agree with those at machine precision to 2e-15 on the 100 000-node board, with 40
shift-invert solves instead of 56."""
PER_DECADE = 4
"""Candidate time constants per decade for the non-negative least-squares fit."""
WEIGHT = 1e4
"""Weight of the Σ Rᵢ = r_total row, relative to one data point."""


@dataclass(frozen=True)
class Foster:
    """A Foster network: resistances r (K/W) and time constants tau (s), τ ascending.

    error is the largest |fit − z|/r_total over the fitted points and rms the root mean
    square of the same (NaN when the network was not fitted to a curve).
    """

    r: np.ndarray
    tau: np.ndarray
    error: float = float("nan")
    rms: float = float("nan")

    def z(self, t) -> np.ndarray:
        """Step response Σ Rᵢ (1 − exp(−t/τᵢ)), K/W, same shape as t."""
        t = np.asarray(t, dtype=float)
        return (self.r * -np.expm1(-t[..., None] / self.tau)).sum(axis=-1)

    @property
    def capacity(self) -> np.ndarray:
        """Cᵢ = τᵢ/Rᵢ, J/K."""
        return self.tau / self.r


@dataclass(frozen=True)
class Cauer:
    """A Cauer ladder: heat enters node 1; cᵢ (J/K) from node i to the reference, rᵢ (K/W)
    from node i to node i+1, the last r to the reference (the sink)."""

    r: np.ndarray
    c: np.ndarray

    def foster(self) -> Foster:
        """The equivalent Foster network, from the poles of the ladder (its eigenvalues)."""
        g = 1 / self.r
        diag = g.copy()
        diag[1:] += g[:-1]
        scale = 1 / np.sqrt(self.c)
        a = np.diag(diag) - np.diag(g[:-1], 1) - np.diag(g[:-1], -1)
        lam, vec = np.linalg.eigh(a * scale[:, None] * scale[None, :])
        phi1 = vec[0] * scale[0]
        r = phi1**2 / lam
        order = np.argsort(1 / lam)
        return Foster(r=r[order], tau=(1 / lam)[order])

    def z(self, t) -> np.ndarray:
        """Step response of the ladder, K/W (by its own poles)."""
        return self.foster().z(t)


def _design(t: np.ndarray, tau: np.ndarray) -> np.ndarray:
    return -np.expm1(-t[:, None] / tau[None, :])


def _scale(z: np.ndarray, r_total: float) -> np.ndarray:
    """Each point's own value (the fit is relative at every time, so the early curve,
    far below R, counts as much as the late one), floored at 1e-9 R."""
    return np.maximum(np.abs(z), 1e-9 * r_total)


def _errors(t, z, r, tau, r_total) -> tuple[float, float]:
    d = (_design(t, tau) @ r - z) / _scale(z, r_total)
    return float(np.abs(d).max()), float(np.sqrt(np.mean(d * d)))


def _merge(r: np.ndarray, tau: np.ndarray, n: int) -> tuple[np.ndarray, np.ndarray]:
    """Merge adjacent terms (closest in log τ, weighted by R) until n remain."""
    r, logt = list(r), list(np.log(tau))
    while len(r) > n:
        gaps = np.diff(logt)
        i = int(np.argmin(gaps))
        total = r[i] + r[i + 1]
        logt[i] = (r[i] * logt[i] + r[i + 1] * logt[i + 1]) / total
        r[i] = total
        del r[i + 1], logt[i + 1]
    return np.array(r), np.exp(np.array(logt))


def _refit(t, z, r_total, r0, tau0, span) -> tuple[np.ndarray, np.ndarray]:
    """Refit n terms with free log τ (within the candidate span) and R ≥ 0."""
    n = len(r0)
    weight = WEIGHT * np.sqrt(len(t))

    w = _scale(z, r_total)

    def residual(x):
        r, tau = x[:n], np.exp(x[n:])
        return np.concatenate([(_design(t, tau) @ r - z) / w,
                               [weight * (r.sum() - r_total) / r_total]])

    def jacobian(x):
        # ∂/∂Rⱼ = (1 − e^(−t/τⱼ))/w, ∂/∂ln τⱼ = −Rⱼ (t/τⱼ) e^(−t/τⱼ)/w; the total's row.
        r, tau = x[:n], np.exp(x[n:])
        u = t[:, None] / tau[None, :]
        e = np.exp(-u)
        jac = np.zeros((len(t) + 1, 2 * n))
        jac[:-1, :n] = -np.expm1(-u) / w[:, None]
        jac[:-1, n:] = -(r[None, :] * u * e) / w[:, None]
        jac[-1, :n] = weight / r_total
        return jac

    x0 = np.concatenate([r0, np.log(tau0)])
    lo = np.concatenate([np.zeros(n), np.full(n, np.log(span[0]))])
    hi = np.concatenate([np.full(n, np.inf), np.full(n, np.log(span[1]))])
    x0 = np.clip(x0, lo, np.where(np.isfinite(hi), hi, x0 + 1))
    fit = least_squares(residual, x0, jac=jacobian, bounds=(lo, hi), x_scale="jac",
                        max_nfev=40 * n + 100)
    r, tau = fit.x[:n], np.exp(fit.x[n:])
    order = np.argsort(tau)
    return r[order], tau[order]


CLOSE = 1.1
"""Terms whose time constants are within this ratio are one term (R summed, log τ
R-weighted): the data cannot tell them apart."""


def _close_merged(f: Foster, t, z, r_total) -> Foster:
    r, logt = list(f.r), list(np.log(f.tau))
    i = 0
    while i < len(r) - 1:
        if logt[i + 1] - logt[i] < np.log(CLOSE):
            total = r[i] + r[i + 1]
            logt[i] = (r[i] * logt[i] + r[i + 1] * logt[i + 1]) / total
            r[i] = total
            del r[i + 1], logt[i + 1]
        else:
            i += 1
    if len(r) == len(f.r):
        return f
    r, tau = np.array(r), np.exp(np.array(logt))
    err, rms = _errors(t, z, r, tau, r_total)
    return Foster(r=r, tau=tau, error=err, rms=rms)


def foster_fit(t, z, r_total: float, *, terms: int | None = None,
               max_terms: int = 12) -> Foster:
    """Fit a Foster network to a step-response curve z(t) (K/W) with Σ Rᵢ = r_total.

    Non-negative least squares (scipy.optimize.nnls) on candidate time constants 4 per
    decade from t_min/10 to 10·t_max, the total imposed by a heavily weighted row; the
    non-zero terms are merged to N and refitted with free τ (least squares in log τ,
    R ≥ 0). N is `terms` (at most the number of non-zero candidate terms: more are not
    supported by the data), or the smallest (up to `max_terms`) with max |fit − z|/z
    below :data:`TARGET` at every point (relative to the curve itself, so that the short
    times a pulse rating reads count), or else the best found. The resistances are
    finally scaled so that Σ Rᵢ = r_total exactly.
    """
    t = np.asarray(t, dtype=float).ravel()
    z = np.asarray(z, dtype=float).ravel()
    keep = np.isfinite(t) & np.isfinite(z) & (t > 0)
    t, z = t[keep], z[keep]
    if len(t) < 2 or not r_total > 0:
        raise SolveError("a Foster fit needs at least two points of a positive impedance")
    span = (t.min() / 10, t.max() * 10)
    decades = np.log10(span[1] / span[0])
    cand = np.logspace(np.log10(span[0]), np.log10(span[1]),
                       int(np.ceil(decades * PER_DECADE)) + 1)
    weight = WEIGHT * np.sqrt(len(t))
    w = _scale(z, r_total)
    a = np.vstack([_design(t, cand) / w[:, None], np.full(len(cand), weight / r_total)])
    b = np.concatenate([z / w, [weight]])
    r_all, _ = nnls(a, b, maxiter=50 * len(cand))
    live = r_all > 1e-12 * r_total
    r_live, tau_live = r_all[live], cand[live]
    if terms is not None:
        counts = [max(1, min(int(terms), len(r_live)))]
    else:
        counts = list(range(1, max(1, min(max_terms, len(r_live))) + 1))
    best = None
    stalled = 0
    for n in counts:
        r0, tau0 = _merge(r_live, tau_live, n)
        r, tau = _refit(t, z, r_total, r0, tau0, span)
        r = r * (r_total / r.sum())
        err, rms = _errors(t, z, r, tau, r_total)
        if terms is None and err < TARGET:
            return _close_merged(Foster(r=r, tau=tau, error=err, rms=rms), t, z, r_total)
        # More terms that no longer improve the fit by a tenth are not supported by the
        # data: stop after two of them (the best so far is kept).
        stalled = stalled + 1 if best is not None and err > 0.9 * best.error else 0
        if best is None or err < best.error:
            best = Foster(r=r, tau=tau, error=err, rms=rms)
        if stalled >= 2:
            break
    return best if terms is not None else _close_merged(best, t, z, r_total)


def _poly_mul(p: list[Fraction], q: list[Fraction]) -> list[Fraction]:
    out = [Fraction(0)] * (len(p) + len(q) - 1)
    for i, a in enumerate(p):
        for j, b in enumerate(q):
            out[i + j] += a * b
    return out


def cauer(foster: Foster) -> Cauer:
    """The Cauer ladder with the driving-point impedance of a Foster network.

    Z(s) = Σ Rᵢ/(1 + sτᵢ) = N(s)/D(s) (coefficients ascending in s, exact fractions of
    the binary floats); the admittance D/N is expanded as a continued fraction
    sC₁ + 1/(R₁ + 1/(sC₂ + …)) by alternating long division from the highest power, all
    in fractions.Fraction, so the ladder is exact before the final rounding.
    """
    r = [Fraction(float(x)) for x in foster.r]
    tau = [Fraction(float(x)) for x in foster.tau]
    n = len(r)
    if n == 0 or any(x <= 0 for x in r) or any(x <= 0 for x in tau):
        raise SolveError("a Cauer ladder needs Foster terms with R > 0 and τ > 0")
    den = [Fraction(1)]
    for ti in tau:
        den = _poly_mul(den, [Fraction(1), ti])
    num = [Fraction(0)] * n
    for i in range(n):
        part = [Fraction(1)]
        for j, tj in enumerate(tau):
            if j != i:
                part = _poly_mul(part, [Fraction(1), tj])
        for k, v in enumerate(part):
            num[k] += r[i] * v
    cs, rs = [], []
    a, b = den, num           # admittance a/b, deg a = deg b + 1
    while True:
        c = a[-1] / b[-1]     # sC: leading coefficient of a over that of b
        rem = [a[k] - c * (b[k - 1] if k >= 1 else 0) for k in range(len(a))]
        rem = rem[:-1]        # the s^deg term cancels
        cs.append(c)
        while rem and rem[-1] == 0:
            rem.pop()
        # impedance b/rem, equal degrees: R = leading ratio
        rr = b[-1] / rem[-1]
        rest = [b[k] - rr * rem[k] for k in range(len(b))][:-1]
        rs.append(rr)
        while rest and rest[-1] == 0:
            rest.pop()
        if not rest:
            break
        a, b = rem, rest
    if len(rs) != n:
        raise SolveError("Cauer expansion ended early: the Foster terms are degenerate")
    return Cauer(r=np.array([float(x) for x in rs]), c=np.array([float(x) for x in cs]))


def modal_network(K, C, p, w, count: int = 12, inverse=None  # noqa: N803 (the math names)
                  ) -> Foster:
    """Foster terms of a finite-element model by its thermal modes.

    K φ = λ C φ with C the lumped (diagonal) capacity (J/K) and K the conductance (W/K),
    both on the free nodes; τᵢ = 1/λᵢ and Rᵢ = (wᵀφᵢ)(φᵢᵀp)/λᵢ with φᵢ C-orthonormal,
    for the `count` slowest modes (scipy.sparse.linalg.eigsh, shift-invert about 0; a
    dense scipy.linalg.eigh when the model is small). p is the power per node for 1 W,
    w the observation weights (for example a node's indicator, or the shape's mean).
    The returned resistances may be negative when w and p differ. ``inverse``: a callable
    b -> K⁻¹ b (an earlier factorization of K, e.g. the steady solve's) for the
    shift-invert, instead of factorizing K again.
    """
    import scipy.linalg
    import scipy.sparse as sp
    from scipy.sparse.linalg import eigsh

    cap = np.asarray(C, dtype=float).ravel()
    p = np.asarray(p, dtype=float).ravel()
    w = np.asarray(w, dtype=float).ravel()
    n = len(cap)
    count = int(min(count, n))
    if count < 1:
        raise SolveError("a modal network needs at least one free node")
    if count >= n - 1 or n <= 200:
        dense = K.toarray() if sp.issparse(K) else np.asarray(K, dtype=float)
        lam, phi = scipy.linalg.eigh(dense, np.diag(cap), subset_by_index=[0, count - 1])
    else:
        op = None
        if inverse is not None:
            from scipy.sparse.linalg import LinearOperator

            op = LinearOperator((n, n), matvec=lambda b: inverse(np.ravel(b)), dtype=float)
        lam, phi = eigsh(sp.csc_matrix(K), k=count, M=sp.diags(cap), sigma=0, which="LM",
                         OPinv=op, tol=EIG_TOL)
    phi = phi / np.sqrt((cap[:, None] * phi * phi).sum(axis=0))
    if not np.all(lam > 0):
        raise SolveError("the conductance matrix is not positive definite on the free nodes")
    r = (w @ phi) * (phi.T @ p) / lam
    order = np.argsort(1 / lam)
    return Foster(r=r[order], tau=(1 / lam)[order])
