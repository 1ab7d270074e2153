"""Joule heating of conductors that carry a current normal to the section (along the depth).

In a long straight conductor the electric field E along the depth is the same at every
point of its section, so the current density is E/ρ(T) and the generation

    q''' = E²/ρ(T),   E = I / ∫ dA/ρ(T)   (the integral over the conductor's section).

A conductor is a shape with a current or a group (stack, repeat) with a current: one E
over all its members that have a resistivity, so a group's current divides among its
members as their conductances ∫ dA/ρ do. ρ is evaluated at the mean temperature of each
triangle (as the conductivity).

The heat balance R(T) − f(T) = 0 (R from :meth:`System.residual_and_jacobian`, f the
nodal Joule loads ∫ q''' φ_i dV) is solved by Newton. f depends on T locally through
ρ(T) at fixed E and globally through E; the local part is a 3×3 element matrix added
to the sparse Jacobian, the global part is rank one per conductor,
∂f/∂T ⊃ a_c b_cᵀ with a_c = −2 f_c/G_c and b_c = ∂G_c/∂T (G_c = ∫ dA/ρ). Each Newton
step factorizes the sparse part A once and applies the full Jacobian's inverse by the
Sherman–Morrison–Woodbury formula, (A − U Vᵀ)⁻¹ = A⁻¹ + A⁻¹U (I − VᵀA⁻¹U)⁻¹ VᵀA⁻¹:
1 + (number of conductors) solves.

Thermal runaway: when the loss grows with temperature faster than the heat can leave
(lumped: α I² R₀ R_θ ≥ 1) there is no steady state. :func:`solve_joule` then finds the
onset by bisection in a common fraction of all currents (each solve starting from the
last steady state found), to :data:`ONSET_RTOL`, and raises :class:`SolveError`.
"""

from __future__ import annotations

import time
from dataclasses import dataclass, replace

import numpy as np

from ..errors import ModelError, SolveError, ThermalRunawayError
from ..model.schema import RESISTIVITY_FLOOR
from .assembly import System
from .conditioning import refusal, roundoff
from .solver import AUTO_DIRECT_LIMIT, METHODS, Factor, Solution, solve

ONSET_RTOL = 1e-3
"""Relative width of the bracket [lo, hi] of the runaway onset current (a steady state
was found at lo, none at hi)."""
RUNAWAY_GAIN = 5.0
"""Runaway is reported only when, at the highest current with a steady state, the rise
per A² is at least this many times its low-current value (the loss feeding back on
itself); otherwise the failure is an ordinary non-convergence."""
MAX_BISECTIONS = 30
"""At most this many bisection steps (2⁻³⁰ of the current when no steady state is found)."""
RELATIVE_TOL = 1e-8
"""Newton also stops when the change is below this fraction of the largest |T| (°C): the
round-off floor of states close to a runaway, where temperatures reach 10⁵ °C."""
RUNAWAY_TEMPERATURE = 1e7
"""°C: a Newton iterate hotter than this is taken as diverging."""


@dataclass(frozen=True, repr=False, eq=False)
class Conductor:
    """One electric field: its name, current (A), member shape names and triangles.

    ``triangles`` index the mesh triangles whose material conducts; ``member`` gives the
    index into ``members`` of each.
    """

    name: str
    current: float
    members: tuple[str, ...]
    triangles: np.ndarray
    member: np.ndarray


def conductors(system: System) -> tuple[Conductor, ...]:
    """The conductors of the system's model, with their triangles.

    Raises
    ------
    ModelError
        An axisymmetric model with a current (the current would run around the axis, not
        along a depth), or a conductor with no visible conducting area.
    """
    model, mesh = system.model, system.mesh
    found = model.conductors
    if found and model.axisymmetric:
        raise ModelError("an axisymmetric model cannot carry a current along the depth "
                         "(the section revolves about the axis); model it planar",
                         file=model.source, entry=f"conductor \"{found[0][0]}\"")
    index = {s.name: i for i, s in enumerate(model.shapes)}
    conducts = np.array([m.resistivity is not None for m in model.materials])
    out = []
    for name, members, current in found:
        slot = np.full(len(model.shapes), -1)
        slot[[index[s.name] for s in members]] = np.arange(len(members))
        member = slot[mesh.triangle_shape]
        tri = np.flatnonzero((member >= 0) & conducts[mesh.triangle_material])
        if not len(tri):
            line = next((s.line for s in members), None)
            raise ModelError("carries a current but has no visible conducting area",
                             file=model.source, entry=f"conductor \"{name}\"", line=line)
        out.append(Conductor(name, float(current), tuple(s.name for s in members), tri,
                             member[tri]))
    return tuple(out)


