"""Chains a transient run: Model -> mesh -> System -> History, then the thermal impedance
of each powered shape, its RC networks and its periodic peaks -> :class:`TransientResult`.

The run's own history follows the model's schedules from its start state. The thermal
impedance Z(t) of a powered shape is a separate march: a step of power in that shape
alone. For a linear model it is the rise per watt above the boundaries (every boundary
value zero, 1 W), which superposition makes exact for any power; for a nonlinear model
(k(T), radiation, ρc(T), resistivity with α ≠ 0) it is the rise above the zero-power
steady state for a step of the shape's peak power, per watt: the impedance at that
operating point, not a constant of the design.
"""

from __future__ import annotations

import time
from collections.abc import Callable
from dataclasses import dataclass, field, replace
from typing import Any

import numpy as np

from ..errors import SolveError
from ..fem.assembly import assemble
from ..fem.budget import check_outlines
from ..fem.capacity import capacity
from ..fem.geometry import build_geometry
from ..fem.mesh import build_mesh
from ..fem.solver import solve
from ..pipeline.chain import stage_runner
from .forcing import forcing
from .history import History
from .linear import DIRECT_LIMIT, FactorCache
from .march import PLAUSIBLE_SPAN, RELATIVE_TOLERANCE, march, merge_times, steady_start
from .network import cauer, foster_fit, modal_network
from .periodic import duty_family, periodic_peak

Progress = Callable[[str, str], None]
"""Called as progress(stage, event) with event "start", then "end" or "failed"; within the
march also as progress("march at t = ... s of ... s", "progress") after each step."""

MODES = 12
"""Eigenpairs of the modal network (the slowest modes: the check of the fitted network
at times past the fastest of them)."""
MODAL_LIMIT = 400_000
"""Free nodes above which the modal check is skipped (shift-invert eigsh costs many
solves with the factorization)."""


@dataclass(frozen=True, repr=False, eq=False)
class TransientResult:
    """A transient run: its history, the impedance curves and networks, and the summary.

    Attributes
    ----------
    system
        The assembled system (mesh, model).
    history
        The run's own response at the report times (:class:`~.history.History`).
    zth
        shape name -> (t (s), Z (K/W)) of a unit step of power in that shape alone.
    networks
        shape name -> {"foster": Foster, "cauer": Cauer, "modal": Foster or None,
        "r_total": steady K/W}.
    duty
        shape name -> {"widths": s, "duties": (...), "peaks": (D+1, W) K/W}.
    periodic
        shape name -> periodic-steady-state figures of its pulse train.
    summary
        What ``summary.json`` holds.
    log_time
        The report times are log-spaced.
    """

    system: Any
    history: History
    zth: dict
    networks: dict
    duty: dict
    periodic: dict
    summary: dict = field(compare=False)
    log_time: bool = True

    @property
    def model(self):
        return self.system.model

    @property
    def mesh(self):
        return self.system.mesh

    @property
    def times(self) -> np.ndarray:
        return self.history.times

    @property
    def temperature(self) -> np.ndarray:
        """Nodal temperature at the end of the run, °C."""
        return self.history.final

    def peak(self, shape: str) -> float:
        """The largest temperature of a shape over the run, °C."""
        return self.summary["transient"]["peaks"][shape]["max"]

    def save(self, out_dir, **options):
        """Write the same files as ``heat2d run`` into ``out_dir``."""
        from .output import save

        return save(self, out_dir, **options)

    def __repr__(self) -> str:
        tr = self.summary["transient"]
        hot = max(tr["peaks"].items(), key=lambda kv: kv[1]["max"])
        return (f"TransientResult({self.model.stem!r}: to {tr['end_s']:g} s in "
                f"{tr['steps']} steps; peak {hot[1]['max']:.4g} °C in {hot[0]!r} at "
                f"{hot[1]['time_s']:.4g} s; energy balance "
                f"{tr['energy_balance']['relative_error']:.1e})")


