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

from ..errors import ModelError
from ..fem.assembly import assemble
from ..fem.geometry import Geometry
from ..fem.joule import solve_joule
from ..fem.mesh import build_mesh, prolong, red_refine, refine_mesh
from ..fem.solver import solve
from ..post.estimate import annotate, nested, probe_corrections, recovery_indicator
from ..post.results import Result, brief_figures, compute_results, probe_weights

MARK_SHARE = 0.5
"""Dörfler parameter: refine the fewest triangles that carry this share of Σ η²."""
STALL_STEPS = 3
STALL_GAIN = 0.05
"""Refinement stops when the worst target's estimate over its accuracy has fallen by less
than STALL_GAIN over the last STALL_STEPS steps (each step normally halves it or so)."""
MIN_MARKED = 0.05
"""At least this fraction of the triangles is refined per step: a goal-oriented indicator
can be so concentrated that half of it sits in a handful of triangles, and every step
costs a solve and a check solve. Measured on eight adaptive runs (the hot pin, two corner
probes, the rod, the slab, the plate's top probe, the bundled control board and the
worked example), 0, 0.02, 0.03, 0.05 and 0.1 changed the final node counts by up to 7×
case by case with no trend; 0.05 had the smallest total relative to the best of each."""
AREA_FACTOR = 0.3
"""Marked triangles get an area bound of this fraction of their area (about half the size)."""
GROWTH = 4.0
"""Node count of the check mesh (the nested refinement) over the step's own: the budget
bounds that one (a mesh whose check would pass it is not used)."""


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


def check_budget(mesh) -> None:
    """Raise ModelError when an adaptive model's node budget cannot hold its first mesh."""
    model = mesh.model
    if model.adaptive and len(mesh.points) > model.mesh.max_nodes:
        raise ModelError(f"max_nodes: the budget {model.mesh.max_nodes} is smaller than the "
                         f"initial mesh ({len(mesh.points)} nodes); raise it or coarsen "
                         "[mesh] size", file=model.source, entry="[mesh]")


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
    check_budget(mesh)
    steps: list[dict[str, Any]] = []
    while True:
        solution = (solve_joule if model.has_current else solve)(assemble(mesh), method=method)
        result = compute_results(solution, resistances=False)
        refined = red_refine(mesh)
        guess = prolong(solution.temperature, mesh, refined)
        fine = (solve_joule(assemble(refined), method=method, initial=guess)
                if model.has_current else
                solve(assemble(refined), method=method, initial=guess, newton_steps=1))
        errors = nested(result, {**brief_figures(fine), "nodes": len(refined.points),
                                  "probe_corrections": probe_corrections(fine)})
        goals = targets(result)
        step: dict[str, Any] = {
            "nodes": len(mesh.points), "max_temperature": result.summary["temperature"]["max"],
            "estimate": {k: errors["figures"][k]["error"] for k in goals}}
        steps.append(step)
        if all(errors["figures"][k]["error"] <= v for k, v in goals.items()):
            stop = "reached"
            break
        worst = [max(s["estimate"][k] / v for k, v in goals.items()) for s in steps]
        if len(worst) > STALL_STEPS and worst[-1] > (1 - STALL_GAIN) * worst[-1 - STALL_STEPS]:
            stop = "stalled"                    # the estimate no longer falls
            break
        bounds = _area_bounds(mesh, goal_indicator(solution, goals, step["estimate"]))
        if not (bounds > 0).any():
            stop = "smallest size"              # nothing left that may be refined
            break
        candidate = refine_mesh(mesh, bounds)
        if len(candidate.points) * GROWTH > budget:
            stop = "node budget"                # its check mesh would pass the budget
            break
        mesh = candidate
    final = compute_results(solution, resistances=resistances)
    annotate(final.summary, errors)
    final.summary["adaptive"] = {"targets": goals, "reached": stop == "reached",
                                 "stopped": stop, "steps": steps}
    unmet = "adaptive refinement stopped before reaching the requested accuracy: "
    warning = {
        "stalled": f"{unmet}the estimate fell by less than {STALL_GAIN:.0%} over the last "
                   f"{STALL_STEPS} steps (a singular point, such as two held temperatures "
                   "meeting, that refinement cannot resolve?)",
        "smallest size": f"{unmet}the triangles where the error is are at the smallest size "
                         f"allowed (about {MIN_SIZE_FRACTION * 3:g} of [mesh] size); refine "
                         "such a model with --refine",
        "node budget": f"adaptive refinement stopped at the node budget ({budget}) before "
                       "reaching the requested accuracy: the next mesh's check (four times "
                       "its nodes) would pass it",
    }
    if stop in warning:
        final.summary["warnings"].append(warning[stop])
    return final


