"""Stage 6: :class:`~heat2d.solve.Solution` -> :class:`Result`: fluxes, hot spot, heat flows.

Boundary heat at fixed-temperature edges comes from the reactions of the
assembled system (R = K T − F at the fixed nodes), so the energy balance closes
to the solver's residual; convection and heat-flux edges are integrated exactly
for linear temperature along the edge.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

import numpy as np

from ..errors import ModelError
from ..fem.geometry import circle_sides
from ..fem.sanity import check_finite
from ..fem.solver import Solution
from ..version import __version__
from .cuts import cut_figures, cut_heat
from .resistance import resistances as per_source
from .resistance import shape_stats, share_reactions, surface_means

REACTION_ROUNDOFF = 1e-6
"""Warn when the reactions' round-off bound exceeds this fraction of the balance scale."""
IMPLAUSIBLE_C = 1500.0
"""A field hotter than this (°C) is past the melting point of copper (1085 °C) and of
every laminate, solder and silicon (1414 °C) (handbook values, from memory): a slip in a
power or unit, not a result."""


def implausible(hottest: float) -> list[str]:
    """The warning for a field hotter than :data:`IMPLAUSIBLE_C` (a list: empty or one)."""
    if not hottest > IMPLAUSIBLE_C:
        return []
    return [f"the model reaches {hottest:.4g} °C, past the melting point of every board "
            "and package material: check the powers, power densities and units"]


CONDUCTOR_CAUTION = (
    "A 2-D section takes each conductor as long and straight: no end effects, no AC skin "
    "effect, no current crowding at vias or connectors; the current ratings of the board "
    "standards and the fusing of real parts take precedence.")
UNTRUSTED_BALANCE = 1e-3
"""An ill-conditioned system whose energy balance is open by more than this is refused as
input: its heat flows are round-off, not results."""
ROUNDOFF_FLOWS = 100.0
"""With nothing powered, boundary flows below this many times the reactions' round-off
bound are round-off, not heat: the balance is then 0 by definition."""

CAUTION = (
    "Estimates only: a 2-D section of an idealised model. Confirm against measurements and "
    "component ratings; product-safety standards, local codes and qualified engineering "
    "review take precedence over these results."
)


@dataclass(frozen=True, repr=False, eq=False)
class Result:
    """A solved model: fields as numpy arrays and the summary figures.

    Attributes
    ----------
    solution
        Nodal temperatures and solver record.
    heat_flux : (m, 2) float
        Heat flux per triangle, W/m².
    summary
        The figures written to ``summary.json``.
    """

    solution: Solution
    heat_flux: np.ndarray
    summary: dict[str, Any] = field(compare=False)

    @property
    def mesh(self):
        return self.solution.mesh

    @property
    def model(self):
        return self.solution.model

    @property
    def temperature(self) -> np.ndarray:
        """Nodal temperature, °C."""
        return self.solution.temperature

    @property
    def max_temperature(self) -> float:
        return self.summary["temperature"]["max"]

    @property
    def hot_spot(self) -> dict[str, Any]:
        return self.summary["hot_spot"]

    def save(self, out_dir, **options):
        """Write the same files as ``heat2d run`` into ``out_dir``; see
        :func:`heat2d.post.writers.write`."""
        from .writers import write

        return write(self, out_dir, **options)

    def temperature_at(self, x: float, y: float) -> float:
        """Temperature (°C) at a point of the body, interpolated linearly in its triangle."""
        tri, bary = locate(self.mesh.points, self.mesh.triangles, x, y,
                           self.mesh.geometry.tolerance, self.mesh.triangle_shape)
        if tri < 0:
            raise ValueError(f"point ({x:g}, {y:g}) is not in the body")
        return float(bary @ self.temperature[self.mesh.triangles[tri]])

    def __repr__(self) -> str:
        hs = self.summary["hot_spot"]
        eb = self.summary["energy_balance"]
        return (f"Result({self.model.stem!r}: max {hs['temperature']:.4g} °C in {hs['shape']!r} "
                f"at ({hs['x']:.4g}, {hs['y']:.4g}); power {eb['power_in_w']:.4g} W, balance "
                f"{eb['relative_error']:.1e}; {len(self.mesh.points)} nodes)")


