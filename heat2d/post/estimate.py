"""Discretization error estimates: how far each reported figure may be from the exact
solution of the same model.

Two recognised methods are combined:

* a recovery (Zienkiewicz–Zhu) indicator per triangle: the difference between the
  piecewise-constant gradient and a continuous gradient recovered by area-weighted
  averaging at the nodes of each material, measured in the energy norm
  (Zienkiewicz & Zhu, Int. J. Numer. Meth. Eng. 24:337, 1987). It shows *where* the
  error is and drives adaptive refinement;
* Richardson extrapolation against a solution on a *nested* refinement of the run's
  own mesh (every triangle split in four, so every node of the run is a node of the
  refined mesh and figures compare without interpolation noise): the error of a figure
  Q is estimated as Fs·|Q_h − Q_h/2|·r^p/(r^p − 1) with r = 2. Two meshes do not show
  the order, so none is assumed better than p = 1, the order a re-entrant or
  high-contrast corner leaves to nearby point values, and the safety factor is Fs = 2
  (above Roache's 1.25–1.5, for coarse meshes that are not yet in the asymptotic range;
  Roache, J. Fluids Eng. 116:405, 1994): the ± is 4·|Q_h − Q_h/2|, about three times
  the true error where the solution is smooth (p = 2) and still a bound where a corner
  brings p down to 0.42. The max temperature and each shape's max add the rise a peak
  may have between nodes (:func:`peak_sampling`).
* a probe between nodes also carries the interpolation error of its triangle, which
  jumps from mesh to mesh as the probe lands in a different place of its triangle, so
  that |Q_h − Q_h/2| alone can vanish while the error does not. The interpolation term
  c is estimated from the recovered gradients (:func:`probe_corrections`, exact for a
  quadratic field) and the probe's ± is the larger of the plain term above and
  1.5·|c_h| + 4·max(|Q̃_h − Q̃_h/2|, |c_h/2|), with Q̃ = Q + c the corrected values.
  Over 4 186 figures (random probes and each problem's own figures) of seven problems
  with exact solutions, on meshes of 20 to 6 300 nodes, none was under-estimated
  (benchmarks/estimate_coverage.py, seeds 5 and 6); the plain term alone missed 86 of
  them (seeds 1 and 2).
* Above :data:`REFINED_LIMIT` nodes the refined mesh would cost several times the run,
  so two coarser meshes (target sizes ×2 and ×4) are solved instead and a grid
  convergence index with the *observed* order is reported (Celik et al., J. Fluids
  Eng. 130:078001, 2008), flagged as less reliable: non-nested meshes scatter point
  values by as much as their error.

The estimate covers the discretization only: not the 2-D idealisation of a 3-D
product, nor uncertain material or boundary values.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any

import numpy as np

RATIO = math.sqrt(2.0)
"""The coarse ladder's target sizes are RATIO² = 2 and RATIO⁴ = 4 times the run's."""
REFINED_LIMIT = 30_000
"""Runs with more nodes estimate from two coarser meshes instead of a nested refinement
(which has four times the nodes)."""
NESTED_FACTOR = 2.0 * 2 / (2 - 1)
"""Fs·r^p/(r^p − 1) with Fs = 2, r = 2, p = 1: the ± is this times |Q_h − Q_h/2|."""
CORRECTION_SAFETY = 1.5
"""Margin on a probe's interpolation correction (:func:`probe_corrections`): gradients
recovered by averaging on irregular patches, and at boundary nodes, are off by a share
that does not shrink with the mesh (up to about 15 % measured, benchmarks/
estimate_coverage.py)."""
SAFETY_CONVERGED = 3.0
"""Safety factor of the index when three meshes show monotone convergence. Roache's 1.25
assumes meshes whose values converge smoothly; the ladder's meshes are not nested, and
with 1.25 probes at random points of five exact problems (31 000 to 168 000 nodes) were
under-estimated 8 times in 213 figures, by up to 1.95× (benchmarks/estimate_coverage.py
--large). Roache's two-mesh value 3 is used instead."""
SAFETY_UNSURE = 3.0
"""Safety factor when they do not (Roache's two-mesh value)."""
ORDER_RANGE = (0.5, 2.0)
"""Observed orders are clipped to this range: linear elements converge at most at
order 2 in nodal values."""


