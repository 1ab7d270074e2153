"""What a transient march reports: figures at the report times, snapshots, the energy balance.

:class:`History` is the frozen record; :class:`Recorder` fills it as the march lands on
each report time. Shape figures are those of :func:`heat2d.post.resistance.shape_stats` (the
max over the shape's nodes; the mean ∫T dV / V = Σ_i T_i ∫φ_i dV / V, exact for linear
elements), as one sparse product per report time; heat through fixed-temperature boundaries
is the residual R = dH/dt + K T − F at the fixed nodes (what the reservoir takes, with
the capacity of the fixed nodes counted in the stored heat), shared among the fixed edges
as in the steady results.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

import numpy as np
import scipy.sparse as sp

from ..fem.capacity import capacity, stored_heat, varies
from ..post.resistance import share_reactions
from ..post.results import probe_weights

ROUNDOFF = 1e-9
"""Relative accuracy of the solves (a steady start is exact to about 1e-11 of its
temperatures; relaxing that residue moves heat). An energy gap below it times (heat
content Σ Cᵢ + boundary conductance × run length) × max(1 K, |T|) is round-off, and the
run is balanced (an unpowered run at one temperature has nothing else)."""


@dataclass(frozen=True, repr=False, eq=False)
class History:
    """Figures of a transient at its report times (the first row is t = 0).

    Attributes
    ----------
    times : (r,) s
    shape_max, shape_mean : (r, S) °C per model shape (NaN for voids)
    probes : (r, P) °C
    heat_out : (r, B) W per boundary entry (positive leaving; an imposed flux into the
        body is negative)
    stored : (r,) J, heat stored since t = 0 (Σ_i ∫ C_i dT)
    power_in : (r,) W generated
    snapshot_times : (k,) s; snapshots : (k, n) °C nodal fields
    steps : (q,) s, the step sizes taken; step_ends : (q,) s
    error : (r,) K, estimate of the time-step error of the largest temperature (NaN
        unless marched with ``check=True``)
    energy : input_j, stored_j, out_j, relative_error (over the whole run, with the
        scheme's own quadrature in time)
    peak_max, peak_time : (S,) the largest temperature of each shape over all step ends
        and when; peak_error : (S,) K, its time-step error estimate (NaN unless
        ``check=True``)
    final : (n,) °C, the nodal field at the end
    coldest : °C, the lowest nodal temperature over the run (start and step ends)
    hottest : (n,) °C, the nodal field at the step end where the largest nodal
        temperature of the run occurred; hottest_time : s, that step end
    stats : counts of factorizations, solves, rejected steps, the solver used
    shape_rise : (r, S) K, the largest rise of each shape above its state at t = 0
        (max over its nodes of T − T(0); NaN for voids)
    """

    times: np.ndarray
    shape_max: np.ndarray
    shape_mean: np.ndarray
    probes: np.ndarray
    heat_out: np.ndarray
    stored: np.ndarray
    power_in: np.ndarray
    snapshot_times: np.ndarray
    snapshots: np.ndarray
    steps: np.ndarray
    step_ends: np.ndarray
    error: np.ndarray
    energy: dict
    peak_max: np.ndarray
    peak_time: np.ndarray
    peak_error: np.ndarray
    shape_names: tuple[str, ...] = ()
    probe_names: tuple[str, ...] = ()
    boundary_names: tuple[str, ...] = ()
    stats: dict = field(default_factory=dict)
    final: np.ndarray | None = None
    hottest: np.ndarray | None = None
    hottest_time: float = 0.0
    coldest: float = np.nan
    shape_rise: np.ndarray | None = None

    def peaks(self) -> dict[str, dict[str, float]]:
        """Per non-void shape: the largest temperature over the run (°C), when (s), and
        the time-step error estimate of that peak (K; NaN when none was made)."""
        return {name: {"max": float(self.peak_max[i]), "time_s": float(self.peak_time[i]),
                       "max_error": float(self.peak_error[i])}
                for i, name in enumerate(self.shape_names) if np.isfinite(self.peak_max[i])}

    def __repr__(self) -> str:
        return (f"History({len(self.times)} report times to {self.times[-1]:.6g} s, "
                f"{len(self.steps)} steps, energy error "
                f"{self.energy.get('relative_error', np.nan):.1e})")


class Recorder:
    """Collects a march's figures at report times, step-end peaks and the energy sums."""

    def __init__(self, system, drive, T0: np.ndarray, rho_c, times, store_at) -> None:
        self.system, self.drive, self.T0, self.rho_c = system, drive, T0, rho_c
        mesh, model = system.mesh, system.model
        self.times = np.asarray(times, dtype=float)
        self.store_at = np.asarray(store_at, dtype=float)
        self.rows: list[dict[str, Any]] = []
        self.snaps: list[np.ndarray] = []
        self.snap_times: list[float] = []
        ns = len(model.shapes)
        # Each shape's nodes, one after another (a node may be in several shapes), for one
        # reduceat per step instead of one max per shape.
        # (shape, node) pairs as one int64 key each: a 1-D unique (a row-wise unique of a
        # two-column array sorts structured rows, seconds on a large mesh).
        nn = np.int64(len(mesh.points))
        keys = np.unique(np.repeat(mesh.triangle_shape, 3).astype(np.int64) * nn
                         + mesh.triangles.ravel())
        shape_of_pair = keys // nn
        self.node_of_pair = keys % nn
        self.has_nodes = np.bincount(shape_of_pair, minlength=ns) > 0
        self.starts = np.searchsorted(shape_of_pair, np.flatnonzero(self.has_nodes))
        # ∫T dV per shape = W T (W: ∫φ_i dV of each shape's triangles), as shape_stats.
        src = system.layout.source
        self.weights = sp.csr_matrix(
            (src.ravel(), (np.repeat(mesh.triangle_shape, 3), mesh.triangles.ravel())),
            shape=(ns, len(mesh.points)))
        self.volumes = np.asarray(self.weights.sum(axis=1)).ravel()
        self.linear_heat = None if varies(system, rho_c) else capacity(system, None, rho_c)[0]
        self.peak = np.full(ns, -np.inf)
        self.peak_time = np.zeros(ns)
        self.hot_max = -np.inf
        self.coldest = np.inf
        self.hottest: np.ndarray | None = None
        self.hottest_time = 0.0
        self.probe_w = [probe_weights(mesh, p.x, p.y) for p in model.probes]
        self.is_fixed = ~np.isnan(system.edge["temperature"])
        self.rest = ~self.is_fixed & (mesh.edge_boundary >= 0)
        self.energy_in = 0.0
        self.energy_out = 0.0
        self.energy_gross = 0.0
        # Round-off of the stored heat Σ Cᵢ (Tᵢ − T0ᵢ): a few thousand ulps of the heat
        # content at the run's temperatures (an unpowered uniform run balances at it).
        heat = capacity(system, T0, rho_c)[0].sum()
        # ... and of the heat flows over the run: the conductance to the boundaries
        # (convection ∫h dS, fixed nodes' diagonal) times the temperatures, times its length.
        edge_g = float((np.nan_to_num(system.edge["h"]) * system.layout.edge_load.sum(axis=1)
                        ).sum())
        fixed_g = float(np.abs(system.K.diagonal()[system.fixed]).sum())
        end = float(self.times[-1]) if len(self.times) else 0.0
        self.roundoff = ROUNDOFF * max(1.0, float(np.abs(T0).max())) * (
            heat + (edge_g + fixed_g) * end)
        self.steps: list[float] = []
        self.flags: list[bool] = []
        self.ends: list[float] = []

    def edge_out(self, T: np.ndarray, t: float) -> np.ndarray:
        """Heat out per boundary entry by convection, radiation and flux at (T, t), W."""
        s, mesh = self.system, self.system.mesh
        nb = len(s.model.boundaries)
        out = s.edge_heat_out(T)
        if self.drive.zero:
            L = s.layout
            out = (s.edge["h"][:, None] * L.edge_mass.sum(axis=1) * T[mesh.edges]).sum(axis=1)
        heat = np.bincount(mesh.edge_boundary[self.rest], out[self.rest], minlength=nb)[:nb]
        return heat + self.drive.convection_change(T, t)

    def track(self, T: np.ndarray, t: float) -> np.ndarray:
        """Step-end peaks of each shape, and the field of the hottest moment (copied only
        when a new overall max appears); returns which shapes' peaks rose."""
        top = float(T.max()) if len(T) else -np.inf
        self.coldest = min(self.coldest, float(T.min())) if len(T) else self.coldest
        if top > self.hot_max or self.hottest is None:
            self.hot_max, self.hottest, self.hottest_time = top, T.copy(), t
        maxima = self.shape_maxima(T)
        higher = maxima > self.peak
        self.peak[higher], self.peak_time[higher] = maxima[higher], t
        return higher

    def shape_maxima(self, T: np.ndarray) -> np.ndarray:
        """The largest nodal temperature of each shape (−inf for a shape with no node)."""
        out = np.full(len(self.has_nodes), -np.inf)
        if len(self.starts):
            out[self.has_nodes] = np.maximum.reduceat(T[self.node_of_pair], self.starts)
        return out

    def shape_argmax(self, T: np.ndarray) -> np.ndarray:
        """The node of each shape's largest temperature (−1 for a shape with no node)."""
        out = np.full(len(self.has_nodes), -1)
        if len(self.starts):
            vals = T[self.node_of_pair]
            top = np.maximum.reduceat(vals, self.starts)
            counts = np.diff(np.append(self.starts, len(vals)))
            hit = np.flatnonzero(vals == np.repeat(top, counts))
            out[self.has_nodes] = self.node_of_pair[hit[np.searchsorted(hit, self.starts)]]
        return out

    def record(self, T: np.ndarray, t: float, reaction: np.ndarray,
               left: float | None = None) -> None:
        """Figures at a report time; ``reaction`` is R at the fixed nodes (W, heat in);
        powers as at the end of the step of length ``left`` that reached t."""
        s, mesh = self.system, self.system.mesh
        with np.errstate(invalid="ignore", divide="ignore"):
            means = np.where(self.volumes > 0, (self.weights @ T) / self.volumes, np.nan)
        maxima = np.where(self.has_nodes, self.shape_maxima(T), np.nan)
        stored = (float((self.linear_heat * (T - self.T0)).sum())
                  if self.linear_heat is not None
                  else float(stored_heat(s, T, self.T0, self.rho_c).sum()))
        nb = len(s.model.boundaries)
        heat = np.zeros(nb + 1)
        R = np.zeros(len(T))
        R[s.fixed] = reaction
        share_reactions(heat, R, mesh, self.is_fixed, s.layout.edge_load)
        heat = heat[:nb] + self.edge_out(T, t)
        self.rows.append({
            "max": maxima,
            "rise": np.where(self.has_nodes, self.shape_maxima(T - self.T0), np.nan),
            "mean": means,
            "probes": [float(w @ T[mesh.triangles[k]]) for k, w in self.probe_w],
            "heat": heat,
            "stored": stored,
            "power": self.drive.total_power(t, left, T),
            "tmax": float(T.max()),
        })

    def snapshot(self, T: np.ndarray, t: float) -> None:
        self.snaps.append(T.copy())
        self.snap_times.append(t)

    def history(self, final: np.ndarray, stats: dict, error: np.ndarray | None = None,
                peak_error: np.ndarray | None = None) -> History:
        model = self.system.model
        rows = self.rows
        stored = np.array([r["stored"] for r in rows])
        e_in, e_out, e_st = self.energy_in, self.energy_out, float(stored[-1])
        scale = max(abs(e_in), abs(e_out), abs(e_st), self.energy_gross, 1e-300)
        gap = e_in - e_st - e_out
        relative = 0.0 if abs(gap) <= self.roundoff else abs(gap) / scale
        ns = len(model.shapes)
        names = tuple(sh.name for sh in model.shapes)
        peak = np.where(np.isfinite(self.peak), self.peak, np.nan)
        return History(
            times=np.concatenate([[0.0], self.times]),
            shape_max=np.array([r["max"] for r in rows]).reshape(len(rows), ns),
            shape_mean=np.array([r["mean"] for r in rows]).reshape(len(rows), ns),
            probes=np.array([r["probes"] for r in rows]).reshape(len(rows), -1),
            heat_out=np.array([r["heat"] for r in rows]),
            stored=stored, power_in=np.array([r["power"] for r in rows]),
            snapshot_times=np.array(self.snap_times),
            snapshots=(np.array(self.snaps) if self.snaps
                       else np.zeros((0, len(final)))),
            steps=np.array(self.steps), step_ends=np.array(self.ends),
            error=(np.full(len(rows), np.nan) if error is None else error),
            energy={"input_j": e_in, "stored_j": e_st, "out_j": e_out,
                    "through_j": self.energy_gross, "roundoff_j": self.roundoff,
                    "relative_error": relative},
            peak_max=peak, peak_time=self.peak_time.copy(),
            peak_error=(np.full(ns, np.nan) if peak_error is None else peak_error),
            shape_names=names, probe_names=tuple(p.name for p in model.probes),
            boundary_names=tuple(b.name for b in model.boundaries), stats=stats,
            final=final, hottest=(final if self.hottest is None else self.hottest),
            hottest_time=float(self.hottest_time),
            coldest=float(min(self.coldest, float(final.min()))),
            shape_rise=np.array([r["rise"] for r in rows]).reshape(len(rows), ns))
