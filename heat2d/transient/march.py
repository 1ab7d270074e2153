"""The time march: C dT/dt + K T = F(t) by TR-BDF2 with local error control.

TR-BDF2 with γ = 2 − √2 (Bank et al., IEEE Trans. Electron Devices 32 (1985); Hosea &
Shampine, Appl. Numer. Math. 20 (1996)): a trapezoidal stage to t + γh and a BDF2 stage
to t + h, both with the matrix C + (γh/2) K; L-stable and second order. In enthalpy form
(H the stored heat, R = K T − F the net heat leaving each node):

    H(T_γ) + s R(T_γ)     = H(T_n) − s R(T_n)                  s = γh/2
    H(T_n+1) + s R(T_n+1) = a H(T_γ) − c H(T_n)                a = 1/(γ(2−γ)), a − c = 1

so H(T_n+1) − H(T_n) = −h (ad R_n + ad R_γ + d R_n+1): the scheme's own quadrature, with
which the energy balance is summed. The local error is the difference from the
third-order quadrature through the same three points, filtered by (C + sK)⁻¹ so that
stiff components do not inflate it (the filtering of Hosea & Shampine's estimate, from
memory); its max-norm is held below ``tolerance``.

Step sizes sit on a ladder s = 4^k seconds (one factorization per rung, kept while in
use, and shared with the other marches of a run through a :class:`~.linear.FactorCache`:
their rungs coincide); a step moves up one rung when its error is below tolerance/64 (the
local error of a step four times as long is 64× larger), down as many rungs as the
error asks when it is rejected (never below :data:`FLOOR`), and is shortened to land
exactly on schedule
breaks, snapshot times and the end (and, with ``land_reports``, on every report time;
else the report times are read inside the steps). Target times closer than
:data:`MERGE` (relative) are one target. After t = 0 and after each break two
backward-Euler steps (matrix C + s K of the same ladder) damp the components excited
by a jump: TR-BDF2's amplification R(z) is negative for z < −2.41 (tending to 0⁻), so a
large step right after a face temperature jumps makes the stiff components change sign
(tests/test_march.py measures a node falling by 9.5 K without these steps, none with
them).
"""

from __future__ import annotations

import math
from collections.abc import Callable, Mapping, Sequence
from dataclasses import replace

import numpy as np

from ..errors import SolveError
from ..fem.capacity import varies
from ..fem.solver import choose_method
from ..fem.solver import solve as steady_solve
from .forcing import forcing
from .history import History, Recorder
from .joule_stepper import JouleStepper, joule_steady_start
from .linear import DIRECT_LIMIT, KEEP, RATIO, FactorCache
from .steppers import LinearStepper, NewtonStepper

GAMMA = 2 - math.sqrt(2)
D = GAMMA / 2
A = 1 / (GAMMA * (2 - GAMMA))
C_ = (1 - GAMMA) ** 2 / (GAMMA * (2 - GAMMA))
B_SCHEME = (A * D, A * D, D)
"""TR-BDF2 as a quadrature of −R over the step, at t, t + γh, t + h."""
W2 = 1 / (6 * GAMMA * (1 - GAMMA))
W3 = 0.5 - 1 / (6 * (1 - GAMMA))
B_EMBED = (1 - W2 - W3, W2, W3)
"""The third-order quadrature through the same three points (exact for cubics)."""
STARTUP = 2
"""Backward-Euler steps after t = 0 and after each schedule break."""
GROW = 1 / RATIO**3
STRETCH = 0.01
"""A step that would end this little (relative) short of a target is stretched onto it
(else a sliver of a step would follow)."""
MAX_REJECTS = 60
RELATIVE_TOLERANCE = 1e-4
PLAUSIBLE_SPAN = 1000.0
"""K. Past this temperature span (:func:`_span`; every board material has melted) the
tolerance rises to :data:`RELATIVE_TOLERANCE` of the span: 0.01 K on a rise of 1e10 K (a
power slipped by decades) would take millions of steps for figures that are no result."""
TRANSPORTED = "local errors transported by the scheme"
HALVED = "march repeated on halved steps"
"""How the time-step error estimate was made (``History.stats["error_estimate"]``)."""


