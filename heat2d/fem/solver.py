"""Stage 5: :class:`~heat2d.assembly.System` -> :class:`Solution`, the nodal temperatures.

Fixed temperatures are eliminated (the reduced matrix stays symmetric positive definite);
the reduced system is solved by a sparse direct factorization (in nested-dissection order,
:mod:`.ordering`) or by conjugate gradients preconditioned with smoothed-aggregation
multigrid. A model whose conductivity depends on temperature, or that radiates, starts
from that linear solution and is iterated with Newton's method, reusing the fill-reducing
order (or the multigrid hierarchy) of the first solve.
"""

from __future__ import annotations

import contextlib
import copy
import time
from collections.abc import Callable
from dataclasses import dataclass, field
from typing import TYPE_CHECKING

import numpy as np

from ..errors import ModelError, SolveError
from ..model.ranges import TEMPERATURE_C
from .conditioning import conditioning, refusal
from .ordering import fill_order

if TYPE_CHECKING:
    import scipy.sparse as sp

    from .assembly import System

AUTO_DIRECT_LIMIT = 600_000
"""Without MKL PARDISO, ``auto`` factorizes with SuperLU (nested-dissection order) below
this many unknowns and uses multigrid CG (hierarchy reused for every right-hand side)
above. Measured on a 2-core machine (benchmarks/solver_threshold.py --model plate, solve
and one extra right-hand side for the °C/W matrix): SuperLU 2.16 + 0.07 s against
multigrid 3.40 + 2.82 s at 293 000 unknowns, 5.31 + 0.15 against 8.20 + 6.59 at 585 000,
12.6 + 0.2 against 11.9 + 9.2 at 978 000; there the factors alone hold 1.34 GB (1.4 kB
per node, the run's whole budget) where multigrid keeps the run at 1.3 kB per node.
With PARDISO (:func:`pardiso_available`) ``auto`` is direct at every size."""
PARDISO_ABOVE = 200_000
"""The direct solver uses PARDISO for systems of at least this many unknowns and SuperLU
(nested-dissection order) below: at 97 700 unknowns they tie (0.48-0.55 s against
0.54-0.56 s, an extra right-hand side 0.06 against 0.03 s), at 293 000 PARDISO takes
1.52 s against 2.30 s, at 978 000 5.8 s against 12.8 s (benchmarks/solver_threshold.py
--model plate, 2-core machine)."""
ITERATIVE_TOL = 1e-10
"""Relative residual that multigrid CG must reach before its answer is taken."""
ACCEPT_RESIDUAL = 1e-8
"""A linear solve whose relative residual is above this is rejected."""
NONLINEAR_TOL = 1e-6
"""Newton stops when no nodal temperature changes by more than this (K)."""
MAX_NONLINEAR_ITERATIONS = 40


def pardiso_available() -> bool:
    """Whether MKL PARDISO can be used (the optional ``pypardiso`` package, ``pip install
    heat2d[fast]``); without it the direct solver is SuperLU (scipy)."""
    global _PARDISO
    if _PARDISO is None:
        try:
            import pypardiso

            if not _TEMPLATE:                   # finds MKL's runtime library or raises
                _TEMPLATE.append(pypardiso.PyPardisoSolver())
            _PARDISO = True
        except (ImportError, OSError, AttributeError):
            _PARDISO = False
    return _PARDISO


_PARDISO: bool | None = None               # whether PARDISO is used; None: not yet asked


def use_pardiso(enabled: bool) -> bool:
    """Turn PARDISO off (or back on, where installed); returns whether it was in use."""
    global _PARDISO
    was, _PARDISO = pardiso_available(), None
    _PARDISO = bool(enabled) and pardiso_available()
    return was


def choose_method(unknowns: int) -> str:
    """The linear solver ``auto`` uses for a reduced system of this many unknowns: the
    direct one with PARDISO (faster than multigrid CG at every size measured), else
    SuperLU below :data:`AUTO_DIRECT_LIMIT` and multigrid CG from there on."""
    if pardiso_available() or unknowns < AUTO_DIRECT_LIMIT:
        return "direct"
    return "multigrid"


