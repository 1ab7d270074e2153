"""Stage 3: :class:`~heat2d.geometry.Geometry` -> :class:`Mesh` of linear triangles.

A constrained Delaunay quality mesh from ``triangle``: every graph segment
survives as a chain of mesh edges, each face keeps its shape through a
regional attribute, and each face's target edge length becomes an area bound.
"""

from __future__ import annotations

from dataclasses import dataclass, field, replace

import numpy as np

from ..errors import MeshError
from .budget import EQUILATERAL_AREA, check_mesh_nodes, check_node_limit, growth_warnings
from .geometry import Geometry, circle_sides

"""Area of an equilateral triangle of unit side: target size h -> area bound."""


@dataclass(frozen=True, repr=False, eq=False)
class Mesh:
    """Linear triangles with their shape and material, and the exposed edges.

    Attributes
    ----------
    points : (n, 2) float
        Node coordinates in the model's length unit.
    triangles : (m, 3) int
        Node indices, counter-clockwise.
    triangle_shape, triangle_material : (m,) int
        Index into ``model.shapes`` and ``model.materials``.
    edges : (e, 2) int
        Exposed edges (outline of the body and of its voids).
    edge_boundary : (e,) int
        Boundary entry claiming each exposed edge; -1 = insulated.
    interface_a, interface_b : (k, 2) int
        The two sides of each interface edge: nodes on shape ``a``'s side and on shape
        ``b``'s side (split copies where the interface has a contact resistance).
    interface_id : (k,) int
        Interface entry of each interface edge.
    axis_length
        Length of edges on the axis of an axisymmetric model (symmetry lines).
    """

    geometry: Geometry
    points: np.ndarray
    triangles: np.ndarray
    triangle_shape: np.ndarray
    triangle_material: np.ndarray
    edges: np.ndarray
    edge_boundary: np.ndarray
    interface_a: np.ndarray
    interface_b: np.ndarray
    interface_id: np.ndarray
    axis_length: float = 0.0
    warnings: tuple[str, ...] = ()
    """Said of the mesh itself (one forced far finer than its target sizes)."""
    raw: dict = field(default_factory=dict, compare=False, repr=False)
    cache: dict = field(init=False, default_factory=dict, compare=False, repr=False)
    """Figures of the mesh alone (areas, smallest angle), shared by variants that reuse it."""

    @property
    def model(self):
        return self.geometry.model

    @property
    def areas(self) -> np.ndarray:
        """Triangle areas in length_unit²."""
        if "areas" not in self.cache:
            # Coordinates gathered one column at a time: a third of the time of
            # points[triangles] (a (m, 3, 2) gather) on a million-node mesh.
            x, y = self.points[:, 0], self.points[:, 1]
            t = self.triangles
            x0, y0 = x[t[:, 0]], y[t[:, 0]]
            self.cache["areas"] = 0.5 * ((x[t[:, 1]] - x0) * (y[t[:, 2]] - y0)
                                         - (y[t[:, 1]] - y0) * (x[t[:, 2]] - x0))
        return self.cache["areas"]

    @property
    def edge_lengths(self) -> np.ndarray:
        d = self.points[self.edges[:, 1]] - self.points[self.edges[:, 0]]
        return np.hypot(d[:, 0], d[:, 1])

    def min_angle(self) -> float:
        """Smallest interior angle of any triangle, degrees."""
        if "min_angle" not in self.cache:
            self.cache["min_angle"] = self._min_angle()
        return self.cache["min_angle"]

    def _min_angle(self) -> float:
        if len(self.triangles) == 0:
            return 0.0
        smallest = np.inf
        for lo in range(0, len(self.triangles), MIN_ANGLE_CHUNK):    # small temporaries
            p = self.points[self.triangles[lo:lo + MIN_ANGLE_CHUNK]]
            e = [p[:, (i + 1) % 3] - p[:, i] for i in range(3)]
            lengths = [np.hypot(v[:, 0], v[:, 1]) for v in e]
            for i in range(3):
                u, v = -e[(i - 1) % 3], e[i]
                cos = (u[:, 0] * v[:, 0] + u[:, 1] * v[:, 1]) / (lengths[(i - 1) % 3]
                                                                 * lengths[i])
                # arccos falls: the smallest angle has the largest cosine.
                smallest = np.minimum(smallest, np.degrees(np.arccos(
                    np.clip(cos.max(), -1.0, 1.0))))       # NaN (a degenerate triangle) stays
        return float(smallest)

    def __repr__(self) -> str:
        shapes = sorted({self.model.shapes[i].name for i in np.unique(self.triangle_shape)})
        return (f"Mesh({len(self.points)} nodes, {len(self.triangles)} triangles, "
                f"{len(self.edges)} exposed edges, shapes: {', '.join(shapes)})")