MERGE = 1e-9
"""Relative distance below which two target times are one (a report time computed as
1e-5·10^(k/10) and a pulse edge at 0.21 s differ in the last bits; landing on both would
take a step of 1e-17 s)."""
FLOOR = 1e-10
"""The smallest step, relative to the time reached (or to the first target): the error
control never shortens a step below it."""


def merge_times(values, prefer=()) -> np.ndarray:
    """Sorted times with neighbours closer than :data:`MERGE` (relative) merged into one:
    the ``prefer`` value (a schedule break) where the group holds one, else its first."""
    v = np.unique(np.asarray(values, dtype=float))
    if len(v) < 2:
        return v
    new = np.concatenate([[True], np.diff(v) > MERGE * np.abs(v[1:])])
    group = np.cumsum(new) - 1
    out = v[new].copy()
    pref = np.isin(v, np.asarray(prefer, dtype=float))
    out[group[pref]] = v[pref]
    return out


def _nearest(targets: np.ndarray, values: np.ndarray) -> np.ndarray:
    """Index of the target nearest each value."""
    i = np.clip(np.searchsorted(targets, values), 0, len(targets) - 1)
    below = np.maximum(i - 1, 0)
    return np.where(np.abs(targets[below] - values) < np.abs(targets[i] - values), below, i)


def _targets(times, store_at, breaks, end) -> np.ndarray:
    allt = np.concatenate([np.asarray(times, float), np.asarray(store_at, float), breaks])
    return merge_times(allt[(allt > 0) & (allt <= end)], prefer=breaks)


def steady_start(system, *, power: Mapping[str, object] | None = None,
                 boundary: str | None = None, method: str = "auto") -> np.ndarray:
    """The steady state (nodal °C) with every power and boundary value as it is just
    before t = 0 (a schedule's ``initial``), the ``"steady"`` start of :func:`march`."""
    chosen = method if method != "auto" else choose_method(len(system.K.indptr) - 1)
    return _initial(system, forcing(system, power, boundary), "steady", chosen)


def _initial(system, drive, initial, method: str, cache: FactorCache | None = None
             ) -> np.ndarray:
    n = system.K.shape[0]
    if isinstance(initial, str):
        if initial != "steady":
            raise ValueError(f"initial must be 'steady', a number or a nodal array, "
                             f"got {initial!r}")
        if drive.has_current:
            return joule_steady_start(system, drive, method)
        F0 = drive.F(0.0, drive.initial_power)
        sys0 = replace(system, F=F0, fixed_value=drive.fixed_values(0.0))
        dK = drive.dK(0.0)
        if dK is not None and not system.nonlinear:
            sys0 = replace(sys0, K=(system.K + dK).tocsr())
        plain = dK is None and not system.nonlinear and cache is not None
        solution = steady_solve(sys0, method=method,
                                factor=cache.steady_factor(system) if plain else None)
        if plain:
            cache.keep_steady(system, solution.factor)
        return solution.temperature
    T = np.broadcast_to(np.asarray(initial, dtype=float), (n,)).copy()
    T[system.fixed] = drive.fixed_values(0.0)
    return T