@dataclass(frozen=True, repr=False, eq=False)
class JouleState:
    """The Joule terms at one temperature field (all currents times ``scale``).

    Per conductor c: conductance G = ∫dA/ρ (S·m, the inverse of the resistance per unit
    length), field E (V/m), loss per unit length (W/m); per triangle q''' (W/m³, 0
    outside conductors); the nodal load f (W over the depth), the local element
    Jacobian of f and the rank-one factors.
    """

    qdot: np.ndarray
    load: np.ndarray
    conductance: np.ndarray
    field: np.ndarray
    loss_per_m: np.ndarray
    rho: tuple[np.ndarray, ...]
    floored: bool
    local: tuple[np.ndarray, ...]
    a: np.ndarray
    b: np.ndarray


def _resistivity(system: System, tri: np.ndarray, T: np.ndarray
                 ) -> tuple[np.ndarray, np.ndarray, bool]:
    """ρ, dρ/rise_c at the mean temperature of triangles ``tri``; whether any is floored."""
    t_mean = T[system.mesh.triangles[tri]].mean(axis=1)
    mats = system.mesh.triangle_material[tri]
    rho, drho = np.empty(len(tri)), np.empty(len(tri))
    floored = False
    for i in np.unique(mats):
        sel = mats == i
        mt = system.model.materials[i]
        rho[sel], drho[sel] = mt.resistivity_at(t_mean[sel])
        floored |= bool(np.any(rho[sel] <= RESISTIVITY_FLOOR * mt.resistivity * (1 + 1e-12))
                        and mt.temperature_coefficient != 0)
    return rho, drho, floored


def joule_state(system: System, T: np.ndarray, found: tuple[Conductor, ...] | None = None,
                scale: float = 1.0, currents: np.ndarray | None = None) -> JouleState:
    """Joule generation and its derivatives at nodal temperatures T (°C), with each
    conductor's current (``currents``, A, in the order of :func:`conductors`; default
    the model's) times ``scale``."""
    found = conductors(system) if found is None else found
    amps = np.array([c.current for c in found]) if currents is None else \
        np.asarray(currents, dtype=float)
    L, mesh = system.layout, system.mesh
    n, m = L.n, len(mesh.triangles)
    depth = system.model.depth_m
    qdot, load = np.zeros(m), np.zeros(n)
    k = len(found)
    g, e, loss = np.zeros(k), np.zeros(k), np.zeros(k)
    a, b = np.zeros((n, k)), np.zeros((n, k))
    rhos, local, floored = [], [], False
    for c, cond in enumerate(found):
        tri = cond.triangles
        nodes = mesh.triangles[tri]
        area = L.volume[tri] / depth                                  # m²
        rho, drho, fl = _resistivity(system, tri, T)
        floored |= fl
        g[c] = float((area / rho).sum())
        e[c] = amps[c] * scale / g[c]
        q = e[c] ** 2 / rho
        qdot[tri] += q
        f = np.bincount(nodes.ravel(), (q[:, None] * L.source[tri]).ravel(), minlength=n)
        load += f
        loss[c] = e[c] ** 2 * g[c]
        # ∂q/∂t̄ at fixed E = −q ρ'/ρ, with ∂t̄/∂T_j = 1/3 for the element's nodes.
        local.append(((-q * drho / rho / 3)[:, None, None] * L.source[tri][:, :, None])
                     .repeat(3, axis=2))
        # ∂G/∂T_j = Σ_e −A_e ρ'_e/ρ_e² /3;  ∂f/∂T ⊃ (−2 f/G) (∂G/∂T)ᵀ.
        b[:, c] = np.bincount(nodes.ravel(), np.repeat(-area * drho / rho**2 / 3, 3),
                              minlength=n)
        a[:, c] = -2 * f / g[c]
        rhos.append(rho)
    return JouleState(qdot, load, g, e, loss, tuple(rhos), floored, tuple(local), a, b)


