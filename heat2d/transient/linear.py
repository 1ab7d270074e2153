"""Solves with C + s K on a ladder of s: one factorization per rung, kept while in use.

The stage matrices of TR-BDF2 (s = γh/2) and of backward Euler (s = h) are C + s K_ff.
Rung k holds s_k = s₀·4^k (:data:`RATIO`); a step whose s sits on a rung solves directly
with that rung's factor, a step between rungs (a step shortened to land on a schedule
break or the end) solves by conjugate gradients preconditioned with the factor of a
neighbouring rung: the preconditioned operator has its eigenvalues within a factor 4, so
CG needs about twenty back-substitutions for 1e-10. Where C dominates (small s),
Jacobi-preconditioned CG replaces the factorization altogether. A :class:`FactorCache`
keeps the factorizations for other marches of the same K and C (a nonlinear model's
check march, the impedance marches).
"""

from __future__ import annotations

import copy
import math
from collections import OrderedDict

import numpy as np
import scipy.sparse as sp

from ..errors import SolveError
from ..fem.solver import Factor

RATIO = 4
"""Ratio of neighbouring rungs' s: one factorization per factor 4 of the step (a factor 2
would double the factorizations for a step size 1.4× closer to the error control's)."""
CG_TOL = 1e-7
"""Relative residual of the Jacobi-preconditioned conjugate-gradient solves."""
FACTOR_CG_TOL = 1e-10
"""Relative residual of the solves between rungs (preconditioned with a rung's factor:
each iteration divides the residual by about 3): a step landing on a break keeps the
maximum principle to round-off (no node below its start by more than 1e-9 K)."""
JACOBI_ITERATIONS = 60
"""Rungs are first solved by Jacobi-preconditioned CG (cheap where C dominates K: small
steps); the first rung whose solve needs more iterations than this, and every rung
above it, is factorized instead."""
FILTER_TOL = 1e-3
"""Relative residual of the solve that filters an error estimate (a 0.1 % estimate)."""
DIRECT_LIMIT = 2_500_000
"""Unknowns up to which ``auto`` factorizes a march's stage matrices (SuperLU in
nested-dissection order) where one steady solve would use multigrid
(:data:`heat2d.fem.solver.AUTO_DIRECT_LIMIT`): a march solves each rung's matrix some
twenty times, and a back-substitution costs a small part of a multigrid solve (0.27 s
against about 7 s at 978 000 unknowns, benchmarks/README.md)."""
ONE_OFF = 250_000
"""Unknowns up to which a step between rungs (one landing on a break or the end) gets a
factorization of its own instead of conjugate gradients preconditioned with a rung's:
those take about twenty back-substitutions per stage at 1e-10 and two loose ones for the
error transport, about 45 in all, where a SuperLU factorization costs 27-35 of them at
98 000 unknowns (measured on the board of benchmarks/transient_vs_steady.py) and more as
the mesh grows (the factorization's work grows faster than the factor's size). A size,
not a timing, so that a run gives the same figures every time."""
KEEP = 4
"""Factorizations a march keeps on its own (the rungs most recently used)."""
BUDGET = 1.5e9
"""Bytes of factorizations a :class:`FactorCache` keeps."""
PROTECT = 2
"""The most recently used entries a :class:`FactorCache` never drops."""


class FactorCache:
    """Factorizations of C + s K kept across the marches of one run.

    The marches of a linear run (its history and the impedance march of each powered
    shape) solve with the same K and C; with rungs anchored at
    powers of four (s = 4^k s) their matrices C + s K coincide, so a rung factorized by one
    march serves the others. Entries are keyed by a fingerprint of (K, C, method) and the
    rung's s; at most ``budget`` bytes (estimated from the factors' non-zeros) or ``keep``
    entries are kept. Each march sweeps the rungs from small steps to large ones, so the
    least recently used entry is the one the next march needs first: past the budget the
    entry dropped is the most recently used one apart from the last :data:`PROTECT` (the
    rungs the march is on), so that a fixed set of the first rungs stays for the next.
    """

    def __init__(self, budget: float = BUDGET, keep: int | None = None) -> None:
        self.budget = budget
        self.keep = keep
        self.entries: OrderedDict[tuple, tuple[object, float]] = OrderedDict()
        self.bases: dict[tuple, Factor] = {}
        self.jacobi_from: dict[tuple, float] = {}
        self.hits = 0
        self._steady: tuple[object, object] | None = None

    def steady_factor(self, system):
        """The factor of the steady matrix K_ff of ``system`` kept by :meth:`keep_steady`
        (for ``heat2d.fem.solver.solve(factor=...)``), or None."""
        if self._steady is not None and self._steady[0] is system.K:
            return self._steady[1]
        return None

    def steady_order(self, n: int):
        """An order-only copy of the kept steady factor when it is a SuperLU factor of n
        unknowns in a fill-reducing order of its own (C + s K has K's pattern: the same
        order serves the rungs, sparing a second nested dissection), else None."""
        f = self._steady[1] if self._steady is not None else None
        if (f is None or getattr(f, "backend", None) != "superlu"
                or getattr(f, "order", None) is None or len(f.order) != n):
            return None
        base = copy.copy(f)
        base.lu = base.pardiso = None
        return base

    def keep_steady(self, system, factor) -> None:
        """Keep the factor of a linear steady solve of ``system`` (its own K)."""
        if factor is not None:
            self._steady = (system.K, factor)

    def get(self, key: tuple):
        if key in self.entries:
            self.entries.move_to_end(key)
            self.hits += 1
            return self.entries[key][0]
        return None

    def __contains__(self, key: tuple) -> bool:
        return key in self.entries

    def put(self, key: tuple, factor, size: float) -> None:
        self.entries[key] = (factor, size)
        while len(self.entries) > 1 and (
                sum(v[1] for v in self.entries.values()) > self.budget
                or (self.keep is not None and len(self.entries) > self.keep)):
            keys = list(self.entries)                   # least recently used first
            rest = keys[:-PROTECT] or keys[:-1]
            del self.entries[rest[-1]]