def march(system, *, times: Sequence[float], initial="steady", rho_c=None,
          power: Mapping[str, object] | None = None, boundary: str | None = None,
          tolerance: float = 0.01, store_at: Sequence[float] = (), method: str = "auto",
          plan: tuple[np.ndarray, np.ndarray] | None = None, check: bool = False,
          first_step: float | None = None, land_reports: bool = False,
          rung: float | None = None, cache: FactorCache | None = None,
          plausible: float = PLAUSIBLE_SPAN,
          progress: Callable[[float, float], None] | None = None) -> History:
    """Integrate C dT/dt + K T = F(t) from the initial state over the report times.

    Parameters
    ----------
    system
        The assembled :class:`~heat2d.fem.assembly.System`.
    times
        Report times (s), increasing, > 0; the last is the end of the run.
    initial
        ``"steady"`` (the steady state with each power and boundary value as just before
        t = 0), a temperature (°C, uniform) or a nodal array (°C).
    rho_c
        Volumetric heat capacity per triangle or one number (J/(m³·K)) instead of the
        materials' density and specific heat.
    power
        None: each shape's schedule or constant power. A mapping shape name -> W, Schedule
        or callable of t: only these shapes are powered (see :func:`.forcing.forcing`).
    boundary
        None, or ``"zero"`` for all boundary values zero (linear models: the rise).
    tolerance
        K: the local time-step error allowed in each step (max over nodes); raised to
        :data:`RELATIVE_TOLERANCE` of the temperature span where the span passes
        ``plausible`` (K; the largest used is ``stats["tolerance_used_k"]``).
    store_at
        Times (s, within the run) at which the whole nodal field is kept.
    method
        Linear solver of the stage matrices: ``auto``, ``direct`` or ``multigrid``.
    plan
        (step end times, backward-Euler flags): take exactly these steps, without error
        control (a replay, a fixed-step study).
    check
        Estimate the time-step error of the figures (``error``, ``peak_error``). A linear
        model transports each step's local error estimate with the scheme itself, e_n+1
        = R(h) e_n + l_n (the global error equation of a linear scheme; Lang & Verwer,
        SIAM J. Sci. Comput. 29 (2007), from memory), in the same factorizations: the
        error of a figure is e at its node. A nonlinear model marches again on the steps
        of this march each split in two; the finer march is returned, with the error
        |coarse − fine|/3 (second order: the error of the finer march).
    first_step
        s: the first step; default a quarter of the first report time or of the shortest
        gap between schedule breaks.
    land_reports
        True: steps land exactly on every report time. False (default): only on schedule
        breaks, snapshot times and the end (and on report times that coincide with one);
        the figures at report times in between come from the quadratic through the
        step's three stage states (third-order, as accurate as the step), so the steps
        follow the error control alone.
    rung
        s: the lowest rung s₀ of the step ladder (matrices C + s₀4^k K); default from the
        first step (the check march: half the first march's).
    cache
        Factorizations shared with other marches of the same system and capacity (a
        :class:`~.linear.FactorCache`).
    progress
        Called as progress(t, end) after each accepted step.
    """
    times = np.asarray(times, dtype=float)
    if times.ndim != 1 or len(times) == 0 or np.any(np.diff(times) <= 0) or times[0] <= 0:
        raise ValueError("times must be increasing and > 0")
    end = float(times[-1])
    drive = forcing(system, power, boundary)
    breaks = drive.breaks(end, limit=plan is None)
    times = merge_times(times, prefer=breaks)
    store = np.asarray(store_at, dtype=float)
    targets = _targets(times if land_reports else times[-1:], store, breaks, end)
    at = _nearest(targets, times)
    on = np.abs(targets[at] - times) <= MERGE * times
    times = np.where(on, targets[at], times)        # report times landed on: exactly
    n = len(system.K.indptr) - 1
    chosen = method if method != "auto" else choose_method(n)
    if method == "auto" and n < DIRECT_LIMIT:
        # Many solves per matrix: factorize (not multigrid), the steady start too (its
        # factor serves the steady rise of each impedance, where multigrid CG from zero
        # can take hundreds of iterations for a unit load: 45 s at a million nodes).
        chosen = "direct"
    if cache is None:               # the steady start's ordering serves the rungs
        cache = FactorCache(keep=KEEP)
    T0 = _initial(system, drive, initial, chosen, cache)
    gaps = np.diff(np.concatenate([[0.0], breaks])) if len(breaks) else np.array([end])
    h_first = first_step or min(times[0], targets[0], float(gaps.min())) / 4
    if plan is not None:
        h_first = float(np.diff(np.concatenate([[0.0], plan[0]])).min())
    # Currents flow when the model's schedules drive the march (not in an impedance march,
    # whose ``power`` mapping powers only the named shapes).
    joule = drive.has_current
    nonlinear = joule or system.nonlinear or varies(system, rho_c) or drive.varies_matrix
    # Rungs at powers of four (s = 4^k s): every march of the system meets the same ones.
    s0 = rung or float(RATIO) ** math.floor(math.log(D * h_first, RATIO) + 1e-9)
    newton = JouleStepper if joule else NewtonStepper
    stepper = (newton(system, drive, T0, rho_c, chosen) if nonlinear
               else LinearStepper(system, drive, T0, rho_c, s0, chosen))
    if cache is not None and isinstance(stepper, LinearStepper):
        stepper.ladder.share(cache)
    rec = Recorder(system, drive, T0, rho_c, times, store)
    rec.record(T0, 0.0, np.zeros(len(system.fixed)))
    rec.track(T0, 0.0)
    report = set(at[on].tolist())
    between = list(times[~on])
    inside = store[(store > 0) & (store <= end * (1 + MERGE))]
    snap = set(_nearest(targets, inside).tolist()) if len(inside) else set()
    if np.any(store == 0.0):
        rec.snapshot(T0, 0.0)
    is_break = np.isin(targets, breaks)

    t, T = 0.0, T0
    k = 0                               # rung: s = s0 4^k
    # The error transport (linear models with ``check``): e at the nodes, 0 at fixed ones.
    transport = check and plan is None and isinstance(stepper, LinearStepper)
    g = np.zeros(len(T0))
    row_error = [0.0]
    peak_error = np.where(np.isfinite(rec.peak), 0.0, np.nan)
    startup = STARTUP
    j = 0                               # next target
    p = 0                               # plan position
    rejects = 0
    rejected_total = 0
    used = tolerance                    # the largest tolerance a step was held to
    span = _span(T0, T0)                # the temperature span reached so far
    local = []
    while j < len(targets):
        target = targets[j]
        if plan is not None:
            t_new, euler = float(plan[0][p]), bool(plan[1][p])
            h = t_new - t
            s = h if euler else D * h
        else:
            euler = startup > 0
            s = s0 * RATIO**k
            h = s if euler else s / D
        landing = t + h * (1 + STRETCH) >= target
        if plan is not None:
            if t_new > target * (1 + 1e-12):
                raise ValueError(f"the planned steps pass the report time {target:g} s")
            landing = abs(t_new - target) <= 1e-9 * max(h, 1e-300)
        if landing:
            h = target - t
            s = h if euler else D * h
        try:
            step = _step(stepper, rec, T, t, h, s, euler, estimate=plan is None,
                         g=g if transport else None)
        except SolveError:
            if plan is not None:
                raise
            step = None
        err = np.inf if step is None else step[1]
        allowed, span_end = tolerance, span
        if plan is None and np.isfinite(err):      # the span before the step or at its end
            span_end = _span(step[0], T0)
            if max(span, span_end) > plausible:
                allowed = max(tolerance, RELATIVE_TOLERANCE * max(span, span_end))
        if plan is None and not err <= allowed:
            rejects += 1
            rejected_total += 1
            if rejects > MAX_REJECTS:
                raise SolveError(f"time step rejected {MAX_REJECTS} times at t = {t:.6g} s "
                                 f"(step {h:.3g} s, error {err:.3g} K)",
                                 file=system.model.source)
            order = 2 if euler else 3
            drop = 1 if not np.isfinite(err) else max(
                1, math.ceil(math.log(err / (0.5 * allowed)) / math.log(RATIO**order)))
            k = math.floor(math.log(s / s0, RATIO) + 1e-9) - drop
            floor = FLOOR * max(t, float(targets[0]))
            if s0 * RATIO**k < (floor if euler else D * floor):
                raise SolveError(f"the time step fell below {floor:.3g} s at t = {t:.6g} s "
                                 f"(error {err:.3g} K)", file=system.model.source)
            continue
        rejects = 0
        used = max(used, allowed)
        span = max(span, span_end)
        T_prev = T
        T, _, e_in, e_out, Tg, est, g_new = step
        g_prev = g
        if transport:
            g = g_new
            g[stepper.free] += est
        rec.energy_in += e_in
        rec.energy_out += e_out
        rec.steps.append(h)
        rec.flags.append(euler)
        local.append(err)
        t_prev = t
        t = float(target) if landing else t + h
        while between and between[0] <= t:
            tau = between.pop(0)
            Tt = _between(stepper, T_prev, Tg, T, t_prev, h, tau, euler)
            rec.record(Tt, tau, _reaction(stepper, Tt, tau, tau - t_prev), left=tau - t_prev)
            if transport:
                x = (tau - t_prev) / h
                row_error.append(_error_at(Tt, (1 - x) * g_prev + x * g))
        rec.ends.append(t)
        higher = rec.track(T, t)
        if transport and higher.any():
            peak_error[higher] = np.abs(g[rec.shape_argmax(T)[higher]])
        p += 1
        if landing:
            if j in report:
                rec.record(T, t, _reaction(stepper, T, t, h), left=h)
                if transport:
                    row_error.append(_error_at(T, g))
            if j in snap:
                rec.snapshot(T, t)
            if is_break[j] and plan is None:
                startup = STARTUP + 1
            j += 1
        if plan is None:
            if startup > 0:
                startup -= 1
                if startup == 0:
                    k -= 1
            elif not landing and err < GROW * allowed:
                k += 1
        if progress:
            progress(t, end)
    counts = {**stepper.counts(), "steps": len(rec.steps), "rejected": rejected_total,
              "largest_local_error_k": max(local, default=0.0), "tolerance_used_k": used}
    if transport:
        counts["error_estimate"] = TRANSPORTED
        return rec.history(T, counts, error=np.asarray(row_error), peak_error=peak_error)
    hist = rec.history(T, counts)
    if not check:
        return hist
    ends = np.asarray(rec.ends)
    starts = np.concatenate([[0.0], ends[:-1]])
    flags = np.asarray(rec.flags)
    fine_ends = np.column_stack([(starts + ends) / 2, ends]).ravel()
    fine = march(system, times=times, initial=T0, rho_c=rho_c, power=power,
                 boundary=boundary, tolerance=tolerance, store_at=store_at, method=method,
                 plan=(fine_ends, np.repeat(flags, 2)), land_reports=land_reports,
                 rung=s0 / 2, cache=cache, progress=progress)
    error = np.abs(np.nanmax(hist.shape_max, axis=1) - np.nanmax(fine.shape_max, axis=1)) / 3
    peak_error = np.abs(hist.peak_max - fine.peak_max) / 3
    return replace(fine, error=error, peak_error=peak_error,
                   stats={**fine.stats, "coarse": counts, "error_estimate": HALVED,
                          "largest_local_error_k": counts["largest_local_error_k"]})