def joule_source(system: System, T: np.ndarray, *, scale: float = 1.0
                 ) -> tuple[np.ndarray, dict[str, dict[str, float]]]:
    """q''' per triangle (W/m³) at nodal temperatures T, and per conductor its field
    ``field_v_per_m``, ``resistance_ohm_per_m``, ``loss_w_per_m`` and ``loss_w`` (over
    the model depth), for all currents times ``scale``."""
    found = conductors(system)
    st = joule_state(system, T, found, scale)
    depth = system.model.depth_m
    per = {c.name: {"field_v_per_m": float(st.field[i]),
                    "resistance_ohm_per_m": float(1 / st.conductance[i]),
                    "loss_w_per_m": float(st.loss_per_m[i]),
                    "loss_w": float(st.loss_per_m[i] * depth)}
           for i, c in enumerate(found)}
    return st.qdot, per


def residual_and_jacobian(system: System, T: np.ndarray,
                          found: tuple[Conductor, ...] | None = None, scale: float = 1.0,
                          currents: np.ndarray | None = None):
    """The heat balance with Joule loads: R(T) − f(T), the sparse part A of its Jacobian
    (``System`` Jacobian minus the local Joule term) and the low-rank factors a, b
    ((n, conductors) each) such that the full Jacobian is ``A − a bᵀ``; and the state."""
    found = conductors(system) if found is None else found
    R, J = system.residual_and_jacobian(T)
    st = joule_state(system, T, found, scale, currents)
    R = R - st.load
    L = system.layout
    slots = L.tri_slots.reshape(-1, 9)
    for cond, loc in zip(found, st.local, strict=True):
        J.data -= L.pattern.data(slots[cond.triangles].ravel(), loc.ravel())
    return R, J, st.a, st.b, st


class TangentSolver:
    """Solves with the full Jacobian A − a bᵀ from the factor of the sparse part A
    (Sherman–Morrison–Woodbury); ``capacitance`` = I − bᵀA⁻¹a."""

    def __init__(self, factor: Factor, a: np.ndarray, b: np.ndarray) -> None:
        self.factor = factor
        self.method = factor.method
        cols = [factor(a[:, c]) for c in range(a.shape[1])]
        self.z = np.column_stack(cols) if cols else np.zeros((a.shape[0], 0))
        self.b = b
        self.capacitance = np.eye(a.shape[1]) - b.T @ self.z
        self.iterations = factor.iterations

    @property
    def stable(self) -> bool:
        """True when the rank-one updates keep the Jacobian's determinant positive: every
        eigenvalue of the capacitance matrix has a positive real part."""
        if not self.capacitance.size:
            return True
        return bool(np.linalg.eigvals(self.capacitance).real.min() > 0)

    def __call__(self, r: np.ndarray) -> np.ndarray:
        y = self.factor(r)
        if not self.b.shape[1]:
            return y
        return y + self.z @ np.linalg.solve(self.capacitance, self.b.T @ y)


@dataclass
class _Attempt:
    ok: bool
    T: np.ndarray
    history: list
    tangent: TangentSolver | None = None
    residual: float = np.nan
    reason: str = ""
    iterations: int = 0


