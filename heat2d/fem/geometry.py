"""Stage 2: :class:`~heat2d.model.Model` -> :class:`Geometry`, a planar straight-line graph.

Shapes are painted in file order (a later shape covers earlier ones), every
shape outline that lies on the body becomes a graph segment, each face of the
graph gets a seed with the material of the shape on top there, and each
boundary selector is resolved to the exposed segments it claims.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
import shapely
from shapely.geometry import LineString, Polygon

from ..errors import GeometryError
from ..model import Boundary, Model, Shape
from .sanity import sanity_warnings

DEFAULT_SIZE_FRACTION = 1 / 50
"""Default target edge length as a fraction of the model's largest extent."""
MIN_CIRCLE_SEGMENTS = 16


@dataclass(frozen=True, repr=False, eq=False)
class Geometry:
    """The planar straight-line graph handed to the mesher, in model length units.

    Attributes
    ----------
    vertices, segments
        Graph vertices (n, 2) and segments (s, 2) as vertex index pairs.
    segment_exposed
        True where a segment lies on the outline of the body or of a void.
    segment_boundary
        Index of the boundary entry claiming each segment; -1 where none does.
    segment_interface
        Index of the interface entry on each segment; -1 where none is.
    segment_axis
        True for segments on the axis of an axisymmetric model (symmetry, not exposed).
    seeds
        One row per face: x, y, shape index, target edge length.
    holes
        One point inside each face that is void or outside every shape.
    visible
        The visible part of each shape (shapely geometry, possibly empty).
    """

    model: Model
    vertices: np.ndarray
    segments: np.ndarray
    segment_exposed: np.ndarray
    segment_boundary: np.ndarray
    segment_interface: np.ndarray
    segment_axis: np.ndarray
    seeds: np.ndarray
    holes: np.ndarray
    visible: tuple
    body: shapely.Geometry
    size: float
    tolerance: float
    warnings: tuple[str, ...]
    refine: float = 1.0

    @property
    def visible_area(self) -> np.ndarray:
        """Visible area of each shape, in length_unit²."""
        return np.array([0.0 if s.void else g.area
                         for s, g in zip(self.model.shapes, self.visible, strict=True)])

    def claimed_length(self) -> np.ndarray:
        """Length of exposed edges claimed by each boundary entry (model units)."""
        lengths = self.segment_lengths()
        mask = self.segment_boundary >= 0
        return np.bincount(self.segment_boundary[mask], lengths[mask],
                           minlength=len(self.model.boundaries))

    def insulated_length(self) -> float:
        """Total exposed length that no boundary entry claims (zero flux)."""
        lengths = self.segment_lengths()
        return float(lengths[self.segment_exposed & (self.segment_boundary < 0)].sum())

    def segment_lengths(self) -> np.ndarray:
        d = self.vertices[self.segments[:, 1]] - self.vertices[self.segments[:, 0]]
        return np.hypot(d[:, 0], d[:, 1])

    def __repr__(self) -> str:
        return (f"Geometry({len(self.vertices)} vertices, {len(self.segments)} segments, "
                f"{len(self.seeds)} faces, {len(self.holes)} holes, size={self.size:g})")


