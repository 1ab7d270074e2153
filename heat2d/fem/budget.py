"""The mesh budget: node counts estimated from the geometry before meshing, refusals of
meshes that would pass the model's node limit, and the warning for a first mesh forced
far below its target sizes."""

from __future__ import annotations

from typing import TYPE_CHECKING

import numpy as np

from ..errors import ModelError
from .geometry import DEFAULT_SIZE_FRACTION, MIN_CIRCLE_SEGMENTS, Geometry

if TYPE_CHECKING:                 # annotations only: the mesh module imports this one
    from .mesh import Mesh

EQUILATERAL_AREA = np.sqrt(3.0) / 4.0
"""Area of an equilateral triangle of unit side: the mesher's area bound for a size h is
EQUILATERAL_AREA·h²."""
MESH_GROWTH = 5.0
"""A first mesh with more than this many times the estimated nodes is said: the bundled
models mesh to 2.1 to 2.4 times the estimate (the estimate stays below real meshes), a
sliver forcing the mesher far below its target size to ten or a hundred times."""
GROWTH_FLOOR = 20_000
"""Meshes this small are cheap whatever forced them: no warning."""
NODES_PER_BOUND = 0.75
"""Nodes per area bound √3/4·h² of a quality mesh: a mesh of equilateral triangles at the
bound has 1/2 node per triangle; the mesher's triangles average about 0.6 of the bound,
and 1.6 to 1.8 times that count of nodes was measured on the bundled models (more with
thin layers), so 0.75 (1.5 × 1/2) stays below every measured mesh: a refused mesh would
really pass the limit."""
MAX_CIRCLE_SIDES = 20_000
"""Most chords on one circle (guard: building the geometry takes time growing faster than
the outline's vertex count, about 12 s for 10 000 chords)."""


