"""Painting, the planar graph, faces and selectors (model-format.md: shapes and boundaries)."""

from __future__ import annotations

import numpy as np
import pytest

import heat2d
from heat2d import GeometryError, NoHeatPathError
from heat2d.fem.assembly import assemble
from heat2d.fem.geometry import build_geometry
from heat2d.fem.mesh import build_mesh
from tests.common import board

MATERIALS = """
[materials.a]
k = 1
[materials.b]
k = 2
[materials.c]
k = 3
"""


def shapes_model(shapes: str, boundaries: str = "", mesh: str = "size = 0.25") -> heat2d.Model:
    return heat2d.parse(MATERIALS + shapes + boundaries + f"\n[mesh]\n{mesh}\n")


def rect(name, material, x, y, w, h, extra=""):
    return (f'[[shape]]\nname = "{name}"\nmaterial = "{material}"\n'
            f"rect = {{ x = {x}, y = {y}, width = {w}, height = {h} }}\n{extra}\n")


def material_areas(mesh) -> dict[str, float]:
    areas = np.bincount(mesh.triangle_material, mesh.areas, minlength=len(mesh.model.materials))
    return {m.name: areas[i] for i, m in enumerate(mesh.model.materials)}


def test_later_shapes_cover_earlier_ones():
    model = shapes_model(rect("base", "a", 0, 0, 4, 2) + rect("top", "b", 1, 1, 2, 2))
    geo = build_geometry(model)
    # Exact areas of the painted pieces (plane geometry).
    assert geo.visible_area == pytest.approx([8 - 2, 4])
    mesh = build_mesh(geo)
    assert material_areas(mesh) == pytest.approx({"a": 6, "b": 4, "c": 0}, abs=1e-12)


def test_covered_outline_splits_a_piece_and_every_face_keeps_its_material():
    # "top" covers part of the outline of "mid"; that outline cuts top's visible piece into
    # two faces, and both must be meshed as top's material (c), not mid's (b).
    model = shapes_model(rect("base", "a", 0, 0, 6, 2) + rect("mid", "b", 1, 0.5, 2, 1)
                         + rect("top", "c", 2, 0, 2, 2))
    geo = build_geometry(model)
    assert len(geo.seeds) == 5          # base left and right of top, mid, top split in two
    mesh = build_mesh(geo)
    assert material_areas(mesh) == pytest.approx({"a": 12 - 1 - 4, "b": 1, "c": 4}, abs=1e-12)
    # Shape outlines survive as mesh edges: no triangle straddles x = 2 or x = 3.
    x = mesh.points[mesh.triangles, 0]
    for line in (2.0, 4.0):             # top's sides span the whole height
        assert not ((x.min(axis=1) < line - 1e-12) & (x.max(axis=1) > line + 1e-12)).any()


def test_a_covered_sliver_outline_does_not_refine_the_mesh():
    # A 1e-5-thick pour wholly under a later layer: its outline a hair from the layer's
    # edge once forced a sliver of triangles along it (7 million nodes for a 16 mm pour,
    # found by the long property run). Covered whole, its outline leaves the graph and
    # the mesh is as without it (two more vertices on the layer's edge at most; a 1e-3
    # outline would add tens of thousands of nodes). A partly covered outline stays (the
    # test above).
    layer = rect("layer", "b", 0, 1, 20, 0.07)
    plain = build_mesh(build_geometry(shapes_model(rect("base", "a", 0, 0, 20, 1) + layer)))
    pour = rect("pour", "b", 2, 1, 16, 1e-3)
    hidden = build_mesh(build_geometry(shapes_model(rect("base", "a", 0, 0, 20, 1) + pour
                                                    + layer)))
    assert len(hidden.points) <= 1.2 * len(plain.points)


def test_shapes_that_share_edges_within_rounding_make_no_sliver():
    # 0.1 + 0.2 != 0.3 in binary; the shapes must still meet exactly with no thin face.
    model = shapes_model(rect("low", "a", 0, 0, 1, '"0.1 + 0.2"') + rect("high", "b", 0, 0.3, 1, 0.5)
                         + rect("side", "c", 1, 0, 0.5, 0.8))
    geo = build_geometry(model)
    assert len(geo.seeds) == 3
    mesh = build_mesh(geo)
    assert mesh.min_angle() >= 30 - 1e-6
    assert mesh.areas.min() > 1e-4     # no sliver triangles from a near-duplicate edge