def locate(points: np.ndarray, triangles: np.ndarray, x: float, y: float,
           tol: float = 0.0, rank: np.ndarray | None = None) -> tuple[int, np.ndarray]:
    """The triangle holding (x, y) and the point's barycentric coordinates; -1 if outside.

    A point on an edge (to within ``tol``) is in the triangles on both sides; ``rank``
    (per triangle) picks the highest among them, so that a point on a line where the
    field jumps (a contact interface) reads the same side on every mesh.
    """
    m = len(triangles)
    worst = np.empty(m)
    inside_parts, lam_parts = [], []
    for lo in range(0, m, LOCATE_CHUNK):
        # Elementwise per triangle, in chunks: the temporaries stay small on large meshes.
        lam, low, ok = _barycentric(points, triangles[lo:lo + LOCATE_CHUNK], x, y, tol)
        worst[lo:lo + len(low)] = low
        inside_parts.append(lo + np.flatnonzero(ok))
        lam_parts.append(lam[ok])
    inside = np.concatenate(inside_parts)
    if len(inside) == 0:
        best = int(np.argmax(worst))
        return -1, _barycentric(points, triangles[best:best + 1], x, y, tol)[0][0]
    lam_inside = np.concatenate(lam_parts)
    if rank is None:
        pick = int(np.argmax(worst[inside]))
    else:
        pick = int(np.lexsort((worst[inside], rank[inside]))[-1])
    bary = np.clip(lam_inside[pick], 0.0, None)
    return int(inside[pick]), bary / bary.sum()


LOCATE_CHUNK = 250_000
"""Triangles tested at a time by :func:`locate`."""


def _barycentric(points: np.ndarray, triangles: np.ndarray, x: float, y: float, tol: float
                 ) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Barycentric coordinates of (x, y) in each triangle, their smallest, and whether the
    point is inside to within the geometry tolerance (relative to the triangle size)."""
    p = points[triangles]
    d1, d2 = p[:, 1] - p[:, 0], p[:, 2] - p[:, 0]
    det = d1[:, 0] * d2[:, 1] - d1[:, 1] * d2[:, 0]
    rx, ry = x - p[:, 0, 0], y - p[:, 0, 1]
    l1 = (rx * d2[:, 1] - ry * d2[:, 0]) / det
    l2 = (d1[:, 0] * ry - d1[:, 1] * rx) / det
    lam = np.column_stack([1 - l1 - l2, l1, l2])
    worst = np.minimum(np.minimum(lam[:, 0], l1), l2)
    return lam, worst, worst >= -np.maximum(tol / np.sqrt(np.abs(det)), 1e-12)


def _onto_outline(mesh, x: float, y: float) -> tuple[float, float] | None:
    """The nearest point of the mesh's outline, if (x, y) lies within the sliver between
    a circle and its polygon (a probe there is valid: geometry checks probes against
    the true circles); else None. :func:`probe_weights` reads such a probe from the
    triangle there, extended linearly."""
    geometry = mesh.geometry
    allowance = 0.0
    for shape in mesh.model.shapes:
        if shape.circle is not None:
            sides = circle_sides(geometry, shape)
            allowance = max(allowance, shape.circle[2] * (1 - np.cos(np.pi / sides)))
    edges = np.vstack([mesh.edges, mesh.interface_a, mesh.interface_b])
    if allowance == 0.0 or len(edges) == 0:
        return None
    a, b = mesh.points[edges[:, 0]], mesh.points[edges[:, 1]]
    d = b - a
    t = np.clip(((x - a[:, 0]) * d[:, 0] + (y - a[:, 1]) * d[:, 1])
                / np.maximum((d**2).sum(axis=1), 1e-300), 0.0, 1.0)
    near = a + t[:, None] * d
    dist = np.hypot(near[:, 0] - x, near[:, 1] - y)
    k = int(np.argmin(dist))
    if dist[k] > allowance + geometry.tolerance:
        return None
    return float(near[k, 0]), float(near[k, 1])


def probe_weights(mesh, x: float, y: float) -> tuple[int, np.ndarray]:
    """:func:`locate` for a probe, remembered in the mesh's cache (variants share it)."""
    key = ("probe", x, y)
    if key not in mesh.cache:
        tol, rank = mesh.geometry.tolerance, mesh.triangle_shape
        found = locate(mesh.points, mesh.triangles, x, y, tol, rank)
        if found[0] < 0 and (moved := _onto_outline(mesh, x, y)) is not None:
            # The triangle at the nearest outline point, its linear field extended to the
            # probe (the sliver is a few per cent of that triangle's size).
            k = locate(mesh.points, mesh.triangles, *moved, tol, rank)[0]
            if k >= 0:
                (ax, ay), (bx, by), (cx, cy) = mesh.points[mesh.triangles[k]]
                det = (bx - ax) * (cy - ay) - (by - ay) * (cx - ax)
                l1 = ((x - ax) * (cy - ay) - (y - ay) * (cx - ax)) / det
                l2 = ((bx - ax) * (y - ay) - (by - ay) * (x - ax)) / det
                found = (k, np.array([1 - l1 - l2, l1, l2]))
        mesh.cache[key] = found
    return mesh.cache[key]


