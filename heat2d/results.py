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

from . import __version__
from .errors import ModelError
from .solve import Solution

CAUTION = (
    "Estimates only: a 2-D section of an idealised model. Confirm against measurements and "
    "component ratings; product-safety standards, local codes and qualified engineering "
    "review take precedence over these results."
)


@dataclass(frozen=True, repr=False)
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

    def temperature_at(self, x: float, y: float) -> float:
        """Temperature (°C) at a point of the body, interpolated linearly in its triangle."""
        tri, bary = locate(self.mesh.points, self.mesh.triangles, x, y,
                           self.mesh.geometry.tolerance)
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
           tol: float = 0.0) -> tuple[int, np.ndarray]:
    """The triangle holding (x, y) and the point's barycentric coordinates; -1 if outside."""
    p = points[triangles]
    d1, d2 = p[:, 1] - p[:, 0], p[:, 2] - p[:, 0]
    det = d1[:, 0] * d2[:, 1] - d1[:, 1] * d2[:, 0]
    rx, ry = x - p[:, 0, 0], y - p[:, 0, 1]
    l1 = (rx * d2[:, 1] - ry * d2[:, 0]) / det
    l2 = (d1[:, 0] * ry - d1[:, 1] * rx) / det
    lam = np.column_stack([1 - l1 - l2, l1, l2])
    worst = lam.min(axis=1)
    best = int(np.argmax(worst))
    # Allow points on an edge to within the geometry tolerance (relative to the triangle size).
    size = np.sqrt(np.abs(det[best]))
    if worst[best] < -max(tol / size, 1e-12):
        return -1, lam[best]
    bary = np.clip(lam[best], 0.0, None)
    return best, bary / bary.sum()


def compute_results(solution: Solution, *, timings: dict[str, float] | None = None) -> Result:
    """Derive the summary from a solution.

    Raises
    ------
    ModelError
        A probe lies outside the body.
    """
    system, mesh, model = solution.system, solution.mesh, solution.model
    T = solution.temperature
    tri = mesh.triangles
    s, depth = model.unit_m, model.depth_m

    grad = (system.gradient @ T).reshape(2, -1)
    flux = -np.column_stack([system.kx * grad[0], system.ky * grad[1]])    # q = −k∇T

    area = mesh.areas
    power = system.qdot * area * s * s * depth
    ns = len(model.shapes)
    t_tri = T[tri]
    shape = mesh.triangle_shape
    s_min = np.full(ns, np.inf)
    s_max = np.full(ns, -np.inf)
    np.minimum.at(s_min, shape, t_tri.min(axis=1))
    np.maximum.at(s_max, shape, t_tri.max(axis=1))
    s_area = np.bincount(shape, area, minlength=ns)
    s_mean = np.bincount(shape, area * t_tri.mean(axis=1), minlength=ns)     # exact for P1
    s_power = np.bincount(shape, power, minlength=ns)

    # Hot spot: hottest node; its shape is that of the hottest triangle around it.
    node = int(np.argmax(T))
    around = np.flatnonzero((tri == node).any(axis=1))
    hot_tri = around[np.argmax(t_tri[around].mean(axis=1))]

    boundaries, balance, insulated = _boundary_heat(solution)
    probes = {}
    for probe in model.probes:
        k, bary = locate(mesh.points, tri, probe.x, probe.y, mesh.geometry.tolerance)
        if k < 0:
            raise ModelError(f"at = [{probe.x:g}, {probe.y:g}] is not inside the body",
                             file=model.source, entry=f"probe \"{probe.name}\"", line=probe.line)
        probes[probe.name] = float(bary @ T[tri[k]])

    warnings = [*mesh.geometry.warnings, *system.warnings, *solution.notes]
    if abs(balance["relative_error"]) > 1e-6:
        warnings.append(f"energy balance closes only to {balance['relative_error']:.1e}")
    summary: dict[str, Any] = {
        "heat2d_version": __version__,
        "model": {"file": model.source, "title": model.title, "length_unit": model.length_unit,
                  "depth": model.depth, "params": dict(model.params)},
        "units": {"length": model.length_unit, "temperature": "degC", "power": "W",
                  "heat_flux": "W/m^2", "area": f"{model.length_unit}^2"},
        "temperature": {"max": float(T.max()), "min": float(T.min())},
        "hot_spot": {"x": float(mesh.points[node, 0]), "y": float(mesh.points[node, 1]),
                     "temperature": float(T[node]),
                     "shape": model.shapes[shape[hot_tri]].name},
        "shapes": {
            sh.name: ({"material": sh.material, "min": float(s_min[i]),
                       "mean": float(s_mean[i] / s_area[i]), "max": float(s_max[i]),
                       "power_w": float(s_power[i]), "area": float(s_area[i])}
                      if s_area[i] > 0 else
                      {"material": sh.material, "min": None, "mean": None, "max": None,
                       "power_w": 0.0, "area": 0.0})
            for i, sh in enumerate(model.shapes) if not sh.void},
        "boundaries": boundaries,
        "insulated_length": insulated,
        "energy_balance": balance,
        "probes": probes,
        "mesh": {"nodes": len(mesh.points), "triangles": len(tri),
                 "min_angle_deg": mesh.min_angle(), "target_size": mesh.geometry.size},
        "solver": {"method": solution.method, "iterations": solution.iterations,
                   "relative_residual": solution.residual},
        "ids": {"shape": [sh.name for sh in model.shapes],
                "material": [m.name for m in model.materials]},
        "timings_s": dict(timings or {}),
        "warnings": warnings,
        "caution": CAUTION,
    }
    return Result(solution=solution, heat_flux=flux, summary=summary)