def _direct_backend(unknowns: int) -> str:
    return "pardiso" if unknowns >= PARDISO_ABOVE and pardiso_available() else "superlu"


_TEMPLATE: list = []
"""A constructed PyPardisoSolver: construction looks for MKL's library (a directory walk
and a subprocess, about 0.15 s), so later solvers are copies with their own handle."""


def _new_pardiso(pypardiso, mtype: int):
    if not _TEMPLATE:
        _TEMPLATE.append(pypardiso.PyPardisoSolver())
    solver = copy.copy(_TEMPLATE[0])
    # Per-solver state (see pypardiso.PyPardisoSolver.__init__): a fresh handle.
    solver.pt = np.zeros_like(_TEMPLATE[0].pt)
    solver.iparm = np.zeros_like(_TEMPLATE[0].iparm)
    solver.perm = np.zeros_like(_TEMPLATE[0].perm)
    solver.set_matrix_type(mtype)
    solver.set_phase(13)
    return solver


class _Pardiso:
    """One MKL PARDISO factorization; its memory (held by MKL) is released when the last
    reference goes, or by :meth:`release`."""

    def __init__(self, A: sp.csr_matrix, symmetric: bool | None = None) -> None:
        import pypardiso
        import scipy.sparse as sp

        if symmetric is None:       # Newton Jacobians may not be: A = Aᵀ to round-off?
            diff = abs(A - A.T)
            symmetric = bool(diff.nnz == 0 or diff.max() <= 1e-12 * abs(A).max())
        self.symmetric = symmetric
        # Real SPD (mtype 2) from the upper triangle, else real unsymmetric (11).
        self.A = sp.triu(A, format="csr") if self.symmetric else A.tocsr()
        self.A.sort_indices()
        self.solver = _new_pardiso(pypardiso, 2 if self.symmetric else 11)
        self.solver.size_limit_storage = 0      # it recognises A by a hash, not a copy
        self.solver.factorize(self.A)

    def __call__(self, b: np.ndarray) -> np.ndarray:
        return self.solver.solve(self.A, b)

    def release(self) -> None:
        if self.solver is not None:
            self.solver.free_memory(everything=True)
            self.solver = None

    def __del__(self) -> None:
        with contextlib.suppress(Exception):    # at interpreter shutdown: nothing to free
            self.release()


