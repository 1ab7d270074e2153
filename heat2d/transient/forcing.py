"""What drives a transient: powers, boundary values and their schedules as functions of time.

Everything is held as a change from the assembled steady system: F(t) = F + B (P(t) − P₀)
+ Σ_b (h_b(t) T∞_b(t) − h_b T∞_b) L_b, K(t) = K + Σ_b (h_b(t) − h_b) M_b, and the fixed
temperatures T_d(t) of each fixed node's owning entry. B holds, per powered shape, the
load vector of 1 W spread over the shape's meshed volume (as the assembly spreads a
shape's ``power``); L_b = ∫ φ_i dS and M_b = ∫ φ_i φ_j dS over the edges of entry b.

Conductors (:func:`heat2d.fem.joule.conductors`) carry their current schedules here: the
current of each at t (:meth:`Forcing.currents`, with the left limit of pulses and steps as
the powers) and the Joule load and power at a temperature field (:meth:`Forcing.joule`,
:meth:`Forcing.joule_power`), which depend on T; :meth:`Forcing.total_power` given T
includes the I²R loss. The Joule load is not part of :meth:`Forcing.F`.
"""

from __future__ import annotations

from collections.abc import Callable, Mapping
from dataclasses import dataclass, field

import numpy as np
import scipy.sparse as sp

from ..errors import ModelError
from ..fem.joule import conductors, joule_state

Value = Callable[[float], float]


def _value(spec) -> tuple[Value, Callable[[float], np.ndarray]]:
    """A number, a Schedule (``at``, ``breaks``) or a callable -> (value, breaks).

    The value takes an optional ``left`` (s): the step that ends at t, for the left
    limit of a piecewise-constant schedule (its value inside that step, which never
    straddles a break)."""
    if hasattr(spec, "at"):
        if getattr(spec, "kind", "linear") in ("pulse", "steps"):
            return (lambda t, left=None: float(spec.at(t if left is None else t - left / 2))
                    ), spec.breaks
        return (lambda t, left=None: float(spec.at(t))), spec.breaks
    if callable(spec):
        return (lambda t, left=None: float(spec(t))), (lambda end: np.zeros(0))
    c = float(spec)
    return (lambda t, left=None: c), (lambda end: np.zeros(0))


def _initial(spec) -> float:
    """The value just before t = 0."""
    if hasattr(spec, "initial"):
        return float(spec.initial)
    if callable(spec):
        return float(spec(0.0))
    return float(spec)


MAX_BREAKS = 1000
"""Most changes of the schedules (pulse edges, table knots) within a run: each restarts
the time step, and a pulse costs about 15 steps (measured on the bundled pulsed switch:
200 pulses, 6048 steps, 29 s at 5 600 nodes), so a pulse train left without a count
over a long run (20 000 pulses) would march for an hour."""


