"""Adaptive refinement to a stated accuracy.

Starting from the model's mesh, each step solves, estimates the error of the target
figures (the max temperature for ``[mesh] accuracy``, each probe with an ``accuracy``)
against a nested refinement of that mesh (see :mod:`heat2d.estimate`), and, where a
target is not met, refines the triangles carrying the largest share of the recovery
indicator (Dörfler marking), passing area bounds back to the mesher so every outline
stays exact. It stops when every target is met or the next mesh would exceed
``[mesh] max_nodes``.
"""

from __future__ import annotations

from typing import Any

import numpy as np

from .assembly import assemble
from .errors import ModelError
from .estimate import annotate, nested, probe_corrections, recovery_indicator
from .geometry import Geometry
from .mesh import build_mesh, prolong, red_refine, refine_mesh
from .results import Result, brief_figures, compute_results
from .solver import solve

MARK_SHARE = 0.5
"""Dörfler parameter: refine the fewest triangles that carry this share of Σ η²."""
AREA_FACTOR = 0.3
"""Marked triangles get an area bound of this fraction of their area (about half the size)."""
GROWTH = 4.0
"""Node count of the check mesh (the nested refinement) over the step's own: the budget
bounds that one."""


def targets(result: Result) -> dict[str, float]:
    """The figures with an accuracy asked for, by their key in :func:`estimate.figures`."""
    model = result.model
    out = {}
    if model.mesh.accuracy is not None:
        out["temperature.max"] = model.mesh.accuracy
    for p in model.probes:
        if p.accuracy is not None:
            out[f"probes.{p.name}"] = p.accuracy
    return out


def adapt(geometry: Geometry, *, method: str = "auto", resistances: bool = True
          ) -> Result:
    """Refine until the target figures meet their accuracy or the node budget is spent.

    Raises
    ------
    ModelError
        The node budget is smaller than the initial mesh.
    """
    model = geometry.model
    budget = model.mesh.max_nodes
    mesh = build_mesh(geometry)
    if len(mesh.points) > budget:
        raise ModelError(f"max_nodes: the budget {budget} is smaller than the initial mesh "
                         f"({len(mesh.points)} nodes); raise it or coarsen [mesh] size",
                         file=model.source, entry="[mesh]")
    steps: list[dict[str, Any]] = []
    reached = False
    while True:
        solution = solve(assemble(mesh), method=method)
        result = compute_results(solution, resistances=False)
        refined = red_refine(mesh)
        fine = solve(assemble(refined), method=method,
                     initial=prolong(solution.temperature, mesh, refined), newton_steps=1)
        errors = nested(result, {**brief_figures(fine), "nodes": len(refined.points),
                                  "probe_corrections": probe_corrections(fine)})
        goals = targets(result)
        step: dict[str, Any] = {
            "nodes": len(mesh.points), "max_temperature": result.summary["temperature"]["max"],
            "estimate": {k: errors["figures"][k]["error"] for k in goals}}
        reached = all(errors["figures"][k]["error"] <= v for k, v in goals.items())
        steps.append(step)
        if reached or len(mesh.points) * GROWTH > budget:
            break
        eta, _, _ = recovery_indicator(solution)
        bounds = _area_bounds(mesh, eta)
        if not (bounds > 0).any():
            break                               # nothing left that may be refined
        mesh = refine_mesh(mesh, bounds)
    final = compute_results(solution, resistances=resistances)
    annotate(final.summary, errors)
    final.summary["adaptive"] = {"targets": goals, "reached": reached, "steps": steps}
    if not reached:
        final.summary["warnings"].append(
            f"adaptive refinement stopped at the node budget ({budget}) before reaching the "
            "requested accuracy")
    return final


MIN_SIZE_FRACTION = 1e-3
"""Triangles are not refined below this fraction of the model's target size: where the
data jump (two held temperatures meet) the indicator never falls, and refinement must
stop somewhere."""


def _area_bounds(mesh, eta: np.ndarray) -> np.ndarray:
    """Area bounds for the triangles that carry MARK_SHARE of Σ η² (largest first)."""
    floor = (MIN_SIZE_FRACTION * mesh.geometry.size) ** 2
    eta = np.where(mesh.areas > 4 * floor, eta, 0.0)
    order = np.argsort(-eta)
    share = np.cumsum(eta[order] ** 2) / max((eta**2).sum(), 1e-300)
    count = int(np.searchsorted(share, MARK_SHARE)) + 1
    bounds = np.full(len(eta), -1.0)
    marked = order[:count]
    bounds[marked] = AREA_FACTOR * mesh.areas[marked]
    return bounds
