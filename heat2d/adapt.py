"""Adaptive refinement to a stated accuracy.

Starting from the model's mesh, each step solves, estimates the error of the target
figures (the max temperature for ``[mesh] accuracy``, each probe with an ``accuracy``)
by grid convergence over the last three meshes of the sequence, and refines the
triangles carrying the largest share of the recovery indicator (Dörfler marking),
passing area bounds back to the mesher so every outline stays exact. It stops when
every target is met on two successive meshes (one estimate alone can be lucky where
the hottest node moves between meshes) or the next mesh would exceed
``[mesh] max_nodes``.
"""

from __future__ import annotations

from typing import Any

import numpy as np

from .assembly import assemble
from .errors import ModelError
from .estimate import RATIO, annotate, estimate, recovery_indicator
from .geometry import Geometry
from .mesh import build_mesh, refine_mesh
from .results import Result, compute_results
from .solver import solve

MARK_SHARE = 0.5
"""Dörfler parameter: refine the fewest triangles that carry this share of Σ η²."""
AREA_FACTOR = 0.3
"""Marked triangles get an area bound of this fraction of their area (about half the size)."""
GROWTH = 2.5
"""Expected growth of the node count per step, used to respect the node budget."""


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
    results: list[Result] = []
    steps: list[dict[str, Any]] = []
    reached = False
    while True:
        solution = solve(assemble(mesh), method=method)
        result = compute_results(solution, resistances=False)
        results.append(result)
        goals = targets(result)
        step: dict[str, Any] = {"nodes": len(mesh.points),
                                "max_temperature": result.summary["temperature"]["max"]}
        if len(results) >= 3:
            errors = estimate(result, results[-3:-1])
            step["estimate"] = {k: errors["figures"][k]["error"] for k in goals}
            step["met"] = all(errors["figures"][k]["error"] <= v for k, v in goals.items())
            reached = step["met"] and steps[-1].get("met", False)
        steps.append(step)
        if reached or len(mesh.points) * GROWTH > budget:
            break
        eta, _, _ = recovery_indicator(solution)
        mesh = refine_mesh(mesh, _area_bounds(mesh, eta))
    final = compute_results(results[-1].solution, resistances=resistances)
    others = results[-3:-1]
    if len(others) < 2:
        # Too few meshes in the sequence (a tight budget): complete the ladder with
        # coarser uniform meshes, as a run without adaptivity does.
        from .pipeline import run

        for f in (1 / RATIO, 1 / RATIO**2)[: 2 - len(others)]:
            others.append(run(model, method=method, refine=geometry.refine * f,
                              resistances=False, estimate=False, adaptive=False))
    annotate(final.summary, estimate(final, others))
    final.summary["adaptive"] = {"targets": goals, "reached": reached, "steps": steps}
    if not reached:
        final.summary["warnings"].append(
            f"adaptive refinement stopped at the node budget ({budget}) before reaching the "
            "requested accuracy")
    return final


def _area_bounds(mesh, eta: np.ndarray) -> np.ndarray:
    """Area bounds for the triangles that carry MARK_SHARE of Σ η² (largest first)."""
    order = np.argsort(-eta)
    share = np.cumsum(eta[order] ** 2) / max((eta**2).sum(), 1e-300)
    count = int(np.searchsorted(share, MARK_SHARE)) + 1
    bounds = np.full(len(eta), -1.0)
    marked = order[:count]
    bounds[marked] = AREA_FACTOR * mesh.areas[marked]
    return bounds