MIN_ANGLE_CHUNK = 250_000
"""Triangles measured at a time by :meth:`Mesh.min_angle`."""


def build_mesh(geometry: Geometry) -> Mesh:
    """Mesh the graph with minimum angle and per-face size bounds.

    Parameters
    ----------
    geometry
        The graph from :func:`~heat2d.geometry.build_geometry` (whose ``refine`` scales
        every target size and circle chord).

    Raises
    ------
    MeshError
        The mesher failed or returned a mesh inconsistent with the graph.
    ModelError
        The estimated node count passes ``model.mesh.node_limit`` (see
        :func:`check_node_limit`), or the mesh itself does (:func:`check_mesh_nodes`).
    """
    check_node_limit(geometry)
    regions = geometry.seeds.copy()
    regions[:, 2] = np.arange(len(regions))
    regions[:, 3] = EQUILATERAL_AREA * regions[:, 3] ** 2
    data = {
        "vertices": geometry.vertices,
        "segments": geometry.segments,
        "segment_markers": (np.arange(len(geometry.segments)) + 2)[:, None],
        "regions": regions,
    }
    if len(geometry.holes):
        data["holes"] = geometry.holes
    mesh = _finish(geometry, _triangulate(geometry, data, ""))
    check_mesh_nodes(mesh)
    said = growth_warnings(mesh)
    return replace(mesh, warnings=said) if said else mesh


def refine_mesh(mesh: Mesh, max_area: np.ndarray) -> Mesh:
    """Refine a mesh where ``max_area`` (per triangle, length_unit²; ≤ 0 = no bound) asks,
    keeping every graph segment, face and quality bound; new vertices on a circle's
    chords move onto the circle.

    Parameters
    ----------
    mesh
        From :func:`build_mesh` or an earlier :func:`refine_mesh`.
    max_area
        Area bound per triangle of ``mesh``.
    """
    raw = mesh.raw
    data = {key: raw[key] for key in ("vertices", "triangles", "segments", "segment_markers",
                                      "triangle_attributes")}
    data["triangle_max_area"] = np.where(max_area > 0, max_area, -1.0)
    out = _triangulate(mesh.geometry, data, "r")
    _snap_to_circles(mesh.geometry, out)
    return _finish(mesh.geometry, out)


def _triangulate(geometry: Geometry, data: dict, mode: str) -> dict:
    import triangle

    model = geometry.model
    try:
        # n: each triangle's neighbours (-1 across the outline), for the outline check.
        out = triangle.triangulate(data, f"{mode}pq{model.mesh.min_angle:g}aAQn")
    except Exception as exc:  # the C mesher reports failures as plain exceptions
        raise MeshError(f"mesher failed: {exc}", file=model.source) from exc
    if "triangles" not in out or len(out["triangles"]) == 0:
        raise MeshError("mesher returned no triangles", file=model.source)
    return out