class Factor:
    """Solves with one matrix, and refactors later matrices of the same pattern reusing
    the fill-reducing ordering (direct) or the multigrid hierarchy (iterative).

    The direct method uses MKL PARDISO where ``pypardiso`` is installed (``backend``
    ``"pardiso"``), else SuperLU (``"superlu"``; ordered by nested dissection of the
    unknowns' ``points`` when given). :meth:`release` frees the factorization at once (a
    later call refactors). ``symmetric=True`` says A is symmetric (the reduced conduction
    matrix), sparing the check; later matrices (:meth:`update`) are checked."""

    def __init__(self, method: str, A: sp.csr_matrix, *, keep_order: bool = True,
                 symmetric: bool | None = None, points: np.ndarray | None = None) -> None:
        self.method = method
        self._symmetric_hint = symmetric
        self.keep_order = keep_order
        self.points = points
        self.order: np.ndarray | None = None
        self.ml = None
        self.lu = None
        self.pardiso: _Pardiso | None = None
        self.backend = "pyamg" if method != "direct" else _direct_backend(A.shape[0])
        self.iterations = 0
        self.update(A, first=True)

    def update(self, A: sp.csr_matrix, *, first: bool = False) -> None:
        import scipy.sparse.linalg as spla

        self.A = A
        if self.method == "direct" and self.backend == "pardiso":
            try:
                # A new handle: a shallow copy of this factor keeps the earlier one.
                self.pardiso = _Pardiso(A, self._symmetric_hint if first else None)
                return
            except Exception:       # noqa: BLE001 - e.g. a zero pivot: SuperLU pivots
                self.pardiso = None
                self.backend = "superlu"
                first = True
        if self.method == "direct":
            self.backend = "superlu"
            if self.order is None and self.points is not None:
                self.order = fill_order(self.points, A)      # None below its size
            if self.order is None and not self.keep_order:
                # A single matrix: SuperLU's default column ordering is as fast or faster.
                self.lu = spla.splu(A.tocsc())
                self.permuted = False
            elif self.order is None:
                # Matrices to come (Newton): a symmetric ordering that later ones reuse.
                lu = spla.splu(A.tocsc(), permc_spec="MMD_AT_PLUS_A",
                               options={"SymmetricMode": True})
                self.order = np.argsort(lu.perm_c)      # kept for later matrices
                self.lu = lu
                self.permuted = False
            else:
                q = self.order
                self.lu = None              # free the old factors before the new ones
                self.lu = spla.splu(A[q][:, q].tocsc(), permc_spec="NATURAL",
                                    options={"SymmetricMode": True})
                self.permuted = True
        elif first:
            import pyamg

            # A low strength threshold keeps copper and laminate apart in the aggregates
            # (1000:1 contrast in thin layers): 20 CG iterations where the default needs 100.
            self.ml = pyamg.smoothed_aggregation_solver(
                A, symmetry="symmetric", strength=("symmetric", {"theta": 0.1}),
                max_coarse=500)
            self.symmetric = True
        else:
            self.symmetric = False

    def release(self) -> None:
        """Free the factorization (or hierarchy) now; a later call factorizes again."""
        if self.pardiso is not None:
            self.pardiso.release()
        self.pardiso = self.lu = self.ml = None

    def __call__(self, b: np.ndarray, x0: np.ndarray | None = None) -> np.ndarray:
        """Solve A x = b; ``x0`` is a starting guess for the iterative method (a direct
        solve ignores it)."""
        if self.method == "direct":
            self.iterations = 1
            if self.pardiso is not None and self.pardiso.solver is not None:
                return self.pardiso(b)
            if self.lu is None:
                self.update(self.A, first=True)
                return self(b)
            if not self.permuted:
                return self.lu.solve(b)
            x = np.empty_like(b)
            x[self.order] = self.lu.solve(b[self.order])
            return x
        if self.ml is None:
            self.update(self.A, first=True)
        residuals: list[float] = []
        if self.symmetric:
            x = self.ml.solve(b, x0=x0, tol=ITERATIVE_TOL, accel="cg", maxiter=200,
                              residuals=residuals)
            self.iterations = max(len(residuals) - 1, 0)
            if _relative(self.A, x, b) > ACCEPT_RESIDUAL:
                # Slow, not stalled, is common on large meshes: go on from x first (a
                # factorization there costs minutes and gigabytes without PARDISO).
                more: list[float] = []
                x = self.ml.solve(b, x0=x, tol=ITERATIVE_TOL, accel="cg", maxiter=600,
                                  residuals=more)
                self.iterations += max(len(more) - 1, 0)
            if _relative(self.A, x, b) > ACCEPT_RESIDUAL:
                # Stalled: factorize once and answer this and later right-hand sides directly.
                self.method = "direct"
                self.backend = _direct_backend(self.A.shape[0])
                self.ml = None
                self.update(self.A, first=True)
                return self(b)
            return x
        import scipy.sparse.linalg as spla

        count = [0]

        def tick(_):
            count[0] += 1

        x, _ = spla.gmres(self.A, b, x0=x0, M=self.ml.aspreconditioner(), rtol=ITERATIVE_TOL,
                          restart=50, maxiter=20, callback=tick, callback_type="pr_norm")
        self.iterations = count[0]
        return x


