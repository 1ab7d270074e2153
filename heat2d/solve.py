"""Stage 5: :class:`~heat2d.assembly.System` -> :class:`Solution`, the nodal temperatures.

Fixed temperatures are eliminated (the reduced matrix stays symmetric positive
definite); the reduced system is solved by a sparse direct factorization or by
conjugate gradients preconditioned with smoothed-aggregation multigrid.
"""

from __future__ import annotations

import time
from collections.abc import Callable
from dataclasses import dataclass
from typing import TYPE_CHECKING

import numpy as np

from .errors import SolveError

if TYPE_CHECKING:
    import scipy.sparse as sp

    from .assembly import System

AUTO_DIRECT_LIMIT = 60_000
"""``auto`` factorizes below this many unknowns and uses multigrid CG above
(measured on a 2-core machine: see benchmarks/solver_threshold.py)."""
ITERATIVE_TOL = 1e-10
"""Relative residual that multigrid CG must reach before its answer is taken."""
ACCEPT_RESIDUAL = 1e-8
"""A solve whose relative residual is above this is rejected."""


@dataclass(frozen=True, repr=False)
class Solution:
    """Nodal temperatures (°C) and how they were found."""

    system: System
    temperature: np.ndarray
    method: str
    iterations: int
    residual: float
    seconds: float
    notes: tuple[str, ...] = ()

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


def _direct(A: sp.csr_matrix, b: np.ndarray) -> tuple[np.ndarray, int]:
    import scipy.sparse.linalg as spla

    lu = spla.splu(A.tocsc(), permc_spec="MMD_AT_PLUS_A")
    return lu.solve(b), 1


def _multigrid(A: sp.csr_matrix, b: np.ndarray) -> tuple[np.ndarray, int]:
    import pyamg

    ml = pyamg.smoothed_aggregation_solver(A, symmetry="symmetric", max_coarse=500)
    residuals: list[float] = []
    x = ml.solve(b, tol=ITERATIVE_TOL, accel="cg", maxiter=500, residuals=residuals)
    return x, max(len(residuals) - 1, 0)


SOLVERS: dict[str, Callable[[sp.csr_matrix, np.ndarray], tuple[np.ndarray, int]]] = {  # noqa: F821
    "direct": _direct,
    "multigrid": _multigrid,
}
"""Linear solvers by name; ``auto`` picks one by size."""
METHODS = ("auto", *SOLVERS)


def solve(system: System, *, method: str = "auto") -> Solution:
    """Solve K T = F with the fixed temperatures eliminated.

    Parameters
    ----------
    system
        From :func:`~heat2d.assembly.assemble`.
    method
        ``auto``, ``direct`` or ``multigrid``. ``auto`` factorizes small
        systems and uses multigrid CG on large ones, falling back to the direct
        solver if the iterative one misses its tolerance.

    Raises
    ------
    SolveError
        Unknown method, or no solver reached an acceptable residual.
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
        return Solution(system, T, "none", 0, 0.0, time.perf_counter() - start)
    K = system.K.tocsr()
    Kf = K[free]
    Kff = Kf[:, free]
    rhs = system.F[free] - Kf[:, system.fixed] @ system.fixed_value    # F_f − K_fd T_d

    chosen = method if method != "auto" else (
        "direct" if free.sum() < AUTO_DIRECT_LIMIT else "multigrid")
    notes: list[str] = []
    x, iterations, residual = _attempt(chosen, Kff, rhs)
    if residual > ACCEPT_RESIDUAL and chosen != "direct":
        notes.append(f"{chosen} reached residual {residual:.1e} only; solved directly instead")
        chosen = "direct"
        x, iterations, residual = _attempt(chosen, Kff, rhs)
    if not np.isfinite(residual) or residual > ACCEPT_RESIDUAL:
        raise SolveError(f"linear solve failed: relative residual {residual:.2e} with {chosen}",
                         file=system.model.source)
    T[free] = x
    return Solution(system, T, chosen, iterations, residual, time.perf_counter() - start,
                    tuple(notes))


def _attempt(name: str, A: sp.csr_matrix, b: np.ndarray) -> tuple[np.ndarray, int, float]:
    try:
        x, iterations = SOLVERS[name](A, b)
    except (RuntimeError, ValueError, np.linalg.LinAlgError) as exc:
        if name == "direct":
            raise SolveError(f"direct solve failed: {exc}") from exc
        return np.zeros_like(b), 0, np.inf
    scale = np.linalg.norm(b)
    r = np.linalg.norm(b - A @ x)
    return x, iterations, float(r / scale) if scale > 0 else float(r)