def _span(T: np.ndarray, T0: np.ndarray) -> float:
    """The temperature span of a state: its range, or its largest change from T0."""
    return max(float(T.max() - T.min()), float(np.abs(T - T0).max())) if len(T) else 0.0


def _error_at(T: np.ndarray, e: np.ndarray) -> float:
    """The error of the largest temperature: |e| at its node."""
    return float(abs(e[int(np.argmax(T))])) if len(T) else 0.0


def _reaction(stepper, T: np.ndarray, t: float, left: float) -> np.ndarray:
    """Heat the fixed nodes take in at (T, t): dH/dt + R there, W (powers as at the end
    of the step of length ``left`` that reached t)."""
    fixed = stepper.fixed
    if not len(fixed):
        return np.zeros(0)
    R = stepper.residual(T, t, left)[fixed]
    drive = stepper.drive
    if drive.fixed_fn:
        dt = 1e-6 * max(t, 1e-9)
        slope = (drive.fixed_values(t + dt) - drive.fixed_values(max(t - dt, 0.0))) / (
            t + dt - max(t - dt, 0.0))
        R = R + stepper.capacity(T)[fixed] * slope
    return R


def _between(stepper, T0, Tg, T1, t0: float, h: float, tau: float, euler: bool
             ) -> np.ndarray:
    """The state at tau inside the step [t0, t0 + h]: the quadratic through the states at
    t0, t0 + γh and t0 + h (a backward-Euler step: the line); fixed nodes at their value."""
    x = (tau - t0) / h
    if euler or Tg is None:
        T = (1 - x) * T0 + x * T1
    else:
        g = GAMMA
        T = (T0 * (x - g) * (x - 1) / g + Tg * x * (x - 1) / (g * (g - 1))
             + T1 * x * (x - g) / (1 - g))
    return stepper.with_fixed(T, tau)