@dataclass(frozen=True, repr=False, eq=False)
class Solution:
    """Nodal temperatures (°C) and how they were found.

    ``history`` lists the nonlinear iterations (iteration, largest temperature change in K,
    relative residual); ``factor`` solves with the last matrix of the reduced system (for
    unit-power solutions).
    """

    system: System
    temperature: np.ndarray
    method: str
    iterations: int
    residual: float
    seconds: float
    notes: tuple[str, ...] = ()
    history: tuple[tuple[int, float, float], ...] = ()
    factor: Callable[[np.ndarray], np.ndarray] | None = field(default=None, compare=False)
    free: np.ndarray | None = field(default=None, compare=False)

    @property
    def mesh(self):
        return self.system.mesh

    @property
    def model(self):
        return self.system.model

    def __repr__(self) -> str:
        return (f"Solution({len(self.temperature)} nodes, T {self.temperature.min():.6g}.."
                f"{self.temperature.max():.6g} °C, {self.method}, {self.iterations} iterations, "
                f"residual {self.residual:.2e})")


METHODS = ("auto", "direct", "multigrid")
"""Linear solvers: ``auto`` picks ``direct`` or ``multigrid`` by size."""


def solve(system: System, *, method: str = "auto", tol: float = NONLINEAR_TOL,
          max_iterations: int = MAX_NONLINEAR_ITERATIONS,
          factor: Callable[[np.ndarray], np.ndarray] | None = None,
          initial: np.ndarray | None = None, newton_steps: int | None = None) -> Solution:
    """Solve K T = F with the fixed temperatures eliminated (Newton for nonlinear models).

    Parameters
    ----------
    system
        From :func:`~heat2d.assembly.assemble`.
    method
        ``auto``, ``direct`` or ``multigrid``. ``auto`` factorizes small systems and uses
        multigrid CG on large ones, falling back to the direct solver if the iterative
        one misses its tolerance.
    tol
        Nonlinear models: stop when the largest temperature change is below this (K).
    max_iterations
        Nonlinear models: give up after this many Newton iterations.
    factor
        The factor of an earlier solve whose reduced matrix equals this one (a variant
        with other sources or boundary temperatures); it is reused instead of refactoring.
    initial, newton_steps
        Nonlinear models: start Newton from ``initial`` (nodal °C) instead of the linear
        solution, and take exactly ``newton_steps`` steps (a check solve from a good
        guess: each step squares the error).

    Raises
    ------
    SolveError
        Unknown method, no solver reached an acceptable residual, or Newton did not converge.
    """
    if method not in METHODS:
        raise SolveError(f"unknown solver method {method!r} (choose from: "
                         f"{', '.join(sorted(METHODS))})")
    start = time.perf_counter()
    n = system.K.shape[0]
    T = np.empty(n)
    T[system.fixed] = system.fixed_value
    free = np.ones(n, dtype=bool)
    free[system.fixed] = False
    if not free.any():
        return Solution(system, T, "none", 0, 0.0, time.perf_counter() - start, free=free)
    K = system.K.tocsr()
    Kf = K[free]
    Kff = Kf[:, free].tocsr()
    rhs = system.F[free] - Kf[:, system.fixed] @ system.fixed_value    # F_f − K_fd T_d
    Kfd = Kf[:, ~free]
    del Kf                          # a whole matrix's worth: not held while factorizing

    chosen = method if method != "auto" else choose_method(int(free.sum()))
    points = system.mesh.points[free]
    notes: list[str] = []
    if initial is not None and system.nonlinear:
        T[free] = initial[free]
        _, J = system.residual_and_jacobian(T)
        # One step (a check solve from a good guess) needs no ordering kept for later.
        factor = Factor(chosen, J[free][:, free].tocsr(), keep_order=newton_steps != 1,
                        points=points)
        T, residual, history, iterations = _newton(
            system, T, free, factor, tol, newton_steps or max_iterations,
            fixed_steps=newton_steps is not None, factored=True)
        return Solution(system, T, chosen, iterations, residual, time.perf_counter() - start,
                        (), tuple(history), factor, free)
    if factor is not None:
        chosen = factor.method
        x = factor(rhs)
        residual = _relative(Kff, x, rhs)
    else:
        factor, x, residual = _attempt(chosen, Kff, rhs, system.nonlinear, points)
    if residual > ACCEPT_RESIDUAL and chosen != "direct":
        notes.append(f"{chosen} reached residual {residual:.1e} only; solved directly instead")
        chosen = "direct"
        factor, x, residual = _attempt(chosen, Kff, rhs, system.nonlinear, points)
    kappa, note = conditioning(system, Kfd, free, Kff.diagonal())
    if note:
        notes.append(note)
    if not np.isfinite(residual) or residual > ACCEPT_RESIDUAL:
        if note:
            raise refusal(system, note, f"relative residual {residual:.1e}")
        raise SolveError(f"linear solve failed: relative residual {residual:.2e} with {chosen}",
                         file=system.model.source)
    T[free] = x
    iterations = factor.iterations
    history: list[tuple[int, float, float]] = []
    if system.nonlinear:
        T, residual, history, iterations = _newton(system, T, free, factor, tol, max_iterations)
    return Solution(system, T, chosen, iterations, residual, time.perf_counter() - start,
                    tuple(notes), tuple(history), factor, free)


