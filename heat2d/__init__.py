"""heat2d: 2-D heat conduction for circuit-board cross-sections, steady and transient.

The pipeline, one stage per module, a frozen dataclass between stages::

    model text --model.load/parse--> Model --fem.geometry.build_geometry--> Geometry
      --fem.mesh.build_mesh--> Mesh --fem.assembly.assemble--> System
      --fem.solver.solve--> Solution --post.results.compute_results--> Result
      --post.writers.write--> files

The rooms: ``model`` (model text -> Model), ``fem`` (the finite-element core), ``post``
(results, error estimate, map, writers), ``pipeline`` (chains the stages), ``transient``
(the march in time, thermal impedance, RC networks, periodic peaks), ``sweep``
(parameter studies), ``verify`` (verification cases as data), ``cli`` (the command line,
the only place that prints). :func:`solve` (also called :func:`run`) chains the stages.
The solver stack (scipy, shapely, triangle) loads on first use, so ``import heat2d`` and
the command line's ``--help`` stay fast.
"""

from __future__ import annotations

from .errors import (  # noqa: E402
    GeometryError,
    Heat2dError,
    MeshError,
    ModelError,
    NoHeatPathError,
    SolveError,
    ThermalRunawayError,
)
from .model import Model, from_dict, load, parse  # noqa: E402
from .version import __version__  # noqa: E402


def solve(model: Model, **options):
    """Solve a model end to end and return its :class:`~heat2d.post.results.Result`.

    The same as :func:`heat2d.pipeline.run`; see there for the options
    (``method``, ``refine``, ``reuse``, ``resistances``, ``progress``). A transient model
    (one with a ``[transient]`` section) is marched in time by
    :func:`heat2d.transient.run_transient` instead (options ``method``, ``refine``,
    ``progress``, ``zth``, ``check``), which returns a
    :class:`~heat2d.transient.TransientResult` holding the history as arrays over time.
    """
    if model.is_transient:
        from .transient.run import run_transient

        return run_transient(model, **options)
    from .pipeline import run as _run

    return _run(model, **options)


run = solve
"""The same as :func:`solve` (the command line's word)."""


def __getattr__(name: str):
    # heat2d.Result without loading the solver stack on ``import heat2d``.
    if name == "Result":
        from .post.results import Result

        return Result
    raise AttributeError(f"module 'heat2d' has no attribute {name!r}")

__all__ = [
    "GeometryError", "Heat2dError", "MeshError", "Model", "ModelError", "NoHeatPathError",
    "Result",
    "SolveError", "ThermalRunawayError", "__version__", "from_dict", "load", "parse", "run",
    "solve",
]
