"""Sanity warnings: plausible mistakes that make a valid model mean something else.

Each check looks at the painted geometry (or the boundary values) and returns
warning strings for :attr:`heat2d.fem.geometry.Geometry.warnings`, which reach the
terminal, ``summary.json`` and ``heat2d check``. None of them refuses a model.
"""

from __future__ import annotations

import math

import numpy as np
import shapely

from ..errors import SolveError
from ..model import Model

SMALL_FEATURE = 1e-4
"""A visible piece narrower than this fraction of the model's extent is smaller than any
feature a board cross-section resolves (a 3 µm sliver in a 30 mm board): usually a
decimal slip."""
SLIVER_WIDTH = 1e-3
"""A visible piece narrower than this fraction of its target mesh size forces the mesher
to refine to its width over its whole length (a 0.01 µm sliver gave 560k nodes)."""
MAX_EXTENT_M = 2.0
"""A model spanning more than this (metres) is not a board, package or enclosure section:
probably mm numbers with length_unit = "m", or a misplaced shape."""
MIN_EXTENT_M = {"m": 1e-3, "mm": 1e-4}
"""A model spanning less than this (metres) is smaller than anything drawn in its unit:
under 1 mm in a "m" model, or under 0.1 mm in a "mm" one (a 30 mm board typed as 0.03),
the numbers are probably in the wrong unit."""
CORNER_CONTACT = 10.0
"""A shape whose outline meets its neighbours over no more than this many times the
geometry tolerance touches them only at a corner."""
KELVIN_RANGE = (250.0, 450.0)
"""°C values in this range look like kelvin (−23 °C to 177 °C written in K); boards run
between about −40 and 150 °C."""
BOX_SHORT = 0.05
"""A piece a box selector takes is short when its length is below this fraction of the
box's larger side."""
BOX_ANGLE_DEG = 30.0
"""…and at an angle when it differs from the bulk direction of the selection by more."""
BOX_COHERENT = 0.8
"""The bulk direction is only meaningful when the length-weighted mean of exp(2iθ) over
the selection is at least this long (1 for parallel edges, 0 around a circle)."""


def sanity_warnings(model: Model, visible: list, claims: np.ndarray, a: np.ndarray,
                    b: np.ndarray, size: float, extent: float, tol: float) -> list[str]:
    """All sanity warnings for a painted model.

    Parameters
    ----------
    model
        The model.
    visible
        Visible part of each shape (shapely geometries).
    claims
        Boundary index per graph segment (-1 where none).
    a, b
        Segment end points (model units).
    size, extent, tol
        Global target edge length, model extent and geometry tolerance (model units).

    Returns
    -------
    list of str
        One line per warning.
    """
    return [*_isolated(model, visible, tol), *_scale(model, visible, size, extent),
            *_kelvin(model), *_box_slivers(model, claims, a, b)]


def _isolated(model: Model, visible: list, tol: float) -> list[str]:
    """Solid shapes whose visible part touches no other solid shape."""
    solid = [s for s in model.shapes if not s.void and not visible[s.index].is_empty]
    if len(solid) < 2:
        return []
    geoms = np.array([visible[s.index] for s in solid], dtype=object)
    left, right = shapely.STRtree(geoms).query(geoms, predicate="dwithin", distance=tol)
    other = left != right
    left, right = left[other], right[other]
    near = np.bincount(left, minlength=len(solid)) > 0
    # Contact along an edge, not at a point: the length of the outline shared with the
    # neighbours (a corner contact shares a point, length about the tolerance).
    # Each neighbour is first clipped to the shape's box, so a large neighbour (a board
    # with thousands of holes) is not buffered whole for every pair.
    box = shapely.bounds(geoms[left])
    near_part = shapely.intersection(geoms[right], shapely.box(
        box[:, 0] - 2 * tol, box[:, 1] - 2 * tol, box[:, 2] + 2 * tol, box[:, 3] + 2 * tol))
    shared = np.bincount(left, shapely.length(shapely.intersection(
        shapely.boundary(geoms[left]), shapely.buffer(near_part, tol))),
        minlength=len(solid))
    touching = shared > CORNER_CONTACT * tol
    out = []
    for s, g in ((s, g) for s, g, t, n in zip(solid, geoms, touching, near, strict=True)
                 if n and not t):
        at = shapely.intersection(g, shapely.buffer(shapely.union_all(
            [h for h in geoms if h is not g]), tol)).centroid
        out.append(f"shape \"{s.name}\" touches other shapes only at a corner (near "
                   f"({at.x:.6g}, {at.y:.6g})): heat passes there through a single node; "
                   "overlap the shapes or join them along an edge if they are in contact")
    for s in (s for s, n in zip(solid, near, strict=True) if not n):
        power = " and its power leaves only through them" if (s.power or s.power_density) \
            else ""
        out.append(f"shape \"{s.name}\" touches no other shape: it is a separate body held "
                   f"only by its own boundaries (it sits at their condition){power}; "
                   "move it into contact if heat should flow to or from it")
    return out


