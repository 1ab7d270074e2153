"""Thermal resistances of the powered shapes: the °C/W matrix and the package figures.

Each powered shape (a *source*) is solved alone at 1 W with every boundary value set to
zero (fixed temperatures, ambients and surroundings at 0, no imposed flux), reusing the
run's factorization: by superposition that unit-power field θ is the rise each watt of
the source adds anywhere, and its boundary heat flows are where that watt leaves. For a
nonlinear model (k tables, radiation) the system is the tangent at the solved state, so
the figures are the linearisation at the operating point (the change per extra watt).

From θ of source s (Incropera §3.1, resistances defined by a rise over a heat rate):

* ``mean_rise_k_per_w[row][s]``, ``max_rise_k_per_w[row][s]``: rise of each row shape's
  mean and max temperature per watt in s (the °C/W matrix);
* ``heat_share[s][b]``: heat leaving through boundary b per watt of s, i.e. the share of
  *that source's* heat that b takes (sums to 1 over the boundaries);
* the package figures ``package[s]``: the junction-to-boundary resistance
  R_sb = (max θ over s − surface mean θ over b), K/W, which is (T_max,s − T̄_b)/P_s with s
  the only source; the same from the shape's mean; and the heat to each exit,
  P_s · heat_share[s][b].
"""

from __future__ import annotations

from typing import Any

import numpy as np


def shape_stats(mesh, t_tri: np.ndarray, source: np.ndarray, power: np.ndarray
                ) -> list[dict[str, Any]]:
    """Per shape: min, volume-weighted mean, max, power, area.

    The mean is exact for linear elements: ∫ T dV = Σ_i T_i ∫ φ_i dV (``source`` holds
    ∫ φ_i dV, which carries the 2πr weight of an axisymmetric model).
    """
    # Sums and extremes over the three corners written out: numpy's reductions along a
    # short last axis are several times slower than elementwise operations.
    volume = source[:, 0] + source[:, 1] + source[:, 2]
    ns = len(mesh.model.shapes)
    shape = mesh.triangle_shape
    s_min = np.full(ns, np.inf)
    s_max = np.full(ns, -np.inf)
    t0, t1, t2 = t_tri[:, 0], t_tri[:, 1], t_tri[:, 2]
    np.minimum.at(s_min, shape, np.minimum(np.minimum(t0, t1), t2))
    np.maximum.at(s_max, shape, np.maximum(np.maximum(t0, t1), t2))
    s_vol = np.bincount(shape, volume, minlength=ns)
    s_int = np.bincount(shape, source[:, 0] * t0 + source[:, 1] * t1 + source[:, 2] * t2,
                        minlength=ns)
    s_power = np.bincount(shape, power, minlength=ns)
    s_area = np.bincount(shape, mesh.areas, minlength=ns)
    out = []
    for i in range(ns):
        if s_vol[i] > 0:
            out.append({"min": float(s_min[i]), "mean": float(s_int[i] / s_vol[i]),
                        "max": float(s_max[i]), "power_w": float(s_power[i]),
                        "area": float(s_area[i]), "volume_m3": float(s_vol[i])})
        else:
            out.append({"min": None, "mean": None, "max": None, "power_w": 0.0, "area": 0.0,
                        "volume_m3": 0.0})
    return out


def share_reactions(heat: np.ndarray, reaction: np.ndarray, mesh, is_fixed: np.ndarray,
                    edge_load: np.ndarray) -> None:
    """Add −R at fixed nodes to the boundaries whose fixed edges meet there."""
    fe = mesh.edges[is_fixed].ravel()
    w = edge_load[is_fixed].ravel()
    total = np.bincount(fe, w, minlength=len(reaction))
    np.add.at(heat, np.repeat(mesh.edge_boundary[is_fixed], 2),
              -reaction[fe] * np.where(total[fe] > 0, w / np.where(total[fe] > 0, total[fe], 1),
                                       0.5))


def surface_means(mesh, layout, T: np.ndarray) -> np.ndarray:
    """Surface-weighted mean of the nodal field T over each boundary entry,
    ∫ T dS / ∫ dS (exact for linear T; 2πr included); NaN where an entry has no edge."""
    nb = len(mesh.model.boundaries)
    owner = mesh.edge_boundary
    claimed = owner >= 0
    load = layout.edge_load
    surface = np.bincount(owner[claimed], load.sum(axis=1)[claimed], minlength=nb)
    t_int = np.bincount(owner[claimed], (load * T[mesh.edges]).sum(axis=1)[claimed],
                        minlength=nb)
    with np.errstate(invalid="ignore", divide="ignore"):
        return np.where(surface > 0, t_int / np.where(surface > 0, surface, 1.0), np.nan)


