"""Chains the stages: Model -> Geometry -> Mesh -> System -> Solution -> Result.

A run may reuse an earlier result: when the new model differs only in values
(materials, powers, boundary values, interface resistances, limits, params that
feed only those), the geometry, mesh, sparsity pattern and element arrays are
reused, and so is the factorization when the matrix is unchanged.
"""

from __future__ import annotations

import time
from collections.abc import Callable
from dataclasses import replace

import numpy as np

from ..fem.assembly import assemble
from ..fem.budget import check_outlines
from ..fem.geometry import build_geometry
from ..fem.joule import solve_joule
from ..fem.mesh import build_mesh
from ..fem.solver import solve
from ..model import Model
from ..post.results import Result, brief_figures, compute_results

Progress = Callable[[str, str], None]
"""Called as progress(stage, event) with event "start", then "end" or "failed"; stages
follow one another (none is nested in another). The error estimate reports its parts
as stages named "estimate: ..." (summary.json times them together as "estimate")."""

STAGES = ("geometry", "mesh", "assembly", "solve", "results", "estimate")
KEEP_FACTOR_LIMIT = 250_000
"""Above this many nodes the run's factorization (about 1 kB per node) is released once
the results are computed, before the error estimate and the writers; a later use (a
variant of a sweep with the same matrix) factorizes again."""


def stage_runner(progress: Progress | None, timings: dict[str, float]):
    """``stage(name, func, *args, **kwargs)``: calls func, records its time in
    ``timings[name]`` and tells ``progress`` when it starts and ends (or fails)."""

    def stage(name: str, func, *args, **kwargs):
        if progress:
            progress(name, "start")
        start = time.perf_counter()
        try:
            value = func(*args, **kwargs)
        except BaseException:
            if progress:
                progress(name, "failed")
            raise
        timings[name] = time.perf_counter() - start
        if progress:
            progress(name, "end")
        return value

    return stage


def geometry_key(model: Model, refine: float = 1.0) -> tuple:
    """Everything the geometry and mesh depend on; equal keys mean a mesh can be reused."""
    return (
        model.length_unit, model.depth, model.axisymmetric, refine, model.mesh,
        tuple((s.name, s.kind, s.points, s.circle, s.void, s.mesh_size) for s in model.shapes),
        tuple((b.name, b.selector) for b in model.boundaries),
        tuple((i.name, i.a, i.b) for i in model.interfaces),
        tuple((p.name, p.x, p.y) for p in model.probes),
    )


def run(model: Model, *, method: str = "auto", refine: float = 1.0,
        progress: Progress | None = None, reuse: Result | None = None,
        resistances: bool = True, estimate: bool = True, adaptive: bool = True) -> Result:
    """Solve a model end to end.

    Parameters
    ----------
    model
        From :func:`heat2d.load` or :func:`heat2d.parse`.
    method
        Linear solver: ``auto``, ``direct`` or ``multigrid``.
    refine
        Divide every target edge length (and circle chord) by this factor.
    progress
        Optional callback told when each stage starts and ends.
    reuse
        An earlier result; its mesh and assembly structure are reused when the geometry
        is unchanged (see :func:`geometry_key`), else it is ignored.
    resistances
        Compute the °C/W matrix of the powered shapes.
    estimate
        Estimate the discretization error of every reported figure by solving on the
        nested refinement of the mesh (above ``estimate.REFINED_LIMIT`` nodes, on two
        coarser meshes instead; see :mod:`heat2d.estimate`).
    adaptive
        Refine adaptively when the model asks for an accuracy (see :mod:`heat2d.adapt`).

    Returns
    -------
    Result
        Fields and summary; the summary records each stage's time in seconds.
    """
    timings: dict[str, float] = {}

    stage = stage_runner(progress, timings)

    check_outlines(model, refine=refine)                # circles: before the geometry
    old = reuse.solution if reuse is not None else None
    if old is not None and not (model.adaptive and adaptive) and \
            geometry_key(old.model, old.mesh.geometry.refine) == geometry_key(model, refine):
        mesh = stage("mesh", rebind, old.mesh, model)
        old.system.layout.pattern                      # noqa: B018 - build once, refill after
        system = stage("assembly", assemble, mesh, layout=old.system.layout)
        # Equal up to the order of summation (COO sum against pattern refill).
        same = (system.K.nnz == old.system.K.nnz
                and np.allclose(system.K.data, old.system.K.data, rtol=1e-13, atol=0)
                and np.array_equal(system.fixed, old.system.fixed) and not system.nonlinear
                and not model.has_current)
        if model.has_current:
            solution = stage("solve", solve_joule, system, method=method)
        else:
            solution = stage("solve", solve, system, method=method,
                             factor=old.factor if same else None)
    elif model.adaptive and adaptive:
        from .adaptive import adapt

        geometry = stage("geometry", build_geometry, model, refine=refine)
        result = stage("adapt", adapt, geometry, method=method, resistances=resistances)
        result.summary["timings_s"].update(timings)
        return result
    else:
        geometry = stage("geometry", build_geometry, model, refine=refine)
        mesh = stage("mesh", build_mesh, geometry)
        system = stage("assembly", assemble, mesh)
        solution = stage("solve", solver_for(model), system, method=method)
    result = stage("results", compute_results, solution, timings=timings,
                   resistances=resistances)
    result.summary["timings_s"]["results"] = timings["results"]
    if solution.factor is not None and len(solution.temperature) > KEEP_FACTOR_LIMIT:
        solution.factor.release()
    if estimate:
        start = time.perf_counter()
        _estimate(result, model, method, refine, stage, timings)
        result.summary["timings_s"]["estimate"] = time.perf_counter() - start
    return result


