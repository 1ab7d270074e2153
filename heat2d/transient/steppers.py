"""The stage solves of the march: H(T) + s R(T, t) = r at the free nodes.

Both TR-BDF2 stages and a backward-Euler step are such a solve (s = γh/2, resp. s = h),
with H the stored heat per node and R = K T − F(t) the net heat leaving each node (the
steady residual). :class:`LinearStepper` serves linear models with constant K: H = C T,
one matrix C + s K_ff per rung of the step ladder (:class:`~.linear.Ladder`).
:class:`NewtonStepper` serves k(T) tables, radiation, ρc tables and h that follows a
table: modified Newton, refactoring C + s J only when s changes rung or convergence is
slow.
"""

from __future__ import annotations

import numpy as np
import scipy.sparse as sp

from ..errors import SolveError
from ..fem.capacity import capacity, enthalpy, varies
from ..fem.conditioning import roundoff
from ..fem.solver import Factor
from .linear import Ladder

NEWTON_TOL = 1e-6
"""K: a stage's Newton iteration stops when no temperature changes by more."""
MAX_NEWTON = 25
SLOW = 0.25
"""Refactor the Newton matrix when the change shrinks by less than this per iteration."""


class _Base:
    def __init__(self, system, drive, T0: np.ndarray, rho_c) -> None:
        self.system, self.drive, self.T0, self.rho_c = system, drive, T0, rho_c
        n = system.K.shape[0]
        self.free = np.ones(n, dtype=bool)
        self.free[system.fixed] = False
        self.fixed = system.fixed
        self.C0 = capacity(system, None, rho_c)[0]

    def with_fixed(self, T: np.ndarray, t: float) -> np.ndarray:
        T = T.copy()
        T[self.fixed] = self.drive.fixed_values(t)
        return T

    def capacity(self, T: np.ndarray) -> np.ndarray:
        return self.C0


class LinearStepper(_Base):
    """C dT/dt + K T = F(t) with constant C and K."""

    def __init__(self, system, drive, T0, rho_c, s0: float, method: str) -> None:
        super().__init__(system, drive, T0, rho_c)
        K = system.K.tocsr()
        self.K = K
        Kf = K[self.free]
        self.Kfd = Kf[:, self.fixed].tocsr()
        self.ladder = Ladder(Kf[:, self.free].tocsr(), self.C0[self.free], s0, method,
                             points=system.mesh.points[self.free])

    def H(self, T: np.ndarray) -> np.ndarray:
        return self.C0 * (T - self.T0)

    def residual(self, T: np.ndarray, t: float, left: float | None = None) -> np.ndarray:
        return self.K @ T - self.drive.F(t, left=left)

    def stage(self, s: float, r: np.ndarray, t: float, guess: np.ndarray,
              left: float | None = None, extra: np.ndarray | None = None):
        """The stage state; with ``extra`` (free nodes), also (C + s K)⁻¹ extra, loosely,
        in the same back-substitution: (T, x)."""
        T = self.with_fixed(guess, t)
        F = self.drive.F(t, left=left)
        rhs = r + self.C0[self.free] * self.T0[self.free] \
            - s * (self.Kfd @ T[self.fixed] - F[self.free])
        if extra is None:
            T[self.free] = self.ladder.solve(s, rhs, guess[self.free])
            return T
        T[self.free], x = self.ladder.solve_pair(s, rhs, guess[self.free], extra)
        return T, x

    def filter(self, s: float, v: np.ndarray) -> np.ndarray:
        return self.ladder.approx(s, v)

    def counts(self) -> dict:
        L = self.ladder
        return {"factorizations": L.factorizations, "back_solves": L.back_solves,
                "cg_iterations": L.cg_iterations, "solver": L.method,
                "jacobi_rungs": L.jacobi_rungs, "landing_factorizations": L.one_off}


class NewtonStepper(_Base):
    """C(T) dT/dt + R(T, t) = 0 in enthalpy form, modified Newton per stage."""

    def __init__(self, system, drive, T0, rho_c, method: str) -> None:
        super().__init__(system, drive, T0, rho_c)
        self.method = method
        self.var_c = varies(system, rho_c)
        self.factor: Factor | None = None
        self.factor_s = np.nan
        self.factorizations = 0
        self.iterations = 0
        self.base_F = system.F
        self.H0 = enthalpy(system, T0, rho_c) if self.var_c else None
        # In an ill-conditioned system a stage's Newton stops at its round-off (else it
        # stalls above NEWTON_TOL, and each step is rejected down to the floor).
        self.roundoff = roundoff(system, self.free)[0]

    def capacity(self, T: np.ndarray) -> np.ndarray:
        return capacity(self.system, T, self.rho_c)[0] if self.var_c else self.C0

    def H(self, T: np.ndarray) -> np.ndarray:
        if self.var_c:
            return enthalpy(self.system, T, self.rho_c) - self.H0
        return self.C0 * (T - self.T0)

    def residual(self, T: np.ndarray, t: float, left: float | None = None,
                 jacobian: bool = False):
        s = self.system
        if s.nonlinear:
            R, J = s.residual_and_jacobian(T)
        else:
            R, J = s.K @ T - s.F, s.K
        R = R - (self.drive.F(t, left=left) - self.base_F)
        dK = self.drive.dK(t)
        if dK is not None:
            R = R + dK @ T
            J = J + dK
        return (R, J) if jacobian else R

    def _refactor(self, s: float, T: np.ndarray, J) -> None:
        free = self.free
        A = (sp.diags(self.capacity(T)[free]) + s * J[free][:, free]).tocsr()
        if self.factor is None or self.factor.method != "direct":
            self.factor = Factor(self.method, A, keep_order=True,
                                 points=self.system.mesh.points[free])
        else:
            self.factor.update(A)
        self.factor_s = s
        self.factorizations += 1

    def stage(self, s: float, r: np.ndarray, t: float, guess: np.ndarray,
              left: float | None = None) -> np.ndarray:
        free = self.free
        T = self.with_fixed(guess, t)
        previous = np.inf
        stale = not (0.5 < s / self.factor_s < 2.0) if np.isfinite(self.factor_s) else True
        for _ in range(MAX_NEWTON):
            R, J = self.residual(T, t, left, jacobian=True)
            G = self.H(T)[free] + s * R[free] - r
            if stale or self.factor is None:
                self._refactor(s, T, J)
                stale = False
            delta = -self.solve(G, s)
            self.iterations += 1
            T[free] += delta
            change = float(np.abs(delta).max()) if len(delta) else 0.0
            if not np.isfinite(change):
                break
            if change < max(NEWTON_TOL, self.roundoff * float(np.abs(T).max())):
                return T
            if change > SLOW * previous:
                stale = True
            previous = change
        raise SolveError(f"Newton did not converge in a time step at t = {t:.6g} s (last "
                         f"change {previous:.3g} K)", file=self.system.model.source)

    def solve(self, G: np.ndarray, s: float) -> np.ndarray:
        """The Newton correction's solve at stage weight s with the kept factor (free
        nodes)."""
        return self.factor(G)

    def filter(self, s: float, v: np.ndarray) -> np.ndarray:
        return self.factor(v)

    def counts(self) -> dict:
        return {"factorizations": self.factorizations, "newton_iterations": self.iterations,
                "solver": self.method}