def run_transient(model, *, method: str = "auto", refine: float = 1.0,
                  progress: Progress | None = None, zth: bool | None = None,
                  check: bool = True) -> TransientResult:
    """Solve a transient model (one with a ``[transient]`` section) end to end.

    Parameters
    ----------
    model
        From :func:`heat2d.load`; ``model.transient`` holds the time settings.
    method
        Linear solver of the step matrices: ``auto``, ``direct`` or ``multigrid``.
    refine
        Divide every target edge length by this factor.
    progress
        Optional callback told when each stage starts and ends.
    zth
        Compute the impedance curves and networks; default the model's ``zth`` setting.
    check
        Estimate the time-step error of every peak (linear models: the local errors
        carried by the scheme; nonlinear ones: a second march on halved steps).

    Returns
    -------
    TransientResult
    """
    from .summary import build_summary

    settings = model.transient
    if settings is None:
        raise ValueError("the model has no [transient] section")
    timings: dict[str, float] = {}

    stage = stage_runner(progress, timings)

    check_outlines(model, refine=refine)
    geometry = stage("geometry", build_geometry, model, refine=refine)
    mesh = stage("mesh", build_mesh, geometry)
    system = stage("assembly", assemble, mesh)
    times = report_times(system, settings)
    initial = "steady" if settings.initial == "steady" else float(settings.start_temperature)
    cache = FactorCache()           # the marches of the run share their factorizations
    def advance(t: float, end: float) -> None:
        if progress:
            progress(f"march at t = {t:.3g} s of {end:g} s", "progress")

    history = stage("march", march, system, times=times, initial=initial,
                    tolerance=settings.tolerance, store_at=settings.snapshot_times(),
                    method=method, check=check, progress=advance, cache=cache)
    zth_on = settings.zth if zth is None else zth
    curves, networks, duty, periodic = {}, {}, {}, {}
    if zth_on:
        curves, networks = stage("impedance", impedances, system, times, settings, method,
                                 cache=cache, history=history if initial == "steady" else None)
        for name, net in networks.items():
            widths = _widths(times)
            duty[name] = {"widths": widths, "duties": tuple(settings.duties),
                          "peaks": duty_family(net["foster"].z, widths, settings.duties)}
        periodic = stage("periodic", periodic_figures, system, history, networks,
                         tolerance=settings.tolerance, method=method)
    result = TransientResult(system=system, history=history, zth=curves, networks=networks,
                             duty=duty, periodic=periodic, summary={},
                             log_time=settings.log_spaced)
    start = time.perf_counter()
    summary = build_summary(result, timings)
    summary["timings_s"]["summary"] = time.perf_counter() - start
    return replace(result, summary=summary)


MAX_EDGE_TIMES = 5000
"""Schedule edges (pulse starts and ends, table times) added to the report times, at most
this many (the earliest): the history then shows each pulse's peak and the time
series holds it."""


def report_times(system, settings) -> np.ndarray:
    """The model's report times with the schedules' edges (the temperature is continuous
    in time, so the value at a pulse's end is the peak that pulse reaches)."""
    times = settings.report_times()
    edges = forcing(system).breaks(float(times[-1]))[:MAX_EDGE_TIMES]
    return merge_times(np.concatenate([times, edges]), prefer=edges)


def powered_shapes(system) -> list[tuple[str, float]]:
    """(name, peak power W) of each shape with a power or schedule, in model order."""
    drive = forcing(system)
    out = []
    for i in drive.powered:
        shape = system.model.shapes[i]
        peak = shape.schedule.peak if shape.schedule is not None else shape.power
        out.append((shape.name, float(peak or 0.0)))
    return out


def impedances(system, times: np.ndarray, settings, method: str,
               cache: FactorCache | None = None, history: History | None = None
               ) -> tuple[dict, dict]:
    """Z(t) of a power step in each powered shape alone, and its Foster, Cauer and modal
    networks with the steady resistance as their total. ``history``: the run's own march
    from the steady state; where it is itself such a step (:func:`step_of`), that
    shape's curve is read from it instead of marching again."""
    model = system.model
    linear = not model.transient_nonlinear
    curves, networks = {}, {}
    if not linear:
        zero_state = steady_start(system, power={}, method=method)
    step = step_of(system, float(times[-1])) if history is not None and linear else None
    peaks = dict(powered_shapes(system))
    if step is not None and step[1] < STEP_SHARE * peaks.get(step[0], 0.0):
        step = None         # a small step on a large base: its own march is more accurate
    for name, peak in powered_shapes(system):
        index = model.shape(name).index
        if peak <= 0 or not np.any(system.mesh.triangle_shape == index):
            continue            # (a shape covered by later ones has no node to rise)
        # K per W: a rise of `tolerance` K at the shape's peak power.
        if step is not None and step[0] == name and history.shape_rise is not None:
            hist = history
            z = hist.shape_rise[:, index] / step[1]
            r_total, node = _steady_rise(system, name, method, cache)
        elif linear:
            r_total, node = _steady_rise(system, name, method, cache)
            tol = settings.tolerance / peak
            if peak * abs(r_total) > PLAUSIBLE_SPAN:
                # The march's own rule at the shape's peak power, from the first step on
                # (its rise is known here: the march from zero would learn it too late).
                tol = max(tol, RELATIVE_TOLERANCE * abs(r_total))
            hist = march(system, times=times, initial=0.0, power={name: 1.0},
                         boundary="zero", tolerance=tol, method=method, cache=cache,
                         plausible=PLAUSIBLE_SPAN / peak)
            z = hist.shape_max[:, index]
        else:
            hist = march(system, times=times, initial=zero_state, power={name: peak},
                         tolerance=settings.tolerance, method=method)
            base = hist.shape_max[0, index]
            z = (hist.shape_max[:, index] - base) / peak
            steady = steady_start(system, power={name: peak}, method=method)
            r_total = float((steady[_nodes(system, index)].max() - base) / peak)
            node = None
        t, zz = hist.times[1:], z[1:]
        if not r_total > 0 or not np.isfinite(r_total):
            continue
        foster = foster_fit(t, zz, r_total, terms=settings.foster_terms)
        try:
            ladder = cauer(foster)
        except SolveError:
            ladder = None
        modal = (_modal(system, name, node, method, cache) if linear and node is not None
                 else None)
        curves[name] = (hist.times, z)
        networks[name] = {"foster": foster, "cauer": ladder, "modal": modal,
                          "r_total": r_total, "linear": linear, "power_w": peak}
    return curves, networks