def _finish(geometry: Geometry, out: dict) -> Mesh:
    """Shapes, materials, orientation, exposed edges and interface splitting of a raw mesh."""
    model = geometry.model
    face_shape = geometry.seeds[:, 2].astype(int)
    points = out["vertices"]
    # 32-bit node numbers (as the mesher's): half the memory of every index array after.
    tris = out["triangles"].astype(np.int32 if len(points) < 2**31 - 1 else np.int64)
    face = out["triangle_attributes"][:, 0].round().astype(int)
    shape = face_shape[face]
    material_index = {m.name: i for i, m in enumerate(model.materials)}
    shape_material = np.array([material_index.get(s.material, -1) for s in model.shapes])
    material = shape_material[shape]

    # Counter-clockwise orientation, whatever the mesher returned.
    p = points[tris]
    d1, d2 = p[:, 1] - p[:, 0], p[:, 2] - p[:, 0]
    cw = (d1[:, 0] * d2[:, 1] - d1[:, 1] * d2[:, 0]) < 0
    tris[cw] = tris[cw][:, [0, 2, 1]]

    # Exposed edges: output segments whose graph segment is exposed.
    seg = out["segments"].astype(np.int64)
    marker = out["segment_markers"].ravel().astype(int) - 2
    if (marker < 0).any():
        raise MeshError("mesher created segments that are not in the graph",
                        file=model.source)
    exposed = geometry.segment_exposed[marker]
    edges, edge_segment = seg[exposed], marker[exposed]
    axis = seg[geometry.segment_axis[marker]]
    _check_outline(out["triangles"], np.vstack([edges, axis]), len(points), model.source,
                   out.get("neighbors"))
    on_iface = geometry.segment_interface[marker] >= 0
    iface_edges, iface_id = seg[on_iface], geometry.segment_interface[marker[on_iface]]
    iface_b = iface_edges
    if len(iface_edges):
        points, tris, edges, iface_b = _split_interfaces(model, points, tris, shape, edges,
                                                         iface_edges, iface_id)
    d = points[axis[:, 1]] - points[axis[:, 0]]
    return Mesh(geometry=geometry, points=points, triangles=tris, triangle_shape=shape,
                triangle_material=material, edges=edges,
                edge_boundary=geometry.segment_boundary[edge_segment],
                interface_a=iface_edges, interface_b=iface_b, interface_id=iface_id,
                axis_length=float(np.hypot(d[:, 0], d[:, 1]).sum()),
                raw={key: out[key] for key in ("vertices", "triangles", "segments",
                                               "segment_markers", "triangle_attributes")})