def _size(factor, A: sp.csr_matrix) -> float:
    """Bytes a factorization holds, estimated (SuperLU: its non-zeros)."""
    lu = getattr(factor, "lu", None)
    nnz = getattr(lu, "nnz", None) if lu is not None else None
    return 12.0 * (nnz if nnz is not None else 10 * A.nnz)


class Ladder:
    """Solves (C + s K) x = b for the s of a rung or between rungs."""

    def __init__(self, K: sp.csr_matrix, C: np.ndarray, s0: float, method: str,
                 cache: FactorCache | None = None, points: np.ndarray | None = None) -> None:
        self.K = K.tocsr()
        self.points = points            # of the unknowns, for the factorizations' order
        self.C = C
        self.s0 = s0
        self.method = method
        self.share(cache or FactorCache(keep=KEEP))
        self.jacobi: dict[int, tuple] = {}
        self._last: tuple[float, sp.csr_matrix] | None = None
        self._off: tuple[float, object] | None = None
        self.factorizations = 0
        self.one_off = 0
        self.back_solves = 0
        self.cg_iterations = 0
        self.jacobi_rungs = 0

    def share(self, cache: FactorCache) -> None:
        """Take and keep factorizations in ``cache`` (shared with other marches)."""
        self.cache = cache
        K, C = self.K, self.C
        self.print = (K.shape[0], K.nnz, float(np.abs(K.data).sum()), float(C.sum()),
                      float(C @ np.arange(len(C), dtype=float)), self.method)

    @property
    def jacobi_below(self) -> int | float:
        """Rungs from here up are factorized."""
        s = self.cache.jacobi_from.get(self.print, math.inf)
        return self.rung(s) if np.isfinite(s) else math.inf

    def _has(self, k: int) -> bool:
        return k in self.jacobi or (self.print, self.s0 * RATIO**k) in self.cache

    def rung(self, s: float) -> int:
        return math.floor(math.log(s / self.s0, RATIO) + 1e-9)

    def matrix(self, s: float) -> sp.csr_matrix:
        """C + s K (the last one kept: both stages of a step share it)."""
        if self._last is None or self._last[0] != s:
            self._last = (s, (self.K * s + sp.diags(self.C)).tocsr())
        return self._last[1]

    def _factor(self, k: int):
        s = self.s0 * RATIO**k
        if k < self.jacobi_below:
            if k not in self.jacobi:
                self.jacobi[k] = ("jacobi", 1.0 / (self.C + s * self.K.diagonal()))
                self.jacobi_rungs += 1
            return self.jacobi[k]
        key = (self.print, s)
        f = self.cache.get(key)
        if f is not None:
            return f
        f = self._build(s)
        self.cache.put(key, f, _size(f, self.matrix(s)))
        return f

    def _build(self, s: float, one_off: bool = False):
        A = self.matrix(s)
        if one_off:
            self.one_off += 1
        else:
            self.factorizations += 1
        base = self.cache.bases.get(self.print)
        if base is None and self.method == "direct":
            base = self.cache.steady_order(A.shape[0])
            if base is not None:
                self.cache.bases[self.print] = base
        if base is None or self.method != "direct":
            f = Factor(self.method, A, keep_order=True, points=self.points)
            # The order kept for later rungs, not the factors (a rung dropped from the
            # cache frees its memory).
            base = copy.copy(f)
            base.lu = base.pardiso = None
            self.cache.bases[self.print] = base
        else:
            f = copy.copy(base)               # the base's fill-reducing ordering reused
            f.update(A)
        return f

    def _back(self, f, b: np.ndarray) -> np.ndarray:
        self.back_solves += 1
        return f(b)

    def _near(self, s: float) -> tuple[object, bool]:
        """The factor for s: its own rung's, or a neighbour's (cached first, else the
        rung above); and whether s sits on that rung."""
        k = self.rung(s)
        if abs(s / (self.s0 * RATIO**k) - 1) < 1e-12:
            return self._factor(k), True
        if self._off is not None and self._off[0] == s:
            return self._off[1], True
        use = k + 1 if (self._has(k + 1) or not self._has(k)) else k
        if use >= self.jacobi_below and len(self.C) <= ONE_OFF and self.method == "direct":
            self._off = None                    # the last one-off freed first
            self._off = (s, self._build(s, one_off=True))
            return self._off[1], True
        return self._factor(use), False

    def solve(self, s: float, b: np.ndarray, x0: np.ndarray | None = None) -> np.ndarray:
        f, on_rung = self._near(s)
        if on_rung and not isinstance(f, tuple):
            return self._back(f, b)
        A = self.matrix(s)
        if isinstance(f, tuple):
            diag = 1.0 / (self.C + s * self.K.diagonal())
            x = self._cg(A, b, lambda r: diag * r, x0, JACOBI_ITERATIONS)
            if x is not None:
                return x
            # Too slow: factorize this rung and every one above it from now on.
            k = self.rung(s)
            known = self.cache.jacobi_from.get(self.print, math.inf)
            self.cache.jacobi_from[self.print] = min(known, self.s0 * RATIO**k)
            for key in [key for key in self.jacobi if key >= k]:
                del self.jacobi[key]
            return self.solve(s, b, x0)
        return self._cg(A, b, self._precond(f), x0, tol=FACTOR_CG_TOL)

    def approx(self, s: float, v: np.ndarray) -> np.ndarray:
        """(C + s_k K)⁻¹ v with the rung at or below s (a filter for error estimates)."""
        f, _ = self._near(s)
        if isinstance(f, tuple):
            # Not the diagonal alone: where s K_ii >> C_i it would shrink smooth modes'
            # errors too (a conducting body cooling as one); a loose CG solve instead.
            diag = 1.0 / (self.C + s * self.K.diagonal())
            x = self._cg(self.matrix(s), v, lambda r: diag * r, None, 4 * JACOBI_ITERATIONS,
                         tol=FILTER_TOL)
            return diag * v if x is None else x
        return self._back(f, v)

    def solve_pair(self, s: float, b: np.ndarray, x0: np.ndarray | None, extra: np.ndarray
                   ) -> tuple[np.ndarray, np.ndarray]:
        """:meth:`solve` for b and :meth:`loose` for ``extra``: on a factorized rung one
        back-substitution with both as columns (a second column costs about 0.4 of the
        first)."""
        f, on_rung = self._near(s)
        # (MKL PARDISO solves two columns slower than one after the other: 53 against
        # 2 × 15 ms at 100 000 unknowns)
        if (on_rung and not isinstance(f, tuple) and f.method == "direct"
                and getattr(f, "pardiso", None) is None):       # (multigrid: one column)
            x = self._back(f, np.column_stack([b, extra]))
            return x[:, 0].copy(), x[:, 1].copy()
        return self.solve(s, b, x0), self.loose(s, extra)

    def loose(self, s: float, b: np.ndarray) -> np.ndarray:
        """(C + s K)⁻¹ b to :data:`FILTER_TOL` (off a rung) or by the rung's factor (on
        one): the transport of an error estimate, which needs no more."""
        f, on_rung = self._near(s)
        if on_rung and not isinstance(f, tuple):
            self.back_solves += 1
            return f(b)
        diag = 1.0 / (self.C + s * self.K.diagonal())
        jacobi = isinstance(f, tuple)
        x = self._cg(self.matrix(s), b, (lambda r: diag * r) if jacobi else self._precond(f),
                     None, 4 * JACOBI_ITERATIONS if jacobi else None, tol=FILTER_TOL)
        return diag * b if x is None else x

    def _precond(self, f):
        def apply(r):
            self.back_solves += 1
            return f(r)
        return apply

    def _cg(self, A, b, M, x0, limit: int | None = None, tol: float = CG_TOL
            ) -> np.ndarray | None:
        """Preconditioned conjugate gradients (A symmetric positive definite); None when
        ``limit`` iterations do not reach :data:`CG_TOL`. Inner products without BLAS
        (a BLAS dot of a long vector can stall behind thread contention)."""
        x = np.zeros_like(b) if x0 is None else x0.copy()
        r = b - A @ x
        # Relative to the first residual: the guess (the last step's state) carries most
        # of b, and the heat balance of a small step lives in the correction.
        norm_b = float(np.sqrt(np.multiply(r, r).sum()))
        if norm_b == 0:
            return x
        z = M(r)
        p = z.copy()
        rz = float(np.multiply(r, z).sum())
        goal = (tol * norm_b) ** 2
        for it in range(500):
            if float(np.multiply(r, r).sum()) <= goal:
                return x
            if limit is not None and it >= limit:
                return None
            q = A @ p
            alpha = rz / float(np.multiply(p, q).sum())
            x += alpha * p
            r -= alpha * q
            z = M(r)
            rz_new = float(np.multiply(r, z).sum())
            p = z + (rz_new / rz) * p
            rz = rz_new
            self.cg_iterations += 1
        raise SolveError(f"conjugate gradients did not reach {CG_TOL:g} in 500 iterations "
                         f"(relative residual {np.sqrt(np.multiply(r, r).sum()) / norm_b:.1e})")