MIN_SIZE_FRACTION = 1e-3
"""Triangles are not refined below this fraction of the model's target size: where the
data jump (two held temperatures meet) the indicator never falls, and refinement must
stop somewhere."""


def goal_indicator(solution, goals: dict[str, float],
                   errors: dict[str, float] | None = None) -> np.ndarray:
    """Each triangle's share of the error of the target figures (goal-oriented).

    The error of a point value T(x₀) is a(e, z): the error e weighted by the influence
    function z (K z = δ at x₀; a Green's function), so per triangle it is bounded by
    ‖e‖_K·‖z‖_K (Cauchy–Schwarz in the energy norm). Both are estimated by the recovery
    indicator (the product indicator of Ainsworth & Oden, *A Posteriori Error Estimation
    in Finite Element Analysis*, Wiley 2000, ch. 8, from memory). Each target adds its
    product over its accuracy. z costs one solve with the run's factor per target. The
    maximum temperature's influence function averages the nodes within the max's
    estimated error (``errors``, by figure key) of the hottest one.
    """
    errors = errors or {}
    eta, _, _ = recovery_indicator(solution)
    mesh, free = solution.mesh, solution.free
    total = np.zeros(len(mesh.triangles))
    tightest = min(goals.values(), default=1.0)
    for key, accuracy in goals.items():
        load = np.zeros(len(mesh.points))
        if key == "temperature.max":
            # Every node that may be the true hottest: within the max's estimated error
            # of the hottest node (a ridge of near-equal maxima counts as a whole).
            T = solution.temperature
            hot = T >= T.max() - errors.get(key, 0.0)
            load[hot] = 1.0 / np.count_nonzero(hot)
        else:
            probe = next(p for p in mesh.model.probes if f"probes.{p.name}" == key)
            k, bary = probe_weights(mesh, probe.x, probe.y)
            load[mesh.triangles[k]] = bary
        if free is None or solution.factor is None or not load[free].any():
            continue                            # held point: the figure has no error
        z = np.zeros(len(mesh.points))
        z[free] = solution.factor(load[free])
        eta_z, _, _ = recovery_indicator(solution, z)
        total += eta * eta_z * (tightest / accuracy)      # relative weights: no overflow
    return total if total.any() else eta**2


def _area_bounds(mesh, contribution: np.ndarray) -> np.ndarray:
    """Area bounds for the fewest triangles that carry MARK_SHARE of the total error
    ``contribution`` (largest first)."""
    floor = (MIN_SIZE_FRACTION * mesh.geometry.size) ** 2
    eta = np.where(mesh.areas > 4 * floor, contribution, 0.0)
    if not eta.any():
        return np.full(len(eta), -1.0)
    order = np.argsort(-eta)
    share = np.cumsum(eta[order]) / max(eta.sum(), 1e-300)
    count = max(int(np.searchsorted(share, MARK_SHARE)) + 1,
                int(MIN_MARKED * np.count_nonzero(eta)))
    bounds = np.full(len(eta), -1.0)
    marked = order[:count]
    bounds[marked] = AREA_FACTOR * mesh.areas[marked]
    return bounds