def _attempt(name: str, A: sp.csr_matrix, b: np.ndarray, keep_order: bool,
             points: np.ndarray | None = None) -> tuple[Factor, np.ndarray, float]:
    try:
        # The reduced conduction matrix is symmetric by construction.
        factor = Factor(name, A, keep_order=keep_order, symmetric=True, points=points)
        x = factor(b)
    except (RuntimeError, ValueError, np.linalg.LinAlgError) as exc:
        if name == "direct":
            raise SolveError(f"direct solve failed: {exc}") from exc
        return None, np.zeros_like(b), np.inf
    return factor, x, _relative(A, x, b)


def _relative(A: sp.csr_matrix, x: np.ndarray, b: np.ndarray) -> float:
    scale = np.linalg.norm(b)
    r = np.linalg.norm(b - A @ x)
    return float(r / scale) if scale > 0 else float(r)


def _newton(system: System, T: np.ndarray, free: np.ndarray, factor: Factor, tol: float,
            max_iterations: int, *, fixed_steps: bool = False, factored: bool = False
            ) -> tuple[np.ndarray, float, list, int]:
    """Newton on R(T) = K(T) T − F(T) = 0 at the free nodes, with step halving.
    ``factored``: ``factor`` already holds the Jacobian at ``T``."""
    scale = max(np.abs(system.F).sum(), np.abs(system.K @ T).sum(), 1e-300)
    history = []
    total = factor.iterations
    R, J = system.residual_and_jacobian(T)
    norm = np.linalg.norm(R[free]) / scale
    for it in range(1, max_iterations + 1):
        if not (factored and it == 1):
            factor.update(J[free][:, free].tocsr())
        step = -factor(R[free])
        total += factor.iterations
        alpha = 1.0
        while True:
            trial = T.copy()
            trial[free] += alpha * step
            R_new, J_new = system.residual_and_jacobian(trial)
            new = np.linalg.norm(R_new[free]) / scale
            if new <= norm or alpha < 1 / 32 or not np.isfinite(norm):
                break
            alpha /= 2
        change = float(np.abs(alpha * step).max())
        T, R, J, norm = trial, R_new, J_new, new
        history.append((it, change, float(norm)))
        if not np.all(np.isfinite(T)):
            break
        if change < tol or (fixed_steps and it == max_iterations):
            return T, float(norm), history, total
    last = history[-1] if history else (0, np.nan, np.nan)
    hottest = float(np.nanmax(np.abs(T))) if np.isfinite(T).any() else np.inf
    if hottest > TEMPERATURE_C:
        # Past every temperature a model may give (tables, limits): bad input, usually a
        # power slipped by decades; the shape with the most power is the first suspect.
        shapes = [sh for sh in system.model.shapes if sh.power]
        top = max(shapes, key=lambda sh: sh.power, default=None)
        raise ModelError(f"the nonlinear solve diverged: temperatures reach {hottest:.3g} °C, "
                         f"past {TEMPERATURE_C:g} °C; check the powers, power densities and "
                         "units", file=system.model.source,
                         entry=f'shape "{top.name}"' if top else None,
                         line=top.line if top else None)
    raise SolveError(f"nonlinear solve did not converge in {max_iterations} iterations: last "
                     f"temperature change {last[1]:.3g} K (tolerance {tol:g} K)",
                     file=system.model.source)