def _worst_growth(mesh: Mesh) -> tuple[int, float, float]:
    """The shape holding most nodes beyond its estimate (a node per two triangles), and
    where its smallest triangles are."""
    shapes = mesh.geometry.model.shapes
    expected = estimate_nodes(mesh.geometry)
    extra = np.bincount(mesh.triangle_shape, minlength=len(shapes)) / 2 - expected
    worst = int(np.argmax(extra))
    mine = np.flatnonzero(mesh.triangle_shape == worst)
    small = mine[np.argsort(mesh.areas[mine])[:max(1, len(mine) // 100)]]
    x, y = mesh.points[mesh.triangles[small]].reshape(-1, 2).mean(axis=0)
    return worst, float(x), float(y)


def growth_warnings(mesh: Mesh) -> tuple[str, ...]:
    """A warning when the mesher made far more nodes than the areas and sizes call for: a
    sliver or a tiny gap forced it below the target size (a decimal slip, usually)."""
    geometry = mesh.geometry
    expected = estimate_nodes(geometry)
    n = len(mesh.points)
    if n <= GROWTH_FLOOR or n <= MESH_GROWTH * (expected.sum() + len(geometry.vertices)):
        return ()
    worst, x, y = _worst_growth(mesh)
    ratio = n / (expected.sum() + len(geometry.vertices))
    return (f"the mesh has {n} nodes, {ratio:.0f} times what the areas and sizes call for: "
            f"shape \"{geometry.model.shapes[worst].name}\" has triangles far below its "
            f"target size near ({x:.6g}, {y:.6g}), where a sliver or a tiny gap forces them "
            "(check the coordinates there, or join the pieces)",)


def check_mesh_nodes(mesh: Mesh) -> None:
    """Refuse a first mesh that came out over the node limit although its estimate
    passed (a sliver the estimate does not see), naming the shape whose triangles grew
    most and where, before anything is solved on it."""
    model = mesh.geometry.model
    n = len(mesh.points)
    if n <= model.mesh.node_limit:
        return
    expected = estimate_nodes(mesh.geometry)
    over = f"the mesh came out at {n} nodes, more than the node limit of " \
        f"{model.mesh.node_limit}"
    raise_it = "raise the limit with [mesh] node_limit or --node-limit"
    if n <= MESH_GROWTH * (expected.sum() + len(mesh.geometry.vertices)):
        raise ModelError(f"{over}; use a larger size, or {raise_it}", file=model.source,
                         entry="[mesh]")
    worst, x, y = _worst_growth(mesh)
    shape = model.shapes[worst]
    raise ModelError(
        f"{over}: its triangles fall far below the target size near ({x:.6g}, {y:.6g}), "
        f"where a sliver or a tiny gap forces them; check the coordinates there, or "
        f"{raise_it}", file=model.source, entry=f"shape \"{shape.name}\"", line=shape.line)


def estimate_nodes(geometry: Geometry) -> np.ndarray:
    """Estimated nodes of each shape's visible part, before meshing.

    n_s ≈ NODES_PER_BOUND · A_s / (√3/4 · h_s²), with A_s the visible area and h_s the
    shape's target size; the graph's own vertices come on top (see :func:`check_node_limit`).
    """
    model = geometry.model
    sizes = np.array([s.mesh_size / geometry.refine if s.mesh_size else geometry.size
                      for s in model.shapes])
    return NODES_PER_BOUND * geometry.visible_area / (EQUILATERAL_AREA * sizes**2)


def sliver_nodes(geometry: Geometry) -> np.ndarray:
    """Nodes each shape's thin visible pieces force on the mesh, whatever its target size.

    Quality triangles in a strip of width w are about w across, so a piece of length L
    and width w ≪ h carries about L/w nodes along it (measured: 1.1 L/w on a 1e-5 mm
    strip, 930 302 nodes for two 4.14 mm strips). With w = 2A/P and L = P/2 for a strip,
    that is P²/(4A) per piece (about 4 for a square, which the area term covers anyway).
    """
    import shapely

    out = np.zeros(len(geometry.model.shapes))
    for i, visible in enumerate(geometry.visible):
        parts = shapely.get_parts(visible)
        area = shapely.area(parts)
        keep = area > 0
        if keep.any():
            out[i] = float((shapely.length(parts[keep]) ** 2 / (4 * area[keep])).sum())
    return out


def check_node_limit(geometry: Geometry) -> None:
    """Refuse a geometry whose estimated mesh passes the model's node limit.

    Raises
    ------
    ModelError
        Naming the shape whose ``mesh_size`` gives most of the nodes, or ``[mesh]``.
    """
    # The larger of the area term and the strip term per shape: a sliver is counted by
    # its length over its width, a body by its area over the triangle size.
    by_area, by_strip = estimate_nodes(geometry), sliver_nodes(geometry)
    per_shape = np.maximum(by_area, by_strip)
    total = float(per_shape.sum()) + len(geometry.vertices)
    model = geometry.model
    if total > model.mesh.node_limit:
        i = int(np.argmax(per_shape))
        worst = model.shapes[i]
        if by_strip[i] > by_area[i]:
            raise ModelError(
                f"a visible piece of this shape is so thin that the mesh would need about "
                f"{total:.3g} nodes, more than the node limit of {model.mesh.node_limit}: "
                "check its coordinates for a decimal slip or an overlap that leaves a sliver, "
                "or raise the limit with [mesh] node_limit or --node-limit",
                file=model.source, entry=f"shape \"{worst.name}\"", line=worst.line)
        size = worst.mesh_size if worst.mesh_size else geometry.size * geometry.refine
        _refuse(model, worst if worst.mesh_size else None, size, geometry.refine, total)


def check_outlines(model, *, refine: float = 1.0) -> None:
    """Refuse, before the geometry is built, circles whose chords or whose own mesh pass
    the limits: a circle of radius r gets 2πr/h sides for a target size h (at most
    MAX_CIRCLE_SIDES), and a solid one about NODES_PER_BOUND·πr²/(√3/4·h²) nodes.

    Raises
    ------
    ModelError
        Naming the circle, or ``[mesh]`` when the model's size sets its chords.
    """
    circles = [s for s in model.shapes if s.circle is not None]
    if not circles:
        return
    size = model.mesh.size
    if size is None:                    # automatic: a fraction of the extent
        pts = np.vstack([[(s.circle[0] - s.circle[2], s.circle[1] - s.circle[2]),
                          (s.circle[0] + s.circle[2], s.circle[1] + s.circle[2])]
                         if s.circle else s.points for s in model.shapes])
        size = float(np.max(pts.max(axis=0) - pts.min(axis=0))) * DEFAULT_SIZE_FRACTION
    local = np.array([(s.mesh_size or size) / refine for s in circles])
    r = np.array([s.circle[2] for s in circles])
    sides = np.maximum(MIN_CIRCLE_SEGMENTS, 2 * np.pi * r / local)
    inside = np.array([0.0 if s.void else 1.0 for s in circles]) * NODES_PER_BOUND \
        * np.pi * r**2 / (EQUILATERAL_AREA * local**2)
    worst = int(np.argmax(sides))
    if sides[worst] > MAX_CIRCLE_SIDES:
        _refuse(model, circles[worst], local[worst] * refine, refine, sides[worst],
                what="chords", limit=f"the {MAX_CIRCLE_SIDES} a circle may have")
    total = float(np.sum(sides + inside))
    if total > model.mesh.node_limit:
        worst = int(np.argmax(sides + inside))
        _refuse(model, circles[worst], local[worst] * refine, refine, total)


def _refuse(model, shape, size: float, refine: float, count: float, *, what: str = "nodes",
            limit: str = "") -> None:
    """Raise the refusal of a mesh size: on the shape when its own mesh_size sets it."""
    unit = model.length_unit
    own = shape is not None and shape.mesh_size is not None
    key = "mesh_size" if own else "size"
    scaled = f" divided by --refine {refine:g}" if refine != 1 else ""
    of = f" on circle {shape.name!r}" if shape is not None and shape.circle and not own else ""
    limit = limit or f"the node limit of {model.mesh.node_limit}"
    fix = "" if what == "chords" else ", or raise the limit with [mesh] node_limit or " \
        "--node-limit"
    raise ModelError(
        f"{key} {size:g} {unit}{scaled} would make about {count:.3g} {what}{of}, more than "
        f"{limit}; use a larger {key}{fix}", file=model.source,
        entry=f"shape \"{shape.name}\"" if own else "[mesh]",
        line=shape.line if own else None)