STEP_SHARE = 0.5
"""The run's own rise serves as a shape's impedance when its step ΔP is at least this
share of the shape's peak power: the run's error control (tolerance K) is then within a
factor 2 of the impedance march's (tolerance/peak K per W)."""


def step_of(system, end: float) -> tuple[str, float] | None:
    """(shape name, ΔP W) when a run of ``system`` from the steady state is a power step
    in one shape: a linear model whose inputs (powers, boundary values, h) hold from t = 0
    to ``end``, all as before t = 0 but that shape's power, which rises by ΔP at t = 0.
    By superposition the run's rise is then ΔP times that shape's unit step response."""
    drive = forcing(system)
    if (system.model.transient_nonlinear or drive.has_current or drive.conv
            or drive.fixed_fn or len(drive.breaks(end)) or not len(drive.powered)):
        return None
    # No break inside the run: a power can still change there only along a table's
    # straight segment (its knots outside the run), then its values at 0 and end differ.
    if not np.array_equal(drive.power(0.0), drive.power(end)):
        return None
    jump = drive.power(0.0) - drive.initial_power
    changed = np.flatnonzero(jump != 0)
    if len(changed) != 1 or not jump[changed[0]] > 0:
        return None
    i = int(changed[0])
    return system.model.shapes[drive.powered[i]].name, float(jump[i])


def _steady_rise(system, name: str, method: str, cache: FactorCache | None = None
                 ) -> tuple[float, int]:
    """Steady max rise of shape ``name`` per watt in it (K/W) and the node where it is
    (with the steady factor the run's start kept in ``cache``, when there is one)."""
    drive = forcing(system, {name: 1.0}, "zero")
    unit = replace(system, F=drive.F(0.0), fixed_value=np.zeros(len(system.fixed)))
    factor = cache.steady_factor(system) if cache is not None else None
    if method == "auto" and len(system.K.indptr) - 1 < DIRECT_LIMIT:
        method = "direct"       # as the marches: a unit load can take multigrid CG long
    solution = solve(unit, method=method, factor=factor)
    if cache is not None:
        cache.keep_steady(system, solution.factor)
    T = solution.temperature
    tri = system.mesh.triangles[system.mesh.triangle_shape == system.model.shape(name).index]
    nodes = np.unique(tri)
    node = int(nodes[np.argmax(T[nodes])])
    return float(T[node]), node


def _modal(system, name: str, node: int, method: str, cache: FactorCache | None = None):
    """The exact network of the discrete model from K φ = λ C φ, observed at ``node``
    (shift-invert with the steady factor ``cache`` keeps, when it is a direct one)."""
    n = system.K.shape[0]
    free = np.ones(n, dtype=bool)
    free[system.fixed] = False
    count = int(free.sum())
    if count < 3 or count > MODAL_LIMIT:
        return None
    K = system.K.tocsr()[free][:, free].tocsc()
    C = capacity(system)[0][free]
    p = np.asarray(forcing(system, {name: 1.0}, "zero").B.todense()).ravel()[free]
    w = np.zeros(n)
    w[node] = 1.0
    factor = cache.steady_factor(system) if cache is not None else None
    inverse = factor if getattr(factor, "method", None) == "direct" else None
    return modal_network(K, C, p, w[free], count=min(MODES, count - 2), inverse=inverse)