def brief_figures(solution: Solution) -> dict[str, Any]:
    """Only what :func:`heat2d.post.estimate.figures` reads: max temperature, probes, shape
    max and mean, boundary and cut heat (for the check solve of the error estimate)."""
    system, mesh, model = solution.system, solution.mesh, solution.model
    T = solution.temperature
    stats = shape_stats(mesh, T[mesh.triangles], system.layout.source,
                        np.zeros(len(mesh.triangles)))
    boundaries, _, _ = _boundary_heat(solution)
    probes = {}
    for probe in model.probes:
        k, bary = probe_weights(mesh, probe.x, probe.y)
        probes[probe.name] = float(bary @ T[mesh.triangles[k]])
    return {"temperature": {"max": float(T.max())}, "probes": probes,
            "shapes": {sh.name: stats[i] for i, sh in enumerate(model.shapes) if not sh.void},
            "boundaries": boundaries, "cuts": {n: {"heat_w": q}
                                               for n, q in cut_heat(solution).items()}}


def compute_results(solution: Solution, *, timings: dict[str, float] | None = None,
                    resistances: bool = True) -> Result:
    """Derive the summary from a solution.

    Parameters
    ----------
    solution
        From :func:`~heat2d.solve.solve`.
    timings
        Stage timings to record, seconds.
    resistances
        Compute the °C/W matrix and the package figures of the powered shapes (one
        solve per source, :mod:`.resistance`). Heat across cut lines: :mod:`.cuts`.
    """
    system, mesh, model = solution.system, solution.mesh, solution.model
    T = solution.temperature
    tri = mesh.triangles

    kx, ky, _, _ = system.conductivity(T)
    grad = system.gradients(T).T
    flux = -np.column_stack([kx * grad[0], ky * grad[1]])                  # q = −k∇T

    volume = system.layout.volume
    t_tri = T[tri]
    stats = shape_stats(mesh, t_tri, system.layout.source, system.qdot * volume)

    # Hot spot: hottest node; its shape is that of the hottest triangle around it.
    node = int(np.argmax(T))
    around = np.flatnonzero((tri[:, 0] == node) | (tri[:, 1] == node) | (tri[:, 2] == node))
    hot_tri = around[np.argmax(t_tri[around].mean(axis=1))]

    boundaries, balance, insulated = _boundary_heat(solution)
    probes = {}
    for probe in model.probes:
        k, bary = probe_weights(mesh, probe.x, probe.y)
        if k < 0:
            raise ModelError(f"at = [{probe.x:g}, {probe.y:g}] is not inside the body",
                             file=model.source, entry=f"probe \"{probe.name}\"",
                             line=probe.line)
        probes[probe.name] = float(bary @ T[tri[k]])

    # A balance open past round-off in a system the solve found ill-conditioned: that is
    # why (the solve's own note, carried into the balance so it is never left unexplained).
    badly = [n for n in solution.notes if n.startswith("ill-conditioned system")]
    if "note" not in balance and badly and abs(balance["relative_error"]) > REACTION_ROUNDOFF:
        balance["note"] = badly[0]
    warnings = [*mesh.geometry.warnings, *mesh.warnings, *system.warnings, *solution.notes]
    warnings += [balance["note"]] if "note" in balance and balance["note"] not in warnings \
        else []
    if "note" in balance and abs(balance["relative_error"]) > UNTRUSTED_BALANCE:
        k = np.maximum(system.kx, system.ky)
        name = model.materials[mesh.triangle_material[np.argmax(k)]].name
        raise ModelError(f"ill-conditioned system: k = {k.max():g} W/(m·K) leaves the energy "
                         f"balance open by {balance['relative_error']:.1e}, so no heat flow "
                         "can be trusted; use a conductivity within a few decades of the "
                         "others", file=model.source, entry=f'material "{name}"')
    warnings += implausible(float(T.max()))
    if abs(balance["relative_error"]) > REACTION_ROUNDOFF:
        warnings.append(f"energy balance closes only to {balance['relative_error']:.1e} "
                        f"(heat out {balance['heat_out_w']:.6g} W, power in "
                        f"{balance['power_in_w']:.6g} W)")
    shapes = {sh.name: {"material": sh.material, **stats[i]}
              for i, sh in enumerate(model.shapes) if not sh.void}
    limits = _limits(model, shapes)
    for name, lim in limits.items():
        if lim["exceeded"]:
            warnings.append(f"shape \"{name}\" reaches {lim['max']:.1f} °C, above its limit "
                            f"{lim['limit']:g} °C")
    matrix, package = per_source(solution) if resistances else (None, {})
    if package:
        # Superposition: each boundary's heat = Σ_s P_s·share_s,b (the powered shapes'
        # part) + the flow its boundary values alone drive through the body (from a hotter
        # boundary to a colder one); exact for a linear model, a remainder otherwise.
        for name, b in boundaries.items():
            b["heat_from_powered_shapes_w"] = sum(p["to"][name]["heat_w"]
                                                  for p in package.values())
            b["heat_driven_by_boundary_values_w"] = (b["heat_out_w"]
                                                     - b["heat_from_powered_shapes_w"])
    depth_text = ("full revolution (axisymmetric)" if model.axisymmetric
                  else f"depth {model.depth:g} {model.length_unit}")
    summary: dict[str, Any] = {
        "heat2d_version": __version__,
        "model": {"file": model.source, "title": model.title, "length_unit": model.length_unit,
                  "depth": None if model.axisymmetric else model.depth,
                  "axisymmetric": model.axisymmetric, "params": dict(model.params)},
        "units": {"length": model.length_unit, "temperature": "degC", "power": "W",
                  "heat_flux": "W/m^2", "area": f"{model.length_unit}^2",
                  "powers_and_heat_flows_for": depth_text},
        "temperature": {"max": float(T.max()), "min": float(T.min())},
        "hot_spot": {"x": float(mesh.points[node, 0]), "y": float(mesh.points[node, 1]),
                     "temperature": float(T[node]),
                     "shape": model.shapes[mesh.triangle_shape[hot_tri]].name},
        "shapes": shapes,
        "groups": {g.name: {"kind": g.kind, "members": list(g.members),
                            **_group_stats([shapes[m] for m in g.members if m in shapes])}
                   for g in model.groups},
        "boundaries": boundaries,
        "interfaces": _interfaces(solution),
        "cuts": cut_figures(solution),
        "insulated_length": insulated,
        "axis_length": mesh.axis_length if model.axisymmetric else None,
        "energy_balance": balance,
        "probes": probes,
        "limits": limits,
        "mesh": {"nodes": len(mesh.points), "triangles": len(tri),
                 "min_angle_deg": mesh.min_angle(), "target_size": mesh.geometry.size},
        "solver": {"method": solution.method, "iterations": solution.iterations,
                   "relative_residual": solution.residual, "nonlinear": system.nonlinear,
                   "history": [{"iteration": i, "max_change_k": c, "relative_residual": r}
                               for i, c, r in solution.history]},
        "thermal_resistance": matrix,
        "package": package,
        "ids": {"shape": [sh.name for sh in model.shapes],
                "material": [m.name for m in model.materials]},
        "timings_s": dict(timings or {}),
        "warnings": warnings,
        "caution": CAUTION + (" " + CONDUCTOR_CAUTION if model.has_current else ""),
    }
    if model.has_current:
        from ..fem.joule import conductor_figures

        summary["conductors"] = conductor_figures(system, T)
    check_finite({"summary": summary, "heat_flux": float(np.abs(flux).max(initial=0.0))},
                 model.source)
    return Result(solution=solution, heat_flux=flux, summary=summary)