def _newton(system: System, found, T: np.ndarray, free: np.ndarray, chosen: str,
            scale: float, tol: float, max_iterations: int,
            relative: float = RELATIVE_TOL) -> _Attempt:
    """Newton with step halving on the Joule heat balance at ``scale`` times the currents."""
    T = T.copy()
    R, J, a, b, st = residual_and_jacobian(system, T, found, scale)
    ref = max(np.abs(system.F).sum() + np.abs(st.load).sum(),
              np.abs(system.K @ T).sum(), 1e-300)
    norm = np.linalg.norm(R[free]) / ref
    factor, history, total = None, [], 0
    for it in range(1, max_iterations + 1):
        A = J[free][:, free].tocsr()
        try:
            if factor is None:
                factor = Factor(chosen, A, points=system.mesh.points[free])
            else:
                factor.update(A)
            tangent = TangentSolver(factor, a[free], b[free])
            step = -tangent(R[free])
        except (RuntimeError, ValueError, np.linalg.LinAlgError) as exc:
            return _Attempt(False, T, history, reason=f"linear solve failed: {exc}")
        total += factor.iterations * (1 + a.shape[1])
        if not np.all(np.isfinite(step)):
            return _Attempt(False, T, history, reason="non-finite Newton step")
        alpha = 1.0
        while True:
            trial = T.copy()
            trial[free] += alpha * step
            R_new, J_new, a_new, b_new, st_new = residual_and_jacobian(system, trial, found,
                                                                       scale)
            new = np.linalg.norm(R_new[free]) / ref
            if new <= norm or alpha < 1 / 32 or not np.isfinite(new):
                break
            alpha /= 2
        change = float(np.abs(alpha * step).max())
        T, R, J, a, b, st, norm = trial, R_new, J_new, a_new, b_new, st_new, new
        history.append((it, change, float(norm)))
        if not np.all(np.isfinite(T)) or np.abs(T).max() > RUNAWAY_TEMPERATURE:
            return _Attempt(False, T, history, reason="temperature diverging")
        # Far above any real temperature (near a runaway) round-off limits the change.
        if change < max(tol, relative * float(np.abs(T).max())):
            factor.update(J[free][:, free].tocsr())
            tangent = TangentSolver(factor, a[free], b[free])
            if st.floored:
                return _Attempt(False, T, history, tangent, norm,
                                "resistivity at its floor (an unphysical state)", total)
            if not tangent.stable:
                return _Attempt(False, T, history, tangent, norm,
                                "unstable state (the loss outgrows the heat path)", total)
            return _Attempt(True, T, history, tangent, norm, iterations=total)
    last = history[-1] if history else (0, np.nan, np.nan)
    return _Attempt(False, T, history, reason=f"no convergence in {max_iterations} "
                    f"iterations (last change {last[1]:.3g} K)")


def _start(system: System) -> np.ndarray:
    """A first guess: the sink temperature everywhere, fixed values at fixed nodes."""
    T = np.full(system.K.shape[0], ambient(system))
    T[system.fixed] = system.fixed_value
    return T


def ambient(system: System) -> float:
    """The reference ("ambient") temperature of rises and cold resistances, °C: the one
    temperature of the sinks (fixed temperatures, convection ambients, radiation
    surroundings) when they agree, else the lowest of them."""
    edge = system.edge
    sinks = [system.fixed_value, edge["ambient"][edge["h"] > 0],
             edge["surroundings"][edge["emissivity"] > 0]]
    values = np.concatenate(sinks)
    return float(values.min()) if len(values) else 25.0