def periodic_figures(system, history: History, networks: dict, *, tolerance: float = 0.01,
                     method: str = "auto") -> dict:
    """For each shape with a repeating pulse train: the peak in periodic steady state.

    Linear models, by superposition of the step response (the Foster network):
    T = T_base + (P_pulse − P_base)·[Z(tp) + Σ (Z(nT + tp) − Z(nT))], with T_base the
    steady max of the shape at the powers between pulses (the start state when it is
    steady). Nonlinear models: by marching the repeating train (:func:`march_periodic`)
    until the peak changes by less than ``tolerance`` K from one period to the next.
    """
    out = {}
    for shape in system.model.shapes:
        s = shape.schedule
        if s is None or s.kind != "pulse" or s.period is None or shape.name not in networks:
            continue
        net = networks[shape.name]
        entry = {"pulse_w": s.amplitude, "between_w": s.base, "width_s": s.width,
                 "period_s": s.period, "duty": s.width / s.period}
        if net["linear"]:
            try:
                factor = periodic_peak(net["foster"].z, 1.0, s.width, s.period)
            except SolveError as exc:
                raise exc.located(file=system.model.source,
                                  entry=f'shape "{shape.name}" power_pulse') from None
            base = float(history.shape_max[0, shape.index])
            if system.model.transient.initial != "steady":
                base = _steady_max(system, shape.name, s.base, method)
            peak = float(base + (s.amplitude - s.base) * factor)
            entry.update(rise_per_w=float(factor), peak=peak,
                         method="superposition of the step response")
        else:
            peak, periods = march_periodic(system, shape.name, tolerance=tolerance,
                                           method=method)
            entry.update(peak=peak, periods=periods, tolerance_k=tolerance,
                         method="marched to periodicity")
        out[shape.name] = entry
    return out


MAX_PERIODS = 400
"""Periods a nonlinear pulse train is marched for at most, from the steady state at its
mean power, before its periodic peak is reported as not settled."""


def march_periodic(system, name: str, *, tolerance: float = 0.01, method: str = "auto",
                   block: int = 8) -> tuple[float, int]:
    """Peak of shape ``name`` in the periodic steady state of its repeating pulse train
    (every other source as scheduled), marched from the steady state at the train's mean
    power, so that mainly the ripple has to settle, in blocks of ``block`` periods.
    Returns (peak °C, periods marched).

    Raises
    ------
    SolveError
        The peak still changes by more than ``tolerance`` after :data:`MAX_PERIODS`.
    """
    model = system.model
    shape = model.shape(name)
    s = replace(shape.schedule, count=None, delay=0.0)
    mean = s.base + (s.amplitude - s.base) * s.width / s.period
    sources = _sources(model)
    state = steady_start(system, power={**sources, name: mean}, method=method)
    ends = s.width + s.period * np.arange(block)
    times = np.append(ends, s.period * block)       # the block ends on a whole period
    last, periods = None, 0
    while periods < MAX_PERIODS:
        hist = march(system, times=times, initial=state, power={**sources, name: s},
                     tolerance=tolerance, method=method)
        peaks = hist.shape_max[1:-1, shape.index]
        if last is not None:
            peaks = np.concatenate([[last], peaks])
        periods += block
        if abs(peaks[-1] - peaks[-2]) < tolerance:
            return float(peaks[-1]), periods
        last, state = float(peaks[-1]), hist.final    # the train repeats: restart at 0
    raise SolveError(f"the periodic peak of shape \"{name}\" still changes by more than "
                     f"{tolerance:g} K per period after {MAX_PERIODS} periods",
                     file=model.source, entry=f'shape "{name}"')


def _sources(model) -> dict:
    """Every powered shape's schedule or constant power, for ``march(power=...)``."""
    return {sh.name: (sh.schedule if sh.schedule is not None else sh.power)
            for sh in model.shapes if sh.schedule is not None or
            (sh.power is not None and sh.power_density is None)}


def _steady_max(system, name: str, power: float, method: str) -> float:
    """Steady max of shape ``name`` with every source at its power before t = 0 and this
    one at ``power``."""
    model = system.model
    state = steady_start(system, power={**_sources(model), name: power}, method=method)
    return float(state[_nodes(system, model.shape(name).index)].max())


def _nodes(system, index: int) -> np.ndarray:
    """The nodes of shape ``index``."""
    mesh = system.mesh
    return np.unique(mesh.triangles[mesh.triangle_shape == index])


def _widths(times: np.ndarray) -> np.ndarray:
    """Pulse widths for the duty family: 10 per decade across the report times."""
    lo, hi = float(times[0]), float(times[-1])
    count = max(int(round(10 * np.log10(hi / lo))) + 1, 2)
    return np.logspace(np.log10(lo), np.log10(hi), count)