def build_geometry(model: Model, *, refine: float = 1.0) -> Geometry:
    """Paint the shapes, build the graph and resolve the boundary selectors.

    Parameters
    ----------
    model
        From :func:`heat2d.load`.
    refine
        Divide every target edge length, circle chords included, by this factor.

    Raises
    ------
    GeometryError
        A polygon is not simple, nothing solid is left, or selectors clash.
    """
    extent = _extent(model)
    grid = 10.0 ** (math.floor(math.log10(extent)) - 9)
    tol = 8 * grid
    size = (model.mesh.size if model.mesh.size is not None
            else extent * DEFAULT_SIZE_FRACTION) / refine
    polys = [_polygon(model, s, size, grid, refine) for s in model.shapes]

    visible, body = _paint(model, polys, grid)
    if body.is_empty or body.area <= 0:
        raise GeometryError("no solid material is left after voids and covering shapes",
                            file=model.source, entry="[[shape]]")

    # Graph: every outline piece on the body, noded, but none of a shape that later ones
    # cover whole: its outline lies inside them, and one a hair from a visible edge would
    # force a sliver of triangles there (a covered 1e-5 mm pour under a 16 mm layer
    # meshed to 7 million nodes). A partly covered outline stays: dropping its covered
    # part leaves slivers of the visible pieces to the mesher without their faces.
    outlines = [p.boundary for p, v in zip(polys, visible, strict=True)
                if not v.is_empty and v.area > 0] + [body.boundary]
    lines = shapely.intersection(shapely.union_all(outlines, grid_size=grid), body,
                                 grid_size=grid)
    lines = shapely.line_merge(shapely.union_all(
        [g for g in shapely.get_parts(lines) if g.geom_type in ("LineString", "LinearRing")],
        grid_size=grid))
    parts = shapely.get_parts(lines)
    coords = [shapely.get_coordinates(g) for g in parts]
    starts = np.concatenate([c[:-1] for c in coords])
    ends = np.concatenate([c[1:] for c in coords])
    starts, ends = _split_at(starts, ends, _box_cuts(model, body, grid), tol)
    vertices, inverse = np.unique(np.vstack([starts, ends]), axis=0, return_inverse=True)
    inverse = inverse.ravel()
    segments = np.column_stack([inverse[: len(starts)], inverse[len(starts):]])
    vertices, segments = _clean_graph(vertices, segments, tol)

    # Faces: seed each with the shape on top there.
    # From the cleaned graph the mesher gets, so that no sliver face of a removed stub
    # puts a hole point inside the body.
    edges = shapely.linestrings(np.stack([vertices[segments[:, 0]],
                                          vertices[segments[:, 1]]], axis=1))
    faces = shapely.get_parts(shapely.polygonize(edges))
    points = shapely.point_on_surface(faces)
    fx, fy = shapely.get_coordinates(points).T
    top = np.full(len(faces), -1)
    for i in range(len(polys) - 1, -1, -1):
        hit = (top < 0) & shapely.contains_xy(polys[i], fx, fy)
        top[hit] = i
    void = np.array([s.void for s in model.shapes])
    is_hole = (top < 0) | void[np.maximum(top, 0)]
    shape_size = np.array([s.mesh_size / refine if s.mesh_size else size
                           for s in model.shapes])
    solid_faces = ~is_hole
    seeds = np.column_stack([fx[solid_faces], fy[solid_faces], top[solid_faces],
                             shape_size[top[solid_faces]]])
    holes = np.column_stack([fx[is_hole], fy[is_hole]])

    # Exposed segments and boundary claims.
    a, b = vertices[segments[:, 0]], vertices[segments[:, 1]]
    mid = 0.5 * (a + b)
    exposed = _on(body.boundary, a, b, mid, tol)
    axis = np.zeros(len(a), dtype=bool)
    if model.axisymmetric:
        # Edges on the axis (x = 0) are symmetry lines, not surfaces.
        axis = exposed & (np.abs(a[:, 0]) <= tol) & (np.abs(b[:, 0]) <= tol)
        exposed &= ~axis
    claims = _claims(model, polys, exposed, a, b, mid, tol)
    warnings = _exterior_voids(model, polys, claims, a, b, mid, tol)
    interface = _interfaces(model, visible, exposed, a, b, mid, tol)

    _check_probes(model, body, tol, grid)
    warnings += sanity_warnings(model, visible, claims, a, b, size, extent, tol)
    for s, v in zip(model.shapes, visible, strict=True):
        if not s.void and v.area <= 0:
            powered = " and its power is lost" if (s.power or s.power_density) else ""
            warnings.append(f"shape \"{s.name}\" is fully covered by later shapes{powered}")
    return Geometry(model=model, vertices=vertices, segments=segments,
                    segment_exposed=exposed, segment_boundary=claims,
                    segment_interface=interface, segment_axis=axis, seeds=seeds,
                    holes=holes, visible=tuple(visible), body=body, size=size,
                    tolerance=tol, warnings=tuple(warnings), refine=refine)


def _clean_graph(vertices: np.ndarray, segments: np.ndarray, tol: float
                 ) -> tuple[np.ndarray, np.ndarray]:
    """Merge vertices closer than ``tol`` and drop dangling segments.

    Noding outlines that cross at a shallow angle (two overlapping circles) on the
    snapping grid can leave two crossing points a grid step apart, joined by a stub that
    ends nowhere; the mesher keeps the stub's free end as a vertex no triangle uses.
    Every true graph edge lies on a closed outline, so each vertex meets at least two
    segments: stubs are removed until that holds.
    """
    from scipy.sparse import coo_matrix
    from scipy.sparse.csgraph import connected_components
    from scipy.spatial import cKDTree

    pairs = cKDTree(vertices).query_pairs(tol, output_type="ndarray")
    if len(pairs):
        n = len(vertices)
        link = coo_matrix((np.ones(len(pairs)), (pairs[:, 0], pairs[:, 1])), shape=(n, n))
        _, label = connected_components(link, directed=False)
        # Each group of near-coincident vertices becomes its first member.
        first = np.full(label.max() + 1, n)
        np.minimum.at(first, label, np.arange(n))
        segments = first[label][segments]
    segments = segments[segments[:, 0] != segments[:, 1]]
    segments = np.unique(np.sort(segments, axis=1), axis=0)
    while len(segments):
        degree = np.bincount(segments.ravel(), minlength=len(vertices))
        stub = (degree[segments] < 2).any(axis=1)
        if not stub.any():
            break
        segments = segments[~stub]
    used, inverse = np.unique(segments, return_inverse=True)
    return vertices[used], inverse.reshape(segments.shape)