@dataclass
class Forcing:
    """F(t), K(t) − K and T_d(t) of one system (build with :func:`forcing`)."""

    system: object
    powered: list[int]                 # shape indices with a power source
    power_fn: list[Value]
    B: sp.csr_matrix                   # (n, len(powered)) load of 1 W per powered shape
    base_power: np.ndarray             # the power each shape has in system.F
    F_base: np.ndarray                 # system.F without the powered shapes' generation
    conv: list[tuple]                  # (index, h(t), T∞(t), L_b, M_b, h0, a0) scheduled
    fixed_owner: np.ndarray            # boundary index owning each fixed node
    fixed_fn: dict[int, Value]         # scheduled fixed temperatures by boundary index
    breaks_list: list[Callable[[float], np.ndarray]]
    initial_power: np.ndarray          # power of each powered shape just before t = 0
    constant_power: float              # power_density generation, W
    zero: bool = False
    found: tuple = ()                  # fem.joule.Conductor of each current
    current_fn: list[Value] = field(default_factory=list)
    initial_current: np.ndarray = field(default_factory=lambda: np.zeros(0))
    meshed: np.ndarray | None = None   # per powered shape: has triangles (else no load)

    @property
    def varies_matrix(self) -> bool:
        return any(c[1] is not None for c in self.conv)

    def power(self, t: float, left: float | None = None) -> np.ndarray:
        """Power of each powered shape at t (W); with ``left``, the left limit at the end
        of a step of that length."""
        return np.array([f(t, left) for f in self.power_fn])

    def total_power(self, t: float, left: float | None = None,
                    T: np.ndarray | None = None) -> float:
        """All generated power at t, W; with the nodal temperatures T (°C), the Joule
        loss of the conductors too (it depends on T; without T it is left out)."""
        joule = self.joule_power(T, t, left) if T is not None else 0.0
        p = self.power(t, left)
        if self.meshed is not None and len(p):
            p = p[self.meshed]          # a shape covered whole puts no heat in
        return float(p.sum()) + self.constant_power + joule

    @property
    def has_current(self) -> bool:
        """True when a conductor carries a current (it may be zero at times)."""
        return bool(self.found)

    def currents(self, t: float, left: float | None = None) -> np.ndarray:
        """Current of each conductor at t (A), in the order of ``found``; with ``left``,
        the left limit at the end of a step of that length."""
        return np.array([f(t, left) for f in self.current_fn], dtype=float)

    def joule(self, T: np.ndarray, t: float, left: float | None = None):
        """The :class:`~heat2d.fem.joule.JouleState` at nodal temperatures T and the
        currents at t, or None without conductors."""
        if not self.found:
            return None
        return joule_state(self.system, T, self.found, 1.0, self.currents(t, left))

    def joule_power(self, T: np.ndarray, t: float, left: float | None = None) -> float:
        """The I²R loss over the depth at (T, t), W: the sum of the nodal Joule loads
        (as the march's residual holds them)."""
        st = self.joule(T, t, left)
        return 0.0 if st is None else float(st.load.sum())

    def F(self, t: float, powers: np.ndarray | None = None,
          left: float | None = None) -> np.ndarray:
        F = self.F_base + self.B @ (self.power(t, left) if powers is None else powers)
        for _, hf, af, L_b, _, h0, a0 in self.conv:
            h = hf(t) if hf else h0
            a = af(t) if af else a0
            F = F + (h * a - h0 * a0) * L_b
        return F

    def dK(self, t: float) -> sp.csr_matrix | None:
        """K(t) − K where an h follows a table, else None."""
        out = None
        for _, hf, _, _, M_b, h0, _ in self.conv:
            if hf is not None:
                term = (hf(t) - h0) * M_b
                out = term if out is None else out + term
        return out

    def fixed_values(self, t: float) -> np.ndarray:
        """Temperatures of the fixed nodes at t, °C."""
        s = self.system
        values = np.zeros(len(s.fixed)) if self.zero else s.fixed_value.copy()
        for b, f in self.fixed_fn.items():
            values[self.fixed_owner == b] = f(t)
        return values

    def convection_change(self, T: np.ndarray, t: float) -> np.ndarray:
        """Per boundary entry, the heat out of scheduled convection minus the steady
        system's (what :meth:`System.edge_heat_out` misses), W."""
        out = np.zeros(len(self.system.model.boundaries))
        for b, hf, af, L_b, _, h0, a0 in self.conv:
            h = hf(t) if hf else h0
            a = af(t) if af else a0
            lt, area = L_b @ T, L_b.sum()
            out[b] = h * (lt - a * area) - h0 * (lt - a0 * area)
        return out

    def breaks(self, end: float, limit: bool = False) -> np.ndarray:
        """The times in (0, end] where a schedule changes; ``limit``: refuse more than
        :data:`MAX_BREAKS` (bad input)."""
        found = [np.asarray(f(end), dtype=float) for f in self.breaks_list]
        allb = np.concatenate(found) if found else np.zeros(0)
        out = np.unique(allb[(allb > 0) & (allb <= end)])
        if limit and len(out) > MAX_BREAKS:
            raise ModelError(f"the schedules change {len(out)} times within the run, more "
                             f"than {MAX_BREAKS} (each change restarts the time step): give "
                             "the pulse train a count, or shorten end; the periodic figures "
                             "give the peak of a train repeated for ever",
                             file=self.system.model.source, entry="[transient]")
        return out