def solve_joule(system: System, *, method: str = "auto", initial: np.ndarray | None = None,
                tol: float = 1e-6, max_iterations: int = 40) -> Solution:
    """Solve the heat balance with the Joule heating of every conductor (Newton + SMW).

    The returned :class:`Solution` holds :func:`with_joule` of the system (the loss at
    the solution frozen into ``qdot`` and ``F``, for the results stage), as ``factor``
    the solver of the full Jacobian at the solution (small-signal response to added
    power, resistivity feedback included), and a note with the total Joule loss.

    Raises
    ------
    ModelError
        Currents in an axisymmetric model; a conductor without conducting area.
    SolveError
        ``thermal runaway: no steady state above about X A in conductor NAME ...`` when
        the currents exceed the onset (found to :data:`ONSET_RTOL`); otherwise when
        Newton does not converge.
    """
    if method not in METHODS:
        raise SolveError(f"unknown solver method {method!r} (choose from: "
                         f"{', '.join(sorted(METHODS))})")
    found = conductors(system)
    if not found:
        return solve(system, method=method, tol=tol, max_iterations=max_iterations,
                     initial=initial)
    start = time.perf_counter()
    free = np.ones(system.K.shape[0], dtype=bool)
    free[system.fixed] = False
    chosen = method if method != "auto" else (
        "direct" if free.sum() < AUTO_DIRECT_LIMIT else "multigrid")
    t_start = _start(system) if initial is None else np.array(initial, dtype=float)
    t_start[system.fixed] = system.fixed_value
    # As the linear solve: say when round-off can show (the balance carries the note);
    # Newton's change cannot fall below the round-off of its solves.
    floor, note = roundoff(system, free)
    relative = max(RELATIVE_TOL, floor)
    attempt = _newton(system, found, t_start, free, chosen, 1.0, tol, max_iterations,
                      relative)
    if not attempt.ok:
        try:
            _runaway(system, found, free, chosen, tol, max_iterations, attempt, relative)
        except SolveError as exc:
            if note is None or isinstance(exc, ThermalRunawayError):
                raise
            raise refusal(system, note, exc.reason) from exc
    st = joule_state(system, attempt.T, found)
    # The loss is reported per conductor (conductor_figures), not as a note.
    return Solution(with_joule(system, attempt.T, st), attempt.T, chosen, attempt.iterations,
                    attempt.residual, time.perf_counter() - start,
                    (note,) if note else (), tuple(attempt.history), attempt.tangent, free)


def with_joule(system: System, T: np.ndarray, state: JouleState | None = None) -> System:
    """The system with the Joule generation at T frozen in: ``qdot`` (W/m³ per triangle)
    and ``F`` (W) include it, so that post-processing (shape powers, energy balance,
    the °C/W matrix of powered shapes) counts the loss as a source. Not to be solved
    again with :func:`solve_joule` (the loss would be counted twice)."""
    st = joule_state(system, T) if state is None else state
    return replace(system, qdot=system.qdot + st.qdot, F=system.F + st.load)


def onset_estimate(system: System, T: np.ndarray, found: tuple[Conductor, ...],
                   free: np.ndarray, chosen: str) -> tuple[np.ndarray, np.ndarray]:
    """Lumped onset estimate at the zero-current state T: per conductor x_c = α' P R_θ
    = −b_cᵀ K⁻¹ f_c / G_c (K the Jacobian without Joule terms, P the loss at T and the
    full currents, R_θ the rise per W weighted by the
    conductance's sensitivity b_c = ∂G/∂T, α' = −Σb_c/G_c); the runaway fraction of
    the currents 1/√x_c; and the linear rise per unit fraction² (max over nodes)."""
    _, J = system.residual_and_jacobian(T)
    st = joule_state(system, T, found, 1.0)
    factor = Factor(chosen, J[free][:, free].tocsr(), keep_order=False,
                    points=system.mesh.points[free])
    frac = np.full(len(found), np.inf)
    rise = np.zeros(len(found))
    for c in range(len(found)):
        f = -st.a[:, c] * st.conductance[c] / 2
        rise_c = factor(f[free])
        x = -float(st.b[free, c] @ rise_c) / st.conductance[c]
        frac[c] = 1 / np.sqrt(x) if x > 0 else np.inf
        rise[c] = float(np.abs(rise_c).max())
    return frac, rise