@dataclass(frozen=True)
class Estimate:
    """Error estimate of one figure: ± ``error`` (same unit), with the order used."""

    error: float
    order: float | None
    converging: bool


def recovery_indicator(solution, field: np.ndarray | None = None,
                       jumps: np.ndarray | None = None) -> tuple[np.ndarray, float, float]:
    """Zienkiewicz–Zhu indicator per triangle, of the solution or of another nodal
    ``field`` on its mesh (weighted by the solution's conductivity); ``jumps`` are
    :func:`_gradient_jumps` of the same field, if already known.

    Returns
    -------
    eta : (m,) array
        Energy-norm error indicator per triangle, sqrt(W·K).
    total : float
        sqrt(Σ eta²).
    relative : float
        ``total`` over the energy norm of the solution.
    """
    system = solution.system
    T = solution.temperature if field is None else field
    diff = _gradient_jumps(solution, field) if jumps is None else jumps
    volume = system.layout.volume
    kx, ky, _, _ = system.conductivity(solution.temperature)
    # ∫ (Σ φ_i e_i)² dV = V/6 (Σ e_i² + (Σ e_i)²) per component, V = ∫ dV (planar exact)
    sq = (diff**2).sum(axis=1) + diff.sum(axis=1) ** 2                     # (m, 2)
    eta2 = volume / 6 * (kx * sq[:, 0] + ky * sq[:, 1])
    energy = float(T @ (system.K @ T))
    total = math.sqrt(eta2.sum())
    return np.sqrt(eta2), total, total / math.sqrt(energy) if energy > 0 else 0.0


def _gradient_jumps(solution, field: np.ndarray | None = None) -> np.ndarray:
    """Recovered minus element gradient at each vertex of each triangle, (m, 3, 2) K/m,
    of the solution (or of another nodal ``field``).

    The recovered gradient is the volume-weighted average of the element gradients of
    one material around a node (materials apart: the gradient jumps across them).
    """
    system, mesh = solution.system, solution.mesh
    tri = mesh.triangles
    m = len(tri)
    grad = system.gradients(solution.temperature if field is None else field)
    volume = system.layout.volume
    # The (node, material) group of each triangle corner depends on the mesh and its
    # materials only: found once per mesh (variants that rebind it may change materials).
    key = ("recovery groups", hash(mesh.triangle_material.tobytes()))
    if key not in mesh.cache:
        nmat = max(len(mesh.model.materials), 1)
        keys = (tri.astype(np.int64) * nmat + mesh.triangle_material[:, None]).ravel()
        if len(mesh.points) * nmat <= 4 * len(keys) and mesh.triangle_material.min() >= 0:
            # (node, material) itself numbers the groups: no sort, some groups empty.
            mesh.cache[key] = (keys, len(mesh.points) * nmat)
        else:
            unique, inverse = np.unique(keys, return_inverse=True)
            mesh.cache[key] = (inverse.ravel(), len(unique))
    inverse, groups = mesh.cache[key]
    weight = np.bincount(inverse, np.repeat(volume, 3), minlength=groups)
    if groups > len(inverse) // 3:                 # numbered by key: some groups empty
        weight[np.bincount(inverse, minlength=groups) == 0] = 1.0     # never read
    recovered = np.column_stack([
        np.bincount(inverse, np.repeat(volume * grad[:, d], 3), minlength=groups)
        for d in range(2)]) / weight[:, None]
    return recovered[inverse].reshape(m, 3, 2) - grad[:, None, :]