def solver_for(model: Model):
    """The solve stage of a model: with the Joule heating of its conductors when any
    carries a current (:func:`heat2d.fem.joule.solve_joule`), else the heat balance alone."""
    return solve_joule if model.has_current else solve


def _estimate(result: Result, model: Model, method: str, refine: float, stage,
              timings: dict[str, float]) -> None:
    """The error estimate, its parts reported as stages "estimate: ..." one after another."""
    from ..fem.mesh import prolong, red_refine
    from ..post.estimate import REFINED_LIMIT, annotate, estimate, ladder, nested, probe_corrections

    def part(name: str, func, *args, **kwargs):
        value = stage(f"estimate: {name}", func, *args, **kwargs)
        del timings[f"estimate: {name}"]      # counted in "estimate" as a whole
        return value

    if len(result.mesh.points) <= REFINED_LIMIT:
        def refined():
            mesh = red_refine(result.mesh)
            guess = prolong(result.solution.temperature, result.mesh, mesh)
            fine = (solve_joule(assemble(mesh), method=method, initial=guess)
                    if model.has_current else
                    solve(assemble(mesh), method=method, initial=guess, newton_steps=1))
            return {**brief_figures(fine), "nodes": len(mesh.points),
                    "probe_corrections": probe_corrections(fine)}

        fine = part("solve on the refined mesh", refined)
        part("compare", lambda: annotate(result.summary, nested(result, fine)))
        return
    others = []
    factors = ladder(len(result.mesh.points))
    for i, f in enumerate(factors):
        def coarse_figures(f=f):
            coarse = build_mesh(build_geometry(model, refine=refine * f))
            solution = solver_for(model)(assemble(coarse), method=method)
            figures = {**brief_figures(solution), "nodes": len(coarse.points),
                       "probe_corrections": probe_corrections(solution)}
            if solution.factor is not None:
                solution.factor.release()       # the coarse run's factors: not kept
            return figures

        others.append(part(f"coarser mesh {i + 1} of {len(factors)}", coarse_figures))
    part("compare", lambda: annotate(result.summary, estimate(result, others)))
    result.summary["warnings"].append(
        "error estimate from coarser, non-nested meshes (the run is too large to refine "
        "cheaply): it may understate the error; check with --refine")


def rebind(mesh, model: Model):
    """The same mesh for a model with the same geometry and other values."""
    geometry = replace(mesh.geometry, model=model)
    material_index = {m.name: i for i, m in enumerate(model.materials)}
    shape_material = np.array([material_index.get(s.material, -1) for s in model.shapes])
    new = replace(mesh, geometry=geometry, triangle_material=shape_material[mesh.triangle_shape])
    object.__setattr__(new, "cache", mesh.cache)       # same triangles: same areas, angles
    return new