def _exterior_voids(model: Model, polys: list, claims: np.ndarray, a: np.ndarray,
                    b: np.ndarray, mid: np.ndarray, tol: float) -> list[str]:
    """Warn when "exterior" also takes the surface of a void (often a sealed cavity)."""
    ext = [bc for bc in model.boundaries if bc.selector.kind == "exterior"]
    if not ext:
        return []
    taken = claims == ext[0].index
    names = [s.name for s in model.shapes
             if s.void and (taken & _on(polys[s.index].boundary, a, b, mid, tol)).any()]
    if not names:
        return []
    return [f"boundary \"{ext[0].name}\" (exterior) also covers the surface of void(s) "
            f"{', '.join(names)}; give a sealed cavity its own entry (e.g. heat_flux = 0)"]


def _box_cuts(model: Model, body: shapely.Geometry, grid: float) -> np.ndarray:
    """Points where a box selector's outline crosses the body outline: the graph is cut there
    so that a box claims exactly the part of an edge inside it."""
    cuts = []
    for bc in model.boundaries:
        if bc.selector.kind == "box":
            x0, y0, x1, y1 = bc.selector.box
            box = shapely.box(x0, y0, x1, y1).boundary
            cuts.append(shapely.get_coordinates(
                shapely.intersection(box, body.boundary, grid_size=grid)))
    return np.vstack(cuts) if cuts else np.empty((0, 2))


def _split_at(starts: np.ndarray, ends: np.ndarray, cuts: np.ndarray, tol: float
              ) -> tuple[np.ndarray, np.ndarray]:
    """Split segments (starts[i], ends[i]) at the cut points lying on them."""
    if len(cuts) == 0:
        return starts, ends
    d = ends - starts                                            # (s, 2)
    length2 = (d * d).sum(axis=1)
    rel = cuts[None, :, :] - starts[:, None, :]                  # (s, c, 2)
    t = (rel * d[:, None, :]).sum(axis=2) / length2[:, None]
    off = rel - t[..., None] * d[:, None, :]
    dist = np.hypot(off[..., 0], off[..., 1])
    margin = tol / np.sqrt(length2)[:, None]
    on = (dist <= tol) & (t > margin) & (t < 1 - margin)
    if not on.any():
        return starts, ends
    new_starts, new_ends = [starts[~on.any(axis=1)]], [ends[~on.any(axis=1)]]
    for i in np.flatnonzero(on.any(axis=1)):                     # only the few cut segments
        ts = np.unique(np.concatenate([[0.0], t[i, on[i]], [1.0]]))
        pts = starts[i] + ts[:, None] * d[i]
        pts[0], pts[-1] = starts[i], ends[i]
        pts[1:-1] = cuts[on[i]][np.argsort(t[i, on[i]])][: len(pts) - 2]
        new_starts.append(pts[:-1])
        new_ends.append(pts[1:])
    return np.vstack(new_starts), np.vstack(new_ends)


def _paint(model: Model, polys: list, grid: float) -> tuple[list, shapely.Geometry]:
    """What later shapes leave of each shape, and the solid body (voids taken out).

    Each shape is differenced only against the later shapes whose bounding boxes meet
    it (an STRtree query), so many repeated copies paint in about n log n rather than
    against the union of everything painted so far."""
    tree = shapely.STRtree(polys)
    left, right = tree.query(polys, predicate="intersects")
    later = right > left
    left, right = left[later], right[later]
    order = np.argsort(left, kind="stable")
    left, right = left[order], right[order]
    bounds = np.searchsorted(left, np.arange(len(polys) + 1))
    visible = []
    for i, poly in enumerate(polys):
        over = right[bounds[i]:bounds[i + 1]]
        if len(over) == 0:
            visible.append(poly)
            continue
        covered = shapely.union_all([polys[j] for j in over], grid_size=grid)
        visible.append(shapely.difference(poly, covered, grid_size=grid))
    solid = [v for s, v in zip(model.shapes, visible, strict=True) if not s.void]
    return visible, shapely.union_all(solid, grid_size=grid)