def peak_sampling(solution, shape: int | None = None, jumps: np.ndarray | None = None
                  ) -> float:
    """How far the true peak may rise above the hottest node, K (of the whole model, or
    of one shape by its index). ``jumps`` are :func:`_gradient_jumps`, if already known.

    Around the hottest node the gradient jump times the element size, h·|g* − g| ≈ h²|T″|,
    bounds the rise of a smooth peak between nodes (h²|T″|/8 for a quadratic), taken
    here as a quarter of it for margin.
    """
    mesh = solution.mesh
    T = solution.temperature
    inside = (np.ones(len(mesh.triangles), bool) if shape is None
              else mesh.triangle_shape == shape)
    if not inside.any():
        return 0.0
    corners = mesh.triangles[inside].ravel()
    node = int(corners[np.argmax(T[corners])])
    if np.isin(node, solution.system.fixed):
        return 0.0                      # the hottest point is held: it has no error
    around = np.flatnonzero((mesh.triangles == node).any(axis=1) & inside)
    p = mesh.points[mesh.triangles[around]] * mesh.model.unit_m
    h = np.max([np.hypot(*(p[:, i] - p[:, (i + 1) % 3]).T) for i in range(3)], axis=0)
    if jumps is None:
        jumps = _gradient_jumps(solution)
    jump = np.hypot(*jumps[around].transpose(2, 0, 1)).max(axis=1)
    return float((h * jump).max() / 4)


def probe_corrections(solution, jumps: np.ndarray | None = None) -> dict[str, float]:
    """Interpolation correction of each probe, K: the recovered-gradient estimate of
    T(x) − Σ φᵢ Tᵢ inside the probe's triangle.

    For a quadratic T with exact nodal gradients gᵢ, Taylor expansion about each vertex
    gives T(x) − Σ φᵢ Tᵢ = ½ Σ φᵢ gᵢ·(x − xᵢ) = ½ Σ φᵢ (gᵢ − g)·(x − xᵢ) (Σ φᵢ(x − xᵢ) = 0,
    g the triangle's own gradient); the recovered gradient stands in for gᵢ. A probe that
    moves within its triangle from one mesh to the next changes this term by as much as
    its size, so the Richardson difference of raw probe values can vanish while the
    error does not; it is taken out before comparing (see :func:`nested`).
    """
    from .results import probe_weights

    mesh = solution.mesh
    probes = solution.model.probes
    if not probes:
        return {}
    if jumps is None:
        jumps = _gradient_jumps(solution)
    unit = mesh.model.unit_m
    out = {}
    for probe in probes:
        k, bary = probe_weights(mesh, probe.x, probe.y)
        if k < 0:
            continue
        offset = (np.array([probe.x, probe.y]) - mesh.points[mesh.triangles[k]]) * unit
        out[probe.name] = float(0.5 * (bary * (jumps[k] * offset).sum(axis=1)).sum())
    return out


def _peaks_and_energy(result, out: dict[str, Any], jumps: np.ndarray) -> dict[str, float]:
    """Add to the maxima in ``out`` the rise a peak may have between nodes (they are
    sampled at nodes), and return the energy-norm indicator of the run."""
    out["temperature.max"]["error"] += peak_sampling(result.solution, jumps=jumps)
    for i, shape in enumerate(result.model.shapes):
        if f"shapes.{shape.name}.max" in out:
            out[f"shapes.{shape.name}.max"]["error"] += peak_sampling(result.solution, i,
                                                                      jumps)
    _, total, relative = recovery_indicator(result.solution, jumps=jumps)
    return {"indicator": total, "relative": relative}


def ladder(nodes: int) -> tuple[float, float]:
    """Refinement factors of the two coarser meshes of a large run, finest first (target
    sizes ×2 and ×4: together about a third of the run's nodes)."""
    return (1 / RATIO**2, 1 / RATIO**4)