def _scale(model: Model, visible: list, size: float, extent: float) -> list[str]:
    """Implausible model extent for its unit, tiny features and mesh-forcing slivers."""
    unit = model.length_unit
    out = []
    span_m = extent * model.unit_m
    if span_m > MAX_EXTENT_M:
        hint = "mm numbers in a metre model" if unit == "m" else "the numbers in µm"
        span = f"{extent:g} m" if unit == "m" else f"{extent:g} {unit} = {span_m:g} m"
        out.append(f"the model spans {span}: are {hint}, or is a "
                   f"shape misplaced? (length_unit = \"{unit}\")")
    if span_m < MIN_EXTENT_M.get(unit, 0.0):
        hint = "mm numbers in a metre model" if unit == "m" else "metre numbers"
        out.append(f"the model spans only {extent:g} {unit}: are these {hint}? "
                   f"(length_unit = \"{unit}\")")
    for s in model.shapes:
        parts = shapely.get_parts(visible[s.index])
        parts = parts[shapely.area(parts) > 0]
        if s.void or len(parts) == 0:
            continue
        # Narrowest width of each piece ≈ 2·area/perimeter (exact for a long strip, r for
        # a circle).
        width = float((2 * shapely.area(parts) / shapely.length(parts)).min())
        target = s.mesh_size or size
        if width < SLIVER_WIDTH * target:
            k = int(np.argmin(2 * shapely.area(parts) / shapely.length(parts)))
            nodes = shapely.length(parts[k]) / 2 / width
            out.append(f"shape \"{s.name}\" has a visible piece only {width:.3g} {unit} wide "
                       f"(target size {target:g} {unit}): the mesher must refine to that "
                       f"width, at least {nodes:.1g} nodes along it; check for a decimal "
                       "slip or an overlap that leaves a sliver")
        elif width < SMALL_FEATURE * extent:
            out.append(f"shape \"{s.name}\" has a visible piece only {width:.3g} {unit} wide, "
                       f"below {SMALL_FEATURE:g} of the model's extent {extent:g} {unit}: "
                       "check for a decimal slip")
    return out


def _kelvin(model: Model) -> list[str]:
    lo, hi = KELVIN_RANGE
    out = []
    for bc in model.boundaries:
        for key in ("temperature", "ambient", "surroundings"):
            value = getattr(bc, key)
            if value is not None and lo <= value <= hi:
                out.append(f"boundary \"{bc.name}\": {key} = {value:g} °C looks like kelvin "
                           f"({value - 273.15:.4g} °C if it is); temperatures are in °C")
    return out


def _box_slivers(model: Model, claims: np.ndarray, a: np.ndarray, b: np.ndarray
                 ) -> list[str]:
    """Short pieces a box selector takes at an angle to the bulk of its selection."""
    out = []
    d = b - a
    length = np.hypot(d[:, 0], d[:, 1])
    theta = np.arctan2(d[:, 1], d[:, 0])
    for bc in model.boundaries:
        if bc.selector.kind != "box":
            continue
        mask = claims == bc.index
        if not mask.any():
            continue
        x0, y0, x1, y1 = bc.selector.box
        # Orientation without sense: mean of exp(2iθ) weighted by length.
        w = length[mask]
        mean = (w * np.exp(2j * theta[mask])).sum() / w.sum()
        if abs(mean) < BOX_COHERENT:
            continue
        bulk = np.angle(mean) / 2
        off = np.abs(np.angle(np.exp(2j * (theta[mask] - bulk)))) / 2
        odd = off > math.radians(BOX_ANGLE_DEG)
        short = w < BOX_SHORT * max(x1 - x0, y1 - y0)
        pick = odd & short
        if pick.any():
            at = (0.5 * (a[mask] + b[mask]))[pick][0]
            out.append(f"boundary \"{bc.name}\" (box) also takes {w[pick].sum():.3g} "
                       f"{model.length_unit} of short edges at an angle to the rest of its "
                       f"selection (near ({at[0]:.6g}, {at[1]:.6g})): slivers of a "
                       "neighbouring face? Tighten the box if so")
    return out


def check_finite(value: object, source: str, path: str = "") -> None:
    """Raise :class:`SolveError` naming the first non-finite figure in ``value`` (nested
    dicts and lists of numbers), so that none is ever written to ``summary.json``."""
    if isinstance(value, dict):
        for key, item in value.items():
            check_finite(item, source, f"{path}.{key}" if path else str(key))
    elif isinstance(value, list | tuple):
        for i, item in enumerate(value):
            check_finite(item, source, f"{path}[{i}]")
    elif isinstance(value, float) and not math.isfinite(value):
        raise SolveError(f"{path} is {value} (the model's values overflow or underflow the "
                         "solve; check extreme conductivities, depths or sizes)", file=source)