def _group_stats(members: list[dict[str, Any]]) -> dict[str, Any]:
    seen = [m for m in members if m["volume_m3"] > 0]
    if not seen:
        return {"min": None, "mean": None, "max": None, "power_w": 0.0}
    vol = sum(m["volume_m3"] for m in seen)
    return {"min": min(m["min"] for m in seen), "max": max(m["max"] for m in seen),
            "mean": sum(m["mean"] * m["volume_m3"] for m in seen) / vol,
            "power_w": sum(m["power_w"] for m in members)}


def _limits(model, shapes: dict[str, dict[str, Any]]) -> dict[str, dict[str, Any]]:
    out = {}
    for sh in model.shapes:
        if sh.max_temperature is not None and shapes[sh.name]["max"] is not None:
            t = shapes[sh.name]["max"]
            out[sh.name] = {"max": t, "limit": sh.max_temperature,
                            "margin": sh.max_temperature - t,
                            "exceeded": bool(t > sh.max_temperature)}
    return out


def _interfaces(solution: Solution) -> dict[str, dict[str, Any]]:
    """Heat crossing each interface from a to b, ∫ (T_a − T_b)/R″ dS, and its mean jump."""
    mesh, model, T = solution.mesh, solution.model, solution.temperature
    if not model.interfaces:
        return {}
    mass = solution.system.layout.iface_mass.sum(axis=1)                     # (k, 2)
    jump = T[mesh.interface_a] - T[mesh.interface_b]
    area = mass.sum(axis=1)
    conductance = (1.0 / np.array([i.resistance for i in model.interfaces]))[mesh.interface_id]
    heat = conductance * (mass * jump).sum(axis=1)
    ni = len(model.interfaces)
    q = np.bincount(mesh.interface_id, heat, minlength=ni)
    a = np.bincount(mesh.interface_id, area, minlength=ni)
    j = np.bincount(mesh.interface_id, (mass * jump).sum(axis=1), minlength=ni)
    jmax = np.zeros(ni)
    np.maximum.at(jmax, mesh.interface_id, np.abs(jump).max(axis=1))
    return {i.name: {"between": [i.a, i.b], "resistance": i.resistance,
                     "heat_w": float(q[i.index]), "mean_jump": float(j[i.index] / a[i.index]),
                     "max_abs_jump": float(jmax[i.index])} for i in model.interfaces}