def nested(result, fine: dict[str, Any]) -> dict[str, Any]:
    """Error estimates for ``result`` from the same model on its nested refinement.

    ``fine`` is the refined solution's summary (or :func:`results.brief_figures`).
    """
    coarse, refined = figures(result.summary), figures(fine)
    jumps = _gradient_jumps(result.solution)
    own = probe_corrections(result.solution, jumps)
    other = fine.get("probe_corrections", {})
    out = {}
    for key, value in coarse.items():
        name = key[len("probes."):] if key.startswith("probes.") else None
        error = NESTED_FACTOR * abs(refined[key] - value)
        if name in own and name in other:
            # The interpolation inside the probe's triangle, with a margin, plus Richardson
            # on the corrected values, which is taken no smaller than the refined mesh's
            # own correction (a probe in the same place of its triangle on both meshes
            # keeps a similar correction, and the difference can vanish); the larger of
            # this and the plain Richardson term.
            c_h, c_fine = own[name], other[name]
            corrected = max(abs((refined[key] + c_fine) - (value + c_h)), abs(c_fine))
            error = max(error, CORRECTION_SAFETY * abs(c_h) + NESTED_FACTOR * corrected)
        out[key] = {"error": error, "order": None, "converging": True}
    energy = _peaks_and_energy(result, out, jumps)
    return {"method": "Richardson extrapolation against a nested refinement (each triangle "
                      "split in four), order assumed 1, safety factor 2; probes also with "
                      "their interpolation corrected by recovered gradients, maxima with "
                      "the rise a peak may have between nodes; Zienkiewicz-Zhu recovery "
                      "indicator for the energy norm",
            "reliable": True, "nodes": [fine["nodes"], len(result.mesh.points)],
            "figures": out, "energy_norm": energy}


def grid_convergence(values: list[float], nodes: list[int], *, of: int = 0) -> Estimate:
    """Grid convergence index of value ``of`` (0: finest, 1: middle) of three, finest first.

    Mesh sizes follow from node counts, h ∝ N^(-1/2) in 2-D; the order is found by the
    fixed-point iteration of Celik et al. (2008), clipped to :data:`ORDER_RANGE`.
    """
    f1, f2, f3 = values
    r21 = math.sqrt(nodes[0] / nodes[1])
    r32 = math.sqrt(nodes[1] / nodes[2])
    e21, e32 = f2 - f1, f3 - f2
    if e21 == 0 and e32 == 0:
        return Estimate(0.0, None, True)
    if r21 <= 1.01 or r32 <= 1.01:
        return Estimate(SAFETY_UNSURE * max(abs(e21), abs(e32)), None, False)

    def error(p: float, safety: float) -> float:
        # |f_of − f_extrapolated|, f_ext = f1 − e21/(r21^p − 1)
        to_ext = abs(e21) / (r21**p - 1)
        return safety * (to_ext if of == 0 else to_ext + abs(e21))

    if e21 == 0 or e32 == 0 or e32 / e21 < 0 or abs(e32) < abs(e21):
        # Oscillating or not (yet) converging: no order can be observed.
        spread = max(abs(e21), abs(e32))
        return Estimate(SAFETY_UNSURE * (spread / (r21 - 1) + (spread if of else 0.0)),
                        None, False)
    s = 1.0
    p = 1.0
    for _ in range(100):
        try:
            q = math.log((r21**p - s) / (r32**p - s))
        except (OverflowError, ValueError, ZeroDivisionError):
            p = ORDER_RANGE[0]
            break
        p_new = min(abs(math.log(abs(e32 / e21)) + q) / math.log(r21), 10.0)
        if abs(p_new - p) < 1e-10:
            break
        p = p_new
    p = min(max(p, ORDER_RANGE[0]), ORDER_RANGE[1])
    return Estimate(error(p, SAFETY_CONVERGED), p, True)


def figures(summary: dict[str, Any]) -> dict[str, float]:
    """The figures of a summary that carry an estimate, by a dotted key."""
    out = {"temperature.max": summary["temperature"]["max"]}
    for name, value in summary["probes"].items():
        out[f"probes.{name}"] = value
    for name, shape in summary["shapes"].items():
        if shape["max"] is not None:
            out[f"shapes.{name}.max"] = shape["max"]
            out[f"shapes.{name}.mean"] = shape["mean"]
    for name, b in summary["boundaries"].items():
        out[f"boundaries.{name}.heat_out_w"] = b["heat_out_w"]
    for name, cut in summary.get("cuts", {}).items():
        out[f"cuts.{name}.heat_w"] = cut["heat_w"]
    return out