def resistances(solution) -> tuple[dict[str, Any] | None, dict[str, Any]]:
    """The °C/W matrix (``thermal_resistance``) and the package figures (``package``).

    Returns ``(None, {})`` when nothing is powered or no factorization is at hand.
    """
    system, mesh, model = solution.system, solution.mesh, solution.model
    if solution.factor is None:
        return None, {}
    volume = system.layout.volume
    power = np.bincount(mesh.triangle_shape, system.qdot * volume, minlength=len(model.shapes))
    sources = [sh for sh in model.shapes if power[sh.index] > 0]
    if not sources:
        return None, {}
    rows = [sh for sh in model.shapes if not sh.void and (power[sh.index] > 0
                                                          or sh.max_temperature is not None)]
    free = solution.free
    n = len(mesh.points)
    T = solution.temperature
    if system.nonlinear:
        _, J = system.residual_and_jacobian(T)
    else:
        J = system.K
    node_h = system.node_h(T)
    tri = mesh.triangles
    is_fixed = ~np.isnan(system.edge["temperature"])
    feedback = system.model.has_current and any(
        m.temperature_coefficient for m in system.model.materials if m.conducts)
    basis = ("tangent at the solved state" if system.nonlinear or feedback else "linear")
    mean_rise: dict[str, dict[str, float]] = {r.name: {} for r in rows}
    max_rise: dict[str, dict[str, float]] = {r.name: {} for r in rows}
    share: dict[str, dict[str, float]] = {}
    package: dict[str, Any] = {}
    reference = None if system.nonlinear or len(sources) > 1 else _uniform_reference(system)
    for src in sources:
        q = np.where(mesh.triangle_shape == src.index, system.qdot / power[src.index], 0.0)
        f = np.bincount(tri.ravel(), (q[:, None] * system.layout.source).ravel(), minlength=n)
        theta = np.zeros(n)
        if reference is not None and not model.has_current:
            # One source, one boundary temperature, a linear model: the unpowered field is
            # T_ref everywhere, so by superposition θ = (T − T_ref)/P exactly, with the
            # run's own residual (relative); no further solve.
            theta[free] = (T[free] - reference) / power[src.index]
        else:
            theta[free] = solution.factor(f[free])
        t_tri = theta[tri]
        stats = shape_stats(mesh, t_tri, system.layout.source, np.zeros(len(tri)))
        for r in rows:
            mean_rise[r.name][src.name] = stats[r.index]["mean"]
            max_rise[r.name][src.name] = stats[r.index]["max"]
        heat = np.zeros(len(model.boundaries) + 1)
        share_reactions(heat, J @ theta - f, mesh, is_fixed, system.layout.edge_load)
        e = mesh.edges
        out = (system.layout.edge_mass.sum(axis=1) * node_h * theta[e]).sum(axis=1)
        rest = ~is_fixed & (mesh.edge_boundary >= 0)
        heat += np.bincount(mesh.edge_boundary[rest], out[rest], minlength=len(heat))
        share[src.name] = {bc.name: float(heat[bc.index]) for bc in model.boundaries}
        package[src.name] = _package(src, float(power[src.index]), stats[src.index],
                                     surface_means(mesh, system.layout, theta),
                                     share[src.name], model, basis)
    matrix = {"sources": [s.name for s in sources], "basis": basis,
              "mean_rise_k_per_w": mean_rise, "max_rise_k_per_w": max_rise,
              "heat_share": share}
    return matrix, package


def _uniform_reference(system) -> float | None:
    """The one temperature every boundary value refers to (fixed temperatures, ambients
    of convecting edges, surroundings of radiating ones), if there is one and no flux is
    imposed: then a field at that temperature everywhere solves the model unpowered."""
    edge = system.edge
    if np.any(edge["flux"] != 0):
        return None
    values = [system.fixed_value, edge["ambient"][np.nan_to_num(edge["h"]) > 0],
              edge["surroundings"][np.nan_to_num(edge["emissivity"]) > 0]]
    values = np.concatenate([np.asarray(v, dtype=float).ravel() for v in values])
    if len(values) == 0 or not np.all(values == values[0]):
        return None
    return float(values[0])


def _package(src, power_w: float, own: dict[str, Any], theta_b: np.ndarray,
             share: dict[str, float], model, basis: str) -> dict[str, Any]:
    """Package figures of one source from its unit-power field θ (see the module text)."""
    to = {}
    for bc in model.boundaries:
        mean_b = theta_b[bc.index]
        known = bool(np.isfinite(mean_b))
        to[bc.name] = {
            # junction-to-boundary: (T_max − T̄_b)/P with the source alone (superposition)
            "resistance_k_per_w": float(own["max"] - mean_b) if known else None,
            "resistance_from_mean_k_per_w": float(own["mean"] - mean_b) if known else None,
            "heat_w": power_w * share[bc.name],
            "share": share[bc.name],
        }
    return {"power_w": power_w, "basis": basis,
            # rise of the shape's max over the fixed temperatures and ambients, per watt
            "rise_k_per_w": float(own["max"]), "to": to}
