"""Joule heating in the time march: conductors whose current follows a schedule.

The stage equation H(T) + s R(T, t) = r of :class:`~.steppers.NewtonStepper` gains the
nodal Joule load f(T, I(t)) of every conductor (:mod:`heat2d.fem.joule`): R = K T − F(t)
− f. Each current is its ``current_schedule`` at t (else its constant ``current``), with
the left limit of pulses and steps at the end of a step, as the powers
(:meth:`.forcing.Forcing.currents`). The Jacobian of f is a local part (ρ(T) at fixed
field, one 3×3 block per triangle, added to the sparse Newton matrix) and, per conductor,
a rank-one part −a bᵀ (the field E = I/G follows the conductance G(T)); the rank-one part
is applied by the Sherman–Morrison–Woodbury formula with the kept factor of the sparse
part, as :class:`heat2d.fem.joule.TangentSolver` does (``woodbury``; without it the
modified Newton iteration absorbs it at the cost of more iterations).

The march's breaks include the current schedules' edges (:meth:`.forcing.Forcing.breaks`)
and its input power the I²R loss at the stage states (``Forcing.total_power(t, left, T)``).
"""

from __future__ import annotations

from dataclasses import replace

import numpy as np
import scipy.sparse as sp

from ..fem.joule import TangentSolver, solve_joule
from ..fem.solver import solve as steady_solve
from .steppers import NewtonStepper


class JouleStepper(NewtonStepper):
    """C(T) dT/dt + K(T) T − F(t) − f(T, I(t)) = 0: modified Newton per stage with the
    Joule load of the conductors at the stage time."""

    woodbury = True
    """Apply the rank-one (field) part of the Joule Jacobian by Sherman–Morrison–Woodbury."""

    def __init__(self, system, drive, T0, rho_c, method: str) -> None:
        super().__init__(system, drive, T0, rho_c, method)
        self.low_rank: tuple[np.ndarray, np.ndarray] | None = None
        self.low_rank_solves = 0
        mesh = system.mesh
        self._nodes = [mesh.triangles[c.triangles] for c in drive.found]

    def residual(self, T: np.ndarray, t: float, left: float | None = None,
                 jacobian: bool = False):
        out = super().residual(T, t, left, jacobian)
        st = self.drive.joule(T, t, left)
        if st is None:
            if jacobian:
                self.low_rank = None
            return out
        if not jacobian:
            return out - st.load
        R, J = out
        n = len(T)
        rows = np.concatenate([np.repeat(nd, 3, axis=1).ravel() for nd in self._nodes])
        cols = np.concatenate([np.tile(nd, (1, 3)).ravel() for nd in self._nodes])
        vals = np.concatenate([loc.ravel() for loc in st.local])
        local = sp.csr_matrix((vals, (rows, cols)), shape=(n, n))
        b = st.b[self.free]
        self.low_rank = (st.a[self.free], b) if np.any(b) else None
        return R - st.load, (J - local).tocsr()

    def solve(self, G: np.ndarray, s: float) -> np.ndarray:
        if not self.woodbury or self.low_rank is None:
            return self.factor(G)
        a, b = self.low_rank
        self.low_rank_solves += a.shape[1]
        return TangentSolver(self.factor, s * a, b)(G)

    def counts(self) -> dict:
        return {**super().counts(), "joule_low_rank_solves": self.low_rank_solves}


def with_currents(system, currents: np.ndarray):
    """The system whose model's conductors carry ``currents`` (A, in the order of
    :attr:`heat2d.model.schema.Model.conductors`: shapes, then groups)."""
    model = system.model
    values = iter(np.asarray(currents, dtype=float).tolist())
    shapes = tuple(replace(sh, current=next(values)) if sh.current is not None else sh
                   for sh in model.shapes)
    groups = tuple(replace(g, current=next(values)) if g.current is not None else g
                   for g in model.groups)
    model = replace(model, shapes=shapes, groups=groups)
    mesh = system.mesh
    return replace(system, mesh=replace(mesh, geometry=replace(mesh.geometry, model=model)))


def joule_steady_start(system, drive, method: str) -> np.ndarray:
    """The steady state (nodal °C) just before t = 0: every power, boundary value and
    current as before the run starts (each schedule's ``initial``), by
    :func:`heat2d.fem.joule.solve_joule` (which raises ``SolveError`` on a thermal
    runaway). ``method`` is a solver method other than ``auto``."""
    sys0 = replace(system, F=drive.F(0.0, drive.initial_power),
                   fixed_value=drive.fixed_values(0.0))
    dK = drive.dK(0.0)
    if dK is not None and not system.nonlinear:
        sys0 = replace(sys0, K=(system.K + dK).tocsr())
    if not drive.has_current or not np.any(drive.initial_current):
        return steady_solve(sys0, method=method).temperature
    if dK is not None:
        # The Joule solve reassembles K from the edge values (``other_values``: per edge
        # the 2×2 block h M_e first, in edge order): h as at t = 0 there too.
        values = system.other_values.copy()
        mesh, mass = system.mesh, system.layout.edge_mass
        blocks = values[:4 * len(mesh.edges)].reshape(-1, 4)
        for b, hf, _, _, _, h0, _ in drive.conv:
            if hf is not None:
                sel = mesh.edge_boundary == b
                blocks[sel] += (hf(0.0) - h0) * mass[sel].reshape(-1, 4)
        sys0 = replace(sys0, other_values=values)
    return solve_joule(with_currents(sys0, drive.initial_current), method=method).temperature