EXACT_CIRCLE_SIDES = 2048
"""Circles are drawn with this many sides to check probes against the true outline."""


def _check_probes(model: Model, body: shapely.Geometry, tol: float, grid: float) -> None:
    """Every probe must lie in the body as drawn with true circles (not their polygons,
    which change with the mesh size): a probe in the sliver between a circle and its
    polygon is then valid on every mesh (results.probe_weights reads it from the nearest
    triangle), and one inside a void circle invalid on every mesh."""
    circles = [s.circle for s in model.shapes if s.circle is not None]
    exact, exact_tol = body, tol
    if circles and model.probes:
        polys = [shapely.set_precision(Polygon(
            shape_outline(s, 2 * math.pi * s.circle[2] / EXACT_CIRCLE_SIDES)
            if s.circle is not None else s.points), grid) for s in model.shapes]
        exact = _paint(model, polys, grid)[1]
        exact_tol += max(r for _, _, r in circles) * (1 - math.cos(math.pi / EXACT_CIRCLE_SIDES))
    for probe in model.probes:
        point = shapely.Point(probe.x, probe.y)
        if not shapely.dwithin(exact, point, exact_tol):
            where = (": it lies just inside a void circle, whose mesh polygon leaves it in "
                     "the material only on coarse meshes; move it out of the circle"
                     if shapely.dwithin(body, point, tol) else
                     " (outside every shape, or in a void)")
            raise GeometryError(f"at = [{probe.x:g}, {probe.y:g}] is not inside the body"
                                f"{where}", file=model.source,
                                entry=f"probe \"{probe.name}\"", line=probe.line)


def circle_sides(geometry: Geometry, shape: Shape) -> int:
    """Number of sides of a circle shape's polygon in this geometry."""
    local = shape.mesh_size / geometry.refine if shape.mesh_size else geometry.size
    return max(MIN_CIRCLE_SEGMENTS, math.ceil(2 * math.pi * shape.circle[2] / local))


def shape_outline(shape: Shape, size: float) -> np.ndarray:
    """Outline vertices of a shape; a circle as a polygon with chords no longer than ``size``."""
    if shape.circle is None:
        return np.asarray(shape.points, dtype=float)
    x, y, r = shape.circle
    n = max(MIN_CIRCLE_SEGMENTS, math.ceil(2 * math.pi * r / size))
    t = np.linspace(0.0, 2 * math.pi, n, endpoint=False)
    return np.column_stack([x + r * np.cos(t), y + r * np.sin(t)])


def _extent(model: Model) -> float:
    pts = np.vstack([_bbox_points(s) for s in model.shapes])
    span = pts.max(axis=0) - pts.min(axis=0)
    return float(max(span.max(), np.abs(pts).max() * 1e-6, 1e-300))


def _bbox_points(shape: Shape) -> np.ndarray:
    if shape.circle is not None:
        x, y, r = shape.circle
        return np.array([[x - r, y - r], [x + r, y + r]])
    return np.asarray(shape.points, dtype=float)


def _polygon(model: Model, shape: Shape, size: float, grid: float, refine: float) -> Polygon:
    local = shape.mesh_size / refine if shape.mesh_size else size
    outline = shape_outline(shape, local)
    poly = Polygon(outline)
    if not poly.is_valid or not poly.exterior.is_simple or poly.area <= 0:
        reason = shapely.is_valid_reason(poly)
        raise GeometryError(f"polygon is not simple: {reason}", file=model.source,
                            entry=f"shape \"{shape.name}\"", line=shape.line)
    snapped = shapely.set_precision(poly, grid)
    if snapped.is_empty or snapped.area <= 0:
        raise GeometryError("shape is too small for the model's extent", file=model.source,
                            entry=f"shape \"{shape.name}\"", line=shape.line)
    return snapped


def _on(geom: shapely.Geometry, a: np.ndarray, b: np.ndarray, mid: np.ndarray,
        tol: float) -> np.ndarray:
    """True for segments (a, b) lying on ``geom`` (both ends and the midpoint within tol)."""
    if geom is None or geom.is_empty or len(a) == 0:
        return np.zeros(len(a), dtype=bool)
    shapely.prepare(geom)
    return (shapely.dwithin(geom, shapely.points(mid), tol)
            & shapely.dwithin(geom, shapely.points(a), tol)
            & shapely.dwithin(geom, shapely.points(b), tol))


SIDE_CORNERS = {"bottom": (0, 1), "right": (1, 2), "top": (2, 3), "left": (3, 0)}
"""Rect side -> indices of its two corners in ``Shape.points``."""