def test_void_is_cut_and_its_surface_selectable():
    model = shapes_model(
        rect("plate", "a", 0, 0, 4, 4)
        + '[[shape]]\nname = "hole"\nvoid = true\ncircle = { x = 2, y = 2, r = 1 }\n',
        '[[boundary]]\nname = "bore"\non = "hole"\ntemperature = 80\n'
        '[[boundary]]\nname = "rim"\non = "exterior"\nh = 5\nambient = 20\n')
    geo = build_geometry(model)
    mesh = build_mesh(geo)
    # Polygonal circle: n chords no longer than the mesh size, area n/2 sin(2π/n) r².
    # Tolerance 1e-9: outline vertices are snapped to 1e-9 of the model extent.
    n = int(np.ceil(2 * np.pi / 0.25))
    assert mesh.areas.sum() == pytest.approx(16 - 0.5 * n * np.sin(2 * np.pi / n), rel=1e-9)
    claimed = geo.claimed_length()
    assert claimed[0] == pytest.approx(2 * n * np.sin(np.pi / n), rel=1e-9)
    assert claimed[1] == pytest.approx(16, rel=1e-12)
    assert geo.insulated_length() == 0
    d = mesh.points[mesh.edges[mesh.edge_boundary == 0]] - 2.0
    assert np.hypot(d[..., 0], d[..., 1]).max() == pytest.approx(1.0)


def test_circle_chords_are_no_longer_than_the_local_size():
    model = shapes_model(rect("plate", "a", -2, -2, 4, 4)
                         + '[[shape]]\nname = "rod"\nmaterial = "b"\n'
                         'circle = { x = 0, y = 0, r = 1 }\nmesh_size = 0.1\n')
    mesh = build_mesh(build_geometry(model))
    tri = mesh.triangles[mesh.triangle_shape == 1]
    assert mesh.areas[mesh.triangle_shape == 1].sum() == pytest.approx(
        0.5 * 63 * np.sin(2 * np.pi / 63), rel=1e-9)   # ceil(2π/0.1) = 63 sides; snapping
    edges = mesh.points[tri[:, [1, 2, 0]]] - mesh.points[tri]
    assert np.hypot(edges[..., 0], edges[..., 1]).max() <= 0.1 * 1.5


def test_side_selector_takes_the_whole_end_including_later_layers():
    # model-format.md: "board.left" is the board's whole left end, copper layers included.
    text = board({'rect = { x = 8, y = "t", width = 4, height = 0.07 }':
                  'rect = { x = 0, y = 0.5, width = 20, height = 0.035 }'})
    geo = build_geometry(heat2d.parse(text))
    assert geo.claimed_length()[0] == pytest.approx(1.6, rel=1e-12)
    mesh = build_mesh(geo)
    rail = mesh.edges[mesh.edge_boundary == 0]
    assert set(np.unique(mesh.triangle_shape[np.isin(mesh.triangles, rail).any(axis=1)])) == {0, 1}


def test_box_selector_and_insulated_length():
    text = board({'on = "exterior"': "on = { box = [-1, -1, 21, 0] }"})
    geo = build_geometry(heat2d.parse(text))
    assert geo.claimed_length() == pytest.approx([1.6, 20.0], rel=1e-12)
    # Everything else is insulated: board top outside the pad (16) + right end (1.6) + pad
    # sides and top (2*0.07 + 4).
    assert geo.insulated_length() == pytest.approx(16 + 1.6 + 0.14 + 4, rel=1e-12)


def test_two_entries_claiming_one_edge_is_an_error():
    text = board(extra='[[boundary]]\nname = "clamp"\non = "board.bottom"\ntemperature = 30\n'
                       '[[boundary]]\nname = "sink"\non = { box = [5, -1, 6, 1] }\n'
                       'temperature = 30\n')
    with pytest.raises(GeometryError, match=r'boundary "sink": claims the same edge as boundary '
                       r'"clamp" near \(5.*, 0\)'):
        build_geometry(heat2d.parse(text, source="m.toml"))


def test_selector_matching_no_exposed_edge_is_an_error():
    # The pad's bottom lies inside the body, so it is not exposed.
    text = board({'on = "board.left"': 'on = "pad.bottom"'})
    with pytest.raises(GeometryError, match=r'boundary "rail": on = "pad.bottom" selects no '
                       r'exposed edge'):
        build_geometry(heat2d.parse(text))


def test_polygon_must_be_simple():
    model = shapes_model('[[shape]]\nname = "bowtie"\nmaterial = "a"\n'
                         "polygon = [[0, 0], [1, 1], [1, 0], [0, 1]]\n")
    with pytest.raises(GeometryError, match=r'shape "bowtie": polygon is not simple: '
                       r'Self-intersection'):
        build_geometry(model)


def test_probe_outside_the_body_is_an_error():
    text = board({"at = [10, 0.8]": "at = [30, 0.8]"})
    with pytest.raises(GeometryError, match=r'probe "centre": at = \[30, 0.8\] is not inside'):
        build_geometry(heat2d.parse(text))


def test_a_body_without_heat_path_is_named():
    text = board(extra=rect("island", "fr4", 30, 0, 2, 2)).replace('on = "exterior"',
                                                                   'on = "board.top"')
    with pytest.raises(NoHeatPathError, match=r"body 2 of 2 \(shapes: island\) has no "
                       r"fixed-temperature, convection or radiation boundary"):
        assemble(build_mesh(build_geometry(heat2d.parse(text))))


def test_fully_covered_power_shape_warns():
    text = board(extra=rect("lid", "copper", 7, 1.6, 6, 0.5))
    geo = build_geometry(heat2d.parse(text))
    assert geo.warnings == ("shape \"pad\" is fully covered by later shapes and its power is "
                            "lost",)