def _boundary_heat(solution: Solution) -> tuple[dict[str, Any], dict[str, float], float]:
    system, mesh, model = solution.system, solution.mesh, solution.model
    T = solution.temperature
    owner = mesh.edge_boundary
    nb = len(model.boundaries)
    out = system.edge_heat_out(T)
    is_fixed = ~np.isnan(system.edge["temperature"])
    # Fixed temperatures: the residual R = K T − F is the heat the reservoir puts in at
    # each fixed node; it is shared among the fixed edges at that node by their weights.
    heat = np.zeros(nb + 1)
    share_reactions(heat, system.residual(T), mesh, is_fixed, system.layout.edge_load)
    rest = ~is_fixed & (owner >= 0)
    heat[:nb] += np.bincount(owner[rest], out[rest], minlength=nb + 1)[:nb]

    lengths = mesh.edge_lengths
    claimed = owner >= 0
    length = np.bincount(owner[claimed], lengths[claimed], minlength=nb)
    mean_t = surface_means(mesh, system.layout, T)
    # Share of all heat out: of the sum of the boundary flows that leave the body (a
    # boundary that takes heat in has a negative share); the leaving shares add up to 1.
    leaving = float(np.clip(heat[:nb], 0.0, None).sum())
    boundaries = {}
    for bc in model.boundaries:
        i = bc.index
        boundaries[bc.name] = {"kind": bc.label, "on": str(bc.selector),
                               "heat_out_w": float(heat[i]),
                               "mean_temperature": float(mean_t[i]),
                               "length": float(length[i]),
                               "share_of_heat_out": (float(heat[i]) / leaving if leaving > 0
                                                     else None)}
    generated = system.qdot_power()
    flux_in = float((system.edge["flux"] * system.layout.edge_load.sum(axis=1)).sum())
    heat_out = float(heat[:nb].sum()) + flux_in       # leaving by convection, radiation, fixed
    power_in = generated + flux_in
    # Reactions sum m_i terms, Σ_j|K_ij||T_j| at most: their round-off is (m_i + 1)ε times
    # that (the dot product and the rounding of T); the heat at fixed edges carries it.
    k_rows = abs(system.K.tocsr()[system.fixed])
    terms = k_rows @ np.abs(T)
    roundoff = float(np.finfo(float).eps * ((np.diff(k_rows.indptr) + 1) * terms).sum())
    # The plain balance (heat out − power in) / power in; with nothing powered, over the
    # largest boundary flow (heat through the body from a hot to a cold boundary), unless
    # that flow is itself round-off (a body held at one temperature carries none).
    largest = float(np.abs(heat[:nb]).max()) if nb else 0.0
    if power_in == 0:
        # Round-off of the whole solve: the solver's relative residual (ε at best) of the
        # terms Σ_j|K_ij||T_j| every row sums; a convecting or radiating body at one
        # temperature leaves flows of that size and no more.
        noise = max(np.finfo(float).eps, solution.residual or 0.0) * float(
            (abs(system.K) @ np.abs(T)).sum())
        if largest <= ROUNDOFF_FLOWS * max(roundoff, noise):
            largest = 0.0
    scale = abs(power_in) if power_in != 0 else largest
    balance = {"power_in_w": power_in, "generated_w": generated, "heat_flux_in_w": flux_in,
               "heat_out_w": heat_out,
               "relative_error": float((heat_out - power_in) / scale) if scale > 0 else 0.0,
               "relative_to": ("power_in_w" if power_in != 0 else "largest boundary flow"
                               if scale > 0 else "nothing: no power and no flow")}
    if scale > 0 and roundoff > REACTION_ROUNDOFF * scale:
        k = np.maximum(system.kx, system.ky)
        balance["note"] = (
            f"ill-conditioned system: conductivities up to {k.max():g} W/(m·K) (material "
            f"\"{model.materials[mesh.triangle_material[np.argmax(k)]].name}\") make the heat"
            f" at fixed-temperature boundaries a difference of terms of {terms.sum():.1e} W; "
            f"figures may carry round-off of {roundoff:.1e} W")
    insulated = float(lengths[owner < 0].sum())
    return boundaries, balance, insulated
