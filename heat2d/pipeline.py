"""Chains the stages: Model -> Geometry -> Mesh -> System -> Solution -> Result."""

from __future__ import annotations

import time
from collections.abc import Callable

from .assembly import assemble
from .geometry import build_geometry
from .mesh import build_mesh
from .model import Model
from .results import Result, compute_results
from .solve import solve

Progress = Callable[[str, str], None]
"""Called as progress(stage, event) with event "start", then "end" or "failed"."""

STAGES = ("geometry", "mesh", "assembly", "solve", "results")


def run(model: Model, *, method: str = "auto", refine: float = 1.0,
        progress: Progress | None = None) -> Result:
    """Solve a model end to end.

    Parameters
    ----------
    model
        From :func:`heat2d.load` or :func:`heat2d.parse`.
    method
        Linear solver: ``auto``, ``direct`` or ``multigrid``.
    refine
        Divide every target edge length by this factor.
    progress
        Optional callback told when each stage starts and ends.

    Returns
    -------
    Result
        Fields and summary; the summary records each stage's time in seconds.
    """
    timings: dict[str, float] = {}

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

    geometry = stage("geometry", build_geometry, model, refine=refine)
    mesh = stage("mesh", build_mesh, geometry)
    system = stage("assembly", assemble, mesh)
    solution = stage("solve", solve, system, method=method)
    start = time.perf_counter()
    result = compute_results(solution, timings=timings)
    result.summary["timings_s"]["results"] = time.perf_counter() - start
    return result