def _select(boundary: Boundary, polys: list[Polygon], model: Model, a: np.ndarray,
            b: np.ndarray, mid: np.ndarray, tol: float) -> np.ndarray:
    """Segments (exposed or not) that a selector names; ``exterior`` is handled by the caller."""
    sel = boundary.selector
    if sel.kind == "box":
        x0, y0, x1, y1 = sel.box
        inside = [(p[:, 0] >= x0 - tol) & (p[:, 0] <= x1 + tol) & (p[:, 1] >= y0 - tol)
                  & (p[:, 1] <= y1 + tol) for p in (a, b)]
        return inside[0] & inside[1]
    members = model.members(sel.shape)
    if sel.kind == "shape":
        outline = shapely.union_all([polys[m.index].boundary for m in members])
        return _on(outline, a, b, mid, tol)
    i, j = SIDE_CORNERS[sel.side]
    group = next((g for g in model.groups if g.name == sel.shape), None)
    if group is not None and group.rect is not None:          # a stack: its outer rect
        x0, y0, x1, y1 = group.rect
        corners = ((x0, y0), (x1, y0), (x1, y1), (x0, y1))
        sides = [LineString([corners[i], corners[j]])]
    else:
        sides = [LineString([m.points[i], m.points[j]]) for m in members]
    return _on(shapely.union_all(sides), a, b, mid, tol)


def _interfaces(model: Model, visible: list, exposed: np.ndarray, a: np.ndarray,
                b: np.ndarray, mid: np.ndarray, tol: float) -> np.ndarray:
    """Interior segments shared by the visible parts of each interface's two shapes."""
    owner = np.full(len(a), -1)
    for itf in model.interfaces:
        va, vb = (shapely.union_all([visible[s.index] for s in model.members(n)])
                  for n in (itf.a, itf.b))
        for name, v in ((itf.a, va), (itf.b, vb)):
            if v.is_empty or v.area <= 0:
                raise GeometryError(f"{name!r} is wholly covered by later shapes, so the "
                                    "interface cannot exist (remove it, or paint the shape "
                                    "after the ones covering it)", file=model.source,
                                    entry=f"interface \"{itf.name}\"", line=itf.line)
        mask = (~exposed & _on(shapely.boundary(va), a, b, mid, tol)
                & _on(shapely.boundary(vb), a, b, mid, tol))
        if not mask.any():
            raise GeometryError(f"{itf.a!r} and {itf.b!r} share no edge (they must touch "
                                "along a line where both are visible)", file=model.source,
                                entry=f"interface \"{itf.name}\"", line=itf.line)
        clash = mask & (owner >= 0)
        if clash.any():
            other = model.interfaces[owner[np.argmax(clash)]]
            raise GeometryError(f"shares edges with interface \"{other.name}\"",
                                file=model.source, entry=f"interface \"{itf.name}\"",
                                line=itf.line)
        owner[mask] = itf.index
    return owner


SELECTORS = ("side", "shape", "box", "exterior")
"""Selector kinds, in the order claims are resolved (exterior takes what is left)."""


def _claims(model: Model, polys: list[Polygon], exposed: np.ndarray, a: np.ndarray,
            b: np.ndarray, mid: np.ndarray, tol: float) -> np.ndarray:
    owner = np.full(len(a), -1)
    exterior = []
    for bc in model.boundaries:
        entry = f"boundary \"{bc.name}\""
        if bc.selector.kind == "exterior":
            exterior.append(bc)
            continue
        mask = _select(bc, polys, model, a, b, mid, tol) & exposed
        if not mask.any():
            raise GeometryError(f"on = \"{bc.selector}\" selects no exposed edge "
                                "(only the outline of the body and of its voids can carry "
                                "a boundary)", file=model.source, entry=entry, line=bc.line)
        clash = mask & (owner >= 0)
        if clash.any():
            k = int(np.argmax(clash))
            other = model.boundaries[owner[k]]
            raise GeometryError(
                f"claims the same edge as boundary \"{other.name}\" near "
                f"({mid[k, 0]:.6g}, {mid[k, 1]:.6g}) (\"{bc.selector}\" and "
                f"\"{other.selector}\"); narrow one selector", file=model.source,
                entry=entry, line=bc.line)
        owner[mask] = bc.index
    if len(exterior) > 1:
        raise GeometryError("only one boundary may use on = \"exterior\"", file=model.source,
                            entry=f"boundary \"{exterior[1].name}\"", line=exterior[1].line)
    if exterior:
        owner[exposed & (owner < 0)] = exterior[0].index
    return owner