def _boundary_heat(solution: Solution) -> tuple[dict[str, Any], dict[str, float], float]:
    system, mesh, model = solution.system, solution.mesh, solution.model
    T = solution.temperature
    edges, owner = mesh.edges, mesh.edge_boundary
    nb = len(model.boundaries)
    surface = mesh.edge_lengths * model.unit_m * model.depth_m                # m²
    t_mean = T[edges].mean(axis=1)
    kind = np.array([bc.kind for bc in model.boundaries] + ["none"])[owner]
    get = {key: np.array([getattr(bc, key) or 0.0 for bc in model.boundaries] + [0.0])[owner]
           for key in ("heat_flux", "h", "ambient")}

    out = np.zeros(len(edges))
    conv = kind == "convection"
    out[conv] = get["h"][conv] * surface[conv] * (t_mean[conv] - get["ambient"][conv])
    flux = kind == "heat_flux"
    out[flux] = -get["heat_flux"][flux] * surface[flux]
    # Fixed temperatures: reaction R = K T − F is the heat the reservoir puts in at each
    # node; it is shared among the fixed edges at that node by their half-lengths.
    fixed = kind == "temperature"
    reaction = system.K @ T - system.F
    fe = edges[fixed]
    half = np.repeat(surface[fixed] / 2, 2)
    weight = np.bincount(fe.ravel(), half, minlength=len(T))
    share = half / weight[fe.ravel()]
    heat = np.zeros(nb + 1)
    np.add.at(heat, np.repeat(owner[fixed], 2), -reaction[fe.ravel()] * share)
    heat[:nb] += np.bincount(owner[~fixed & (owner >= 0)], out[~fixed & (owner >= 0)],
                             minlength=nb)[:nb]

    length = np.bincount(owner[owner >= 0], mesh.edge_lengths[owner >= 0], minlength=nb)
    t_int = np.bincount(owner[owner >= 0], (mesh.edge_lengths * t_mean)[owner >= 0],
                        minlength=nb)
    boundaries = {}
    for bc in model.boundaries:
        i = bc.index
        boundaries[bc.name] = {"kind": bc.kind, "on": str(bc.selector),
                               "heat_out_w": float(heat[i]),
                               "mean_temperature": float(t_int[i] / length[i]),
                               "length": float(length[i])}
    generated = system.qdot_power()
    flux_in = float(-out[flux].sum())
    heat_out = float(sum(heat[bc.index] for bc in model.boundaries if bc.kind != "heat_flux"))
    gross_in = generated + sum(max(-heat[i], 0.0) for i in range(nb))
    gross_out = sum(max(heat[i], 0.0) for i in range(nb))
    scale = max(gross_in, gross_out)
    power_in = generated + flux_in
    balance = {"power_in_w": power_in, "generated_w": generated, "heat_flux_in_w": flux_in,
               "heat_out_w": heat_out,
               "relative_error": (power_in - heat_out) / scale if scale > 0 else 0.0}
    insulated = float(mesh.edge_lengths[owner < 0].sum())
    return boundaries, balance, insulated
