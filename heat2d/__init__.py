"""heat2d: steady 2-D heat conduction for circuit-board cross-sections.

The pipeline, one module per stage::

    model text --load/parse--> Model --build_geometry--> Geometry --build_mesh--> Mesh
      --assemble--> System --solve--> Solution --compute_results--> Result --write--> files

:func:`run` chains the stages; the command line is a thin layer over it.
"""

from __future__ import annotations

__version__ = "0.1.0"

from .errors import (  # noqa: E402
    GeometryError,
    Heat2dError,
    MeshError,
    ModelError,
    NoHeatPathError,
    SolveError,
)
from .model import Model, load, parse  # noqa: E402


def __getattr__(name: str):
    # The solver stack (scipy, shapely, triangle) loads on first use, so `import heat2d`
    # and the command line's --help stay fast.
    if name == "run":
        from .pipeline import run

        return run
    raise AttributeError(f"module 'heat2d' has no attribute {name!r}")

__all__ = [
    "GeometryError", "Heat2dError", "MeshError", "Model", "ModelError", "NoHeatPathError",
    "SolveError", "__version__", "load", "parse", "run",
]