def estimate(result, others: list) -> dict[str, Any]:
    """Error estimates for ``result`` from the same model solved on two other meshes.

    Parameters
    ----------
    result
        The run's result.
    others
        Summaries (or :func:`results.brief_figures` with ``"nodes"``) on the meshes of
        :func:`ladder`.
    """
    own = {**result.summary, "nodes": len(result.mesh.points)}
    meshes = sorted([own, *others], key=lambda r: -r["nodes"])
    of = next(i for i, r in enumerate(meshes) if r is own)
    nodes = [r["nodes"] for r in meshes]
    values = [figures(r) for r in meshes]
    out: dict[str, Any] = {}
    jumps = _gradient_jumps(result.solution)
    own_corrections = probe_corrections(result.solution, jumps)
    corrections = [own_corrections if r is own else r.get("probe_corrections", {})
                   for r in meshes]
    for key in values[of]:
        est = grid_convergence([v[key] for v in values], nodes, of=of)
        out[key] = {"error": est.error, "order": est.order, "converging": est.converging}
        name = key[len("probes."):] if key.startswith("probes.") else None
        if name is not None and all(name in c for c in corrections):
            # As in nested(): the interpolation error with a margin, plus the index of the
            # corrected values (non-nested meshes put a probe in a different place of its
            # triangle on each, which scatters the plain values most).
            corrected = grid_convergence([v[key] + c[name] for v, c in
                                          zip(values, corrections, strict=True)], nodes, of=of)
            out[key]["error"] = max(out[key]["error"], CORRECTION_SAFETY
                                    * abs(own_corrections[name]) + corrected.error)
    energy = _peaks_and_energy(result, out, jumps)
    return {"method": "grid convergence index over three non-nested meshes (Richardson "
                      "extrapolation with the observed order); less reliable: point values "
                      "of non-nested meshes scatter; Zienkiewicz-Zhu recovery indicator for "
                      "the energy norm",
            "reliable": False, "nodes": nodes, "figures": out,
            "energy_norm": energy}


def annotate(summary: dict[str, Any], errors: dict[str, Any]) -> None:
    """Put each figure's estimate beside it in the summary (``..._error`` keys)."""
    fig = errors["figures"]
    summary["errors"] = errors
    summary["temperature"]["max_error"] = fig["temperature.max"]["error"]
    summary["hot_spot"]["temperature_error"] = fig["temperature.max"]["error"]
    summary["probe_errors"] = {n: fig[f"probes.{n}"]["error"] for n in summary["probes"]}
    for name, shape in summary["shapes"].items():
        if f"shapes.{name}.max" in fig:
            shape["max_error"] = fig[f"shapes.{name}.max"]["error"]
            shape["mean_error"] = fig[f"shapes.{name}.mean"]["error"]
    for name, b in summary["boundaries"].items():
        b["heat_out_error_w"] = fig[f"boundaries.{name}.heat_out_w"]["error"]
    for name, cut in summary.get("cuts", {}).items():
        cut["heat_w_error"] = fig[f"cuts.{name}.heat_w"]["error"]
    shapes = summary["shapes"]
    for group in summary.get("groups", {}).values():
        seen = [shapes[m] for m in group["members"]
                if m in shapes and shapes[m].get("max_error") is not None]
        if group["max"] is None or not seen:
            continue
        # The group's max is its hottest member's; its mean a volume-weighted mean, whose
        # error is at most the same mean of the members' errors.
        group["max_error"] = max(m["max_error"] for m in seen if m["max"] == group["max"])
        volume = sum(m["volume_m3"] for m in seen)
        group["mean_error"] = sum(m["mean_error"] * m["volume_m3"] for m in seen) / volume
    for name, limit in summary.get("limits", {}).items():
        error = shapes[name].get("max_error")
        if error is None:
            continue
        limit["margin_error"] = error
        if abs(limit["margin"]) <= error:
            summary["warnings"].append(
                f'shape "{name}": the margin to its max_temperature ({limit["margin"]:.3g} K) '
                f"is within the max's estimated error (± {error:.2g} K): refine the mesh "
                "before relying on the pass or fail")