def _runaway(system: System, found, free, chosen, tol, max_iterations, failed: _Attempt,
             relative: float = RELATIVE_TOL):
    """Bisect the fraction of the currents at which steady states stop existing; raise."""
    base = _newton(system, found, _start(system), free, chosen, 0.0, tol, max_iterations,
                   relative)
    if not base.ok:
        raise SolveError(f"nonlinear solve with Joule heating failed: {base.reason}",
                         file=system.model.source)
    frac, linear = onset_estimate(system, base.T, found, free, chosen)
    lo, hi, t_lo = 0.0, 1.0, base.T
    guesses = [s for s in (0.98 * frac.min(), 1.02 * frac.min()) if s < 1]
    for s in guesses:
        got = _newton(system, found, t_lo, free, chosen, s, tol, max_iterations, relative)
        if got.ok:
            lo, t_lo = s, got.T
        else:
            hi = s
            break
    for _ in range(MAX_BISECTIONS):
        if hi - lo <= ONSET_RTOL * hi:
            break
        s = 0.5 * (lo + hi)
        got = _newton(system, found, t_lo, free, chosen, s, tol, max_iterations, relative)
        if got.ok:
            lo, t_lo = s, got.T
        else:
            hi = s
    rise = np.abs(t_lo - base.T).max()
    gain = rise / (lo**2 * linear.max()) if lo > 0 and linear.max() > 0 else 0.0
    if gain < RUNAWAY_GAIN or hi - lo > ONSET_RTOL * hi:
        raise SolveError(f"nonlinear solve with Joule heating did not converge: "
                         f"{failed.reason}", file=system.model.source)
    # The conductor that runs away: the hottest at the last steady state.
    hottest = int(np.argmax([t_lo[system.mesh.triangles[c.triangles]].max() for c in found]))
    c = found[hottest]
    onset = 0.5 * (lo + hi) * abs(c.current)
    raise ThermalRunawayError(
        f"thermal runaway: no steady state above about {onset:.4g} A in conductor "
        f"{c.name} (onset between {lo * abs(c.current):.4g} and {hi * abs(c.current):.4g} A"
        f"; {abs(c.current):.4g} A asked; lumped estimate "
        f"{frac[hottest] * abs(c.current):.4g} A)", file=system.model.source,
        entry=f"conductor \"{c.name}\"", onset_a=float(onset), conductor=c.name)


def runaway_onset(error: SolveError) -> float | None:
    """The onset current (A) of a runaway error, or None for another failure."""
    return error.onset_a if isinstance(error, ThermalRunawayError) else None


def conductor_figures(system: System, T: np.ndarray) -> dict[str, dict]:
    """Per conductor at nodal temperatures T (°C).

    ``current_a``; ``resistance_ohm_per_m`` at T and ``cold_resistance_ohm_per_m`` with
    the whole conductor at :func:`ambient` (``ambient_c``); ``loss_w`` (I²R over the
    model depth); ``voltage_v`` (E times the depth); ``field_v_per_m``; ``mean_c``
    (area-weighted), ``max_c`` (nodal), ``mean_rise_k``, ``max_rise_k`` over ambient;
    for a group, ``members``: per member shape ``current_a``, ``loss_w``.
    """
    found = conductors(system)
    st = joule_state(system, T, found)
    amb = ambient(system)
    cold = joule_state(system, np.full_like(T, amb), found)
    L, depth = system.layout, system.model.depth_m
    out: dict[str, dict] = {}
    for c, cond in enumerate(found):
        tri = cond.triangles
        vol = L.volume[tri]
        t_mean = T[system.mesh.triangles[tri]].mean(axis=1)
        mean = float((t_mean * vol).sum() / vol.sum())
        top = float(T[system.mesh.triangles[tri]].max())
        fig = {"current_a": cond.current,
               "resistance_ohm_per_m": float(1 / st.conductance[c]),
               "cold_resistance_ohm_per_m": float(1 / cold.conductance[c]),
               "ambient_c": amb,
               "loss_w": float(st.loss_per_m[c] * depth),
               "voltage_v": float(st.field[c] * depth),
               "field_v_per_m": float(st.field[c]),
               "mean_c": mean, "max_c": top,
               "mean_rise_k": mean - amb, "max_rise_k": top - amb}
        if len(cond.members) > 1:
            area = vol / depth
            g = np.bincount(cond.member, area / st.rho[c], minlength=len(cond.members))
            fig["members"] = {name: {"current_a": float(st.field[c] * g[i]),
                                     "loss_w": float(st.field[c] ** 2 * g[i] * depth)}
                              for i, name in enumerate(cond.members)}
        out[cond.name] = fig
    return out