def forcing(system, power: Mapping[str, object] | None = None,
            boundary: str | None = None) -> Forcing:
    """The forcing of ``system``.

    Parameters
    ----------
    power
        None: each shape's ``schedule`` (if it has one) or its ``power``. A mapping shape
        name -> number (W), Schedule or callable of t: exactly these shapes are powered
        (every other shape, ``power_density`` ones included, carries none, and no
        conductor carries a current).
    boundary
        None: the model's boundary values and their schedules. ``"zero"``: every boundary
        value zero (fixed temperatures, ambients, imposed fluxes), for the rise above the
        boundaries of a linear model (thermal impedance).
    """
    mesh, model, L = system.mesh, system.model, system.layout
    n = L.n
    tri = mesh.triangles
    ns = len(model.shapes)
    volume = L.volume
    shape_volume = np.bincount(mesh.triangle_shape, volume, minlength=ns)
    F_gen = np.bincount(tri.ravel(), (system.qdot[:, None] * L.source).ravel(), minlength=n)
    if power is None:
        powered, fns, breaks, first = [], [], [], []
        for i, sh in enumerate(model.shapes):
            schedule = getattr(sh, "schedule", None)
            if schedule is not None or (sh.power is not None and sh.power_density is None):
                powered.append(i)
                spec = schedule if schedule is not None else sh.power
                f, br = _value(spec)
                fns.append(f)
                breaks.append(br)
                first.append(_initial(spec))
        keep = F_gen.copy()
        base = np.array([model.shapes[i].power or 0.0 for i in powered])
    else:
        names = {sh.name: i for i, sh in enumerate(model.shapes)}
        unknown = sorted(set(power) - set(names))
        if unknown:
            raise ModelError("no such shape to power", file=model.source,
                             entry=f"shape \"{unknown[0]}\"")
        powered = [names[k] for k in power]
        pairs = [_value(v) for v in power.values()]
        fns, breaks = [p[0] for p in pairs], [p[1] for p in pairs]
        first = [_initial(v) for v in power.values()]
        keep = np.zeros(n)
        base = np.zeros(len(powered))
    # B: 1 W spread over each powered shape's meshed volume.
    col = np.full(ns, -1)
    col[powered] = np.arange(len(powered))
    in_powered = col[mesh.triangle_shape] >= 0
    with np.errstate(divide="ignore", invalid="ignore"):
        unit = np.where(shape_volume > 0, 1.0 / shape_volume, 0.0)[mesh.triangle_shape]
    rows = tri[in_powered].ravel()
    cols = np.repeat(col[mesh.triangle_shape][in_powered], 3)
    vals = (unit[in_powered, None] * L.source[in_powered]).ravel()
    B = sp.csr_matrix((vals, (rows, cols)), shape=(n, max(len(powered), 0)))
    if power is None:
        F_base = system.F - B @ base if len(powered) else system.F.copy()
    else:
        F_base = system.F - F_gen + keep
    zero = boundary == "zero"
    if zero:
        if system.nonlinear:
            raise ModelError("the rise above zeroed boundary values (boundary='zero') "
                             "needs a linear model", file=model.source)
        F_base = (F_gen - B @ base) if power is None else np.zeros(n)
    conv: list[tuple] = []
    fixed_fn: dict[int, Value] = {}
    owner = np.full(n, np.iinfo(np.int64).max)
    is_fixed = ~np.isnan(system.edge["temperature"])
    np.minimum.at(owner, mesh.edges[is_fixed].ravel(),
                  np.repeat(mesh.edge_boundary[is_fixed], 2).astype(np.int64))
    for bc in model.boundaries:
        sched = dict(getattr(bc, "schedules", ()) or ())
        if zero or not sched:
            continue
        if "temperature" in sched:
            fixed_fn[bc.index] = _value(sched["temperature"])[0]
            breaks.append(sched["temperature"].breaks)
        if "h" in sched or "ambient" in sched:
            sel = mesh.edge_boundary == bc.index
            e = mesh.edges[sel]
            L_b = np.bincount(e.ravel(), L.edge_load[sel].ravel(), minlength=n)
            M_b = sp.csr_matrix((L.edge_mass[sel].ravel(),
                                 (np.repeat(e, 2, axis=1).ravel(), np.tile(e, (1, 2)).ravel())),
                                shape=(n, n))
            hf = _value(sched["h"])[0] if "h" in sched else None
            af = _value(sched["ambient"])[0] if "ambient" in sched else None
            for key in ("h", "ambient"):
                if key in sched:
                    breaks.append(sched[key].breaks)
            conv.append((bc.index, hf, af, L_b, M_b, float(bc.h or 0.0),
                         float(bc.ambient or 0.0)))
    found, cur_fn, cur_first = (), [], []
    if power is None and model.has_current:
        found = conductors(system)
        specs = {}
        for item in (*model.shapes, *model.groups):
            if getattr(item, "current", None) is not None:
                sched = getattr(item, "current_schedule", None)
                specs[item.name] = sched if sched is not None else item.current
        for cond in found:
            f, br = _value(specs[cond.name])
            cur_fn.append(f)
            breaks.append(br)
            cur_first.append(_initial(specs[cond.name]))
    return Forcing(system=system, powered=powered, power_fn=fns, B=B.tocsr(),
                   base_power=base, F_base=F_base, conv=conv,
                   fixed_owner=owner[system.fixed], fixed_fn=fixed_fn, breaks_list=breaks,
                   initial_power=np.array(first, dtype=float),
                   constant_power=float((F_base if zero else F_gen - B @ base).sum())
                   if power is None else 0.0, zero=zero, found=found, current_fn=cur_fn,
                   initial_current=np.array(cur_first, dtype=float),
                   meshed=shape_volume[np.asarray(powered, dtype=int)] > 0)