def _step(stepper, rec: Recorder, T: np.ndarray, t: float, h: float, s: float,
          euler: bool, estimate: bool = True, g: np.ndarray | None = None):
    """One step from (T, t): (T_new, error estimate K (0 without ``estimate``: a replayed
    step), energy in J, energy out J, the state at t + γh or None, the filtered local
    error at the free nodes or None, R(h) g or None).

    With ``g`` (linear models), the step also carries the error g of the state at t to
    t + h: R(h) g, the same stages with no sources and the fixed nodes at zero, solved
    as second columns of the stages' back-substitutions (loosely: an estimate)."""
    free, fixed = stepper.free, stepper.fixed
    t1 = t + h                          # powers there: the left limit (left=h)
    Hn = stepper.H(T)
    Rn = stepper.residual(T, t)
    drive = rec.drive
    carry = g is not None
    if carry:
        L = stepper.ladder
        ef = g[free]
        Ce = L.C * ef
    moved = None
    if euler:
        if carry:
            T1, moved = stepper.stage(s, Hn[free], t1, T, h, extra=Ce)
        else:
            T1 = stepper.stage(s, Hn[free], t1, T, h)
        H1 = stepper.H(T1)
        R1 = stepper.residual(T1, t1, h)
        est = stepper.filter(s, 0.5 * h * (Rn[free] - R1[free])) if estimate else None
        points = ((t1, T1, R1, 1.0),)
    else:
        tg = t + GAMMA * h
        guess = None
        if carry:
            Tg, eg = stepper.stage(s, Hn[free] - s * Rn[free], tg, T,
                                   extra=Ce - s * (L.K @ ef))
            guess = T + (Tg - T) / GAMMA
            T1, moved = stepper.stage(s, A * stepper.H(Tg)[free] - C_ * Hn[free], t1, guess,
                                      h, extra=A * L.C * eg - C_ * Ce)
        else:
            Tg = stepper.stage(s, Hn[free] - s * Rn[free], tg, T)
        Hg = stepper.H(Tg)
        if not carry:
            guess = T + (Tg - T) / GAMMA
            T1 = stepper.stage(s, A * Hg[free] - C_ * Hn[free], t1, guess, h)
        H1 = stepper.H(T1)
        Rg = stepper.residual(Tg, tg)
        R1 = stepper.residual(T1, t1, h)
        raw = (H1[free] - Hn[free]) + h * (B_EMBED[0] * Rn[free] + B_EMBED[1] * Rg[free]
                                           + B_EMBED[2] * R1[free])
        est = stepper.filter(s, raw) if estimate else None
        points = ((t, T, Rn, B_SCHEME[0]), (tg, Tg, Rg, B_SCHEME[1]),
                  (t1, T1, R1, B_SCHEME[2]))
    err = float(np.abs(est).max()) if est is not None and len(est) else 0.0
    if not np.all(np.isfinite(T1)):
        return T1, np.inf, 0.0, 0.0, None, None, None
    lefts = (None, None, h)[-len(points):]
    e_in = h * sum(w * drive.total_power(tp, lf, Tp)      # I²R depends on the state
                   for (tp, Tp, _, w), lf in zip(points, lefts, strict=True))
    edges = [rec.edge_out(Tp, tp) for tp, Tp, _, _ in points]
    e_edge = h * sum(w * q.sum() for q, (_, _, _, w) in zip(edges, points, strict=True))
    e_fixed = -(H1[fixed] - Hn[fixed]).sum() - h * sum(w * Rp[fixed].sum()
                                                       for _, _, Rp, w in points)
    # The heat through the boundaries in either direction: the scale of the balance when
    # heat comes in through one boundary and leaves through another (nothing generated).
    rec.energy_gross += h * sum(w * np.abs(q).sum() + w * np.abs(Rp[fixed]).sum()
                                for q, (_, _, Rp, w) in zip(edges, points, strict=True))
    if carry:
        full = np.zeros_like(g)
        full[free] = moved
        moved = full
    return T1, err, e_in, e_edge + e_fixed, (None if euler else Tg), est, moved