def _split_interfaces(model, points: np.ndarray, tris: np.ndarray, shape: np.ndarray,
                      edges: np.ndarray, iface_edges: np.ndarray, iface_id: np.ndarray):
    """Give side ``b`` (a shape, or a group's shapes) of each interface its own copy of the
    interface nodes.

    Every node of the interface is split, its ends included; where a third shape meets an
    end, that shape stays joined to shape ``a``'s copy, so no heat bypasses the contact
    (the third shape then touches ``b`` through the other nodes of their shared edge
    only). A node shared by two different interfaces is split for one of them only.
    """
    n = len(points)
    # in_b[i, s]: shape s is on side b of interface i (a shape, or a group's members)
    in_b = np.zeros((max(len(model.interfaces), 1), len(model.shapes)), dtype=bool)
    for i in model.interfaces:
        in_b[i.index, [s.index for s in model.members(i.b)]] = True
    node_iface = np.full(n, -1)
    node_iface[iface_edges.ravel()] = np.repeat(iface_id, 2)
    clash = np.zeros(n, dtype=bool)
    clash[iface_edges.ravel()] = node_iface[iface_edges.ravel()] != np.repeat(iface_id, 2)
    entry_node = tris.ravel()
    entry_shape = np.repeat(shape, 3)
    k = node_iface[entry_node]
    split = (node_iface >= 0) & ~clash
    new_id = np.full(n, -1)
    new_id[split] = n + np.arange(split.sum())
    # Exposed edges: find the triangle each belongs to before renumbering.
    local = np.array([[0, 1], [1, 2], [2, 0]])
    tri_edges = np.sort(tris[:, local].reshape(-1, 2), axis=1).astype(np.int64)
    keys = tri_edges[:, 0] * n + tri_edges[:, 1]
    order = np.argsort(keys)
    e_keys = np.sort(edges, axis=1).astype(np.int64) @ np.array([n, 1])
    owner = order[np.searchsorted(keys[order], e_keys)]          # flat index tri*3 + local
    # Renumber shape b's side, in the triangles and in the exposed edges it owns.
    move = split[entry_node] & in_b[np.maximum(k, 0), entry_shape]
    flat = entry_node.copy()
    flat[move] = new_id[entry_node[move]]
    tris = flat.reshape(-1, 3)
    edge_shape = shape[owner // 3][:, None]
    move_edge = split[edges] & in_b[np.maximum(node_iface[edges], 0), edge_shape]
    edges = np.where(move_edge, new_id[edges], edges)
    b_side = np.where(split[iface_edges], new_id[iface_edges], iface_edges)
    points = np.vstack([points, points[split]])
    return points, tris, edges, b_side


def _check_outline(tris: np.ndarray, edges: np.ndarray, n: int, source: str,
                   neighbors: np.ndarray | None = None) -> None:
    """Every edge with one triangle must be an exposed edge, and the reverse.

    With the mesher's ``neighbors`` (-1 opposite a corner whose edge has no other
    triangle) the outline is read from them; otherwise edges are counted."""
    if neighbors is not None:
        t, k = np.nonzero(neighbors < 0)
        pairs = np.sort(np.column_stack([tris[t, (k + 1) % 3], tris[t, (k + 2) % 3]]),
                        axis=1).astype(np.int64)
        outline = np.sort(pairs[:, 0] * n + pairs[:, 1])
    else:
        all_edges = np.sort(tris[:, [0, 1, 1, 2, 2, 0]].reshape(-1, 2), axis=1).astype(np.int64)
        keys, counts = np.unique(all_edges[:, 0] * n + all_edges[:, 1], return_counts=True)
        outline = np.sort(keys[counts == 1])
    given = np.sort(np.sort(edges, axis=1).astype(np.int64) @ np.array([n, 1]))
    if len(outline) != len(given) or not np.array_equal(outline, given):
        raise MeshError(f"mesh outline ({len(outline)} edges) does not match the exposed "
                        f"segments ({len(given)} edges)", file=source)


def red_refine(mesh: Mesh) -> Mesh:
    """Split every triangle into four at its edge midpoints (a nested refinement).

    Every node of ``mesh`` stays a node, so nodal values compare directly; shapes,
    materials, exposed edges and interface pairs are carried over. Midpoints of circle
    chords move onto the circle, so the refined mesh also halves the outline's own error.
    The result cannot be refined further with :func:`refine_mesh`.
    """
    n = len(mesh.points)
    tri = mesh.triangles
    local = np.array([[0, 1], [1, 2], [2, 0]])
    pairs = np.sort(tri[:, local].reshape(-1, 2), axis=1).astype(np.int64)
    keys, inverse = np.unique(pairs[:, 0] * n + pairs[:, 1], return_inverse=True)
    ends = np.column_stack([keys // n, keys % n])
    mid = n + inverse.reshape(-1, 3)                              # midpoint of edge 01, 12, 20
    points = np.vstack([mesh.points, 0.5 * (mesh.points[ends[:, 0]] + mesh.points[ends[:, 1]])])
    _onto_circles(mesh, points, ends, n)
    a, b, c = tri.T
    ab, bc, ca = mid.T
    children = np.concatenate([np.column_stack(t) for t in
                               ((a, ab, ca), (ab, b, bc), (ca, bc, c), (ab, bc, ca))])
    if len(points) < 2**31 - 1:
        children = children.astype(np.int32)

    def midpoint(edges: np.ndarray) -> np.ndarray:
        e = np.sort(edges, axis=1).astype(np.int64)
        return n + np.searchsorted(keys, e[:, 0] * n + e[:, 1])

    def split(edges: np.ndarray) -> np.ndarray:
        m = midpoint(edges)
        return np.concatenate([np.column_stack([edges[:, 0], m]),
                               np.column_stack([m, edges[:, 1]])])

    return Mesh(geometry=mesh.geometry, points=points, triangles=children,
                triangle_shape=np.tile(mesh.triangle_shape, 4),
                triangle_material=np.tile(mesh.triangle_material, 4),
                edges=split(mesh.edges), edge_boundary=np.tile(mesh.edge_boundary, 2),
                interface_a=split(mesh.interface_a), interface_b=split(mesh.interface_b),
                interface_id=np.tile(mesh.interface_id, 2), axis_length=mesh.axis_length)


def prolong(values: np.ndarray, coarse: Mesh, fine: Mesh) -> np.ndarray:
    """Nodal values of ``coarse`` carried onto its :func:`red_refine` ``fine`` mesh (linear:
    each midpoint gets the mean of its edge's ends)."""
    n = len(coarse.points)
    out = np.empty(len(fine.points))
    out[:n] = values
    tri = coarse.triangles
    child = fine.triangles[: len(tri)]          # (a, ab, ca) children, in the parents' order
    out[child[:, 1]] = 0.5 * (values[tri[:, 0]] + values[tri[:, 1]])
    out[child[:, 2]] = 0.5 * (values[tri[:, 2]] + values[tri[:, 0]])
    second = fine.triangles[len(tri): 2 * len(tri)]   # (ab, b, bc)
    out[second[:, 2]] = 0.5 * (values[tri[:, 1]] + values[tri[:, 2]])
    return out


def _circle_chords(geometry: Geometry, a: np.ndarray, b: np.ndarray):
    """For each circle shape: its centre, radius and which of the segments from points
    ``a`` to ``b`` are chords of it (both ends on the circle, at most one outline side
    apart)."""
    tol = geometry.tolerance
    for shape in geometry.model.shapes:
        if shape.circle is None:
            continue
        cx, cy, r = shape.circle
        sides = circle_sides(geometry, shape)
        ra = np.hypot(a[:, 0] - cx, a[:, 1] - cy)
        rb = np.hypot(b[:, 0] - cx, b[:, 1] - cy)
        angle = np.abs(np.angle(((a[:, 0] - cx) + 1j * (a[:, 1] - cy))
                                * np.conj((b[:, 0] - cx) + 1j * (b[:, 1] - cy))))
        chord = (np.abs(ra - r) <= tol) & (np.abs(rb - r) <= tol) \
            & (angle <= 2 * np.pi / sides * (1 + 1e-6))
        yield cx, cy, r, chord


def _radially_onto(points: np.ndarray, index: np.ndarray, cx: float, cy: float,
                   r: float) -> None:
    m = points[index]
    d = np.hypot(m[:, 0] - cx, m[:, 1] - cy)
    points[index] = np.column_stack([cx + (m[:, 0] - cx) * r / d,
                                     cy + (m[:, 1] - cy) * r / d])


def _onto_circles(mesh: Mesh, points: np.ndarray, ends: np.ndarray, n: int) -> None:
    """Move the midpoints of circle chords radially onto the circle, in place."""
    a, b = mesh.points[ends[:, 0]], mesh.points[ends[:, 1]]
    for cx, cy, r, chord in _circle_chords(mesh.geometry, a, b):
        _radially_onto(points, n + np.flatnonzero(chord), cx, cy, r)


def _snap_to_circles(geometry: Geometry, out: dict) -> None:
    """Move the vertices the mesher put on circle chords onto the circle, in place, so
    that an adaptively refined outline approaches its circle as its edges shrink (as
    ``--refine`` and :func:`red_refine` do). A vertex moves by the sagitta of its
    segment, L²/(8r), a few per cent of the triangles beside it."""
    seg = out["segments"].astype(np.int64)
    graph = geometry.segments[out["segment_markers"].ravel().astype(int) - 2]
    a, b = geometry.vertices[graph[:, 0]], geometry.vertices[graph[:, 1]]
    points = out["vertices"]
    for cx, cy, r, chord in _circle_chords(geometry, a, b):
        nodes = np.unique(seg[chord])
        _radially_onto(points, nodes, cx, cy, r)
