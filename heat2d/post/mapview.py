"""The parts of the temperature map: round levels, the views, edges and names.

`plot.py` lays the panels out and draws the field; this module decides what each panel
shows (extent, stretch, zoom window), which levels and ticks it uses, and draws the
boundaries, interfaces and shape names on it.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import TYPE_CHECKING

import numpy as np

if TYPE_CHECKING:                 # annotations only: results imports plot, which imports this
    from .results import Result

ISOTHERMS = 7
"""At most this many isotherm (and colour-bar tick) intervals over a panel's range."""
MIN_ASPECT = 1 / 7
"""A whole-model panel flatter than this (height over width) is stretched through its
thickness by a round factor until it is not."""
MAX_ASPECT = 1.25
"""A whole-model panel taller than this is stretched across its width."""
ZOOM_BELOW_INCH = 0.6
"""The hot shape gets a zoomed panel when its smaller side is drawn shorter than this in
the whole-model panel (the shape's size and aspect, not only its width, decide)."""
UNIFORM_SPAN = 1e-6
"""A panel whose temperature spread is below this fraction of max(1, |T|) °C is drawn
as a uniform field: one colour and a colour bar with its single value."""


def uniform(lo: float, hi: float) -> bool:
    """Whether the range [lo, hi] is one value to round-off (an unpowered model)."""
    return hi - lo <= UNIFORM_SPAN * max(1.0, abs(lo), abs(hi))


def round_step(span: float, intervals: int) -> float:
    """The smallest 1, 2 or 5 × 10ⁿ step that covers ``span`` in at most ``intervals``."""
    raw = span / max(intervals, 1)
    power = 10.0 ** np.floor(np.log10(raw))
    for mantissa in (1.0, 2.0, 5.0, 10.0):
        if mantissa * power >= raw * (1 - 1e-9):
            return mantissa * power
    return 10.0 * power       # not reached


@dataclass(frozen=True)
class Levels:
    """The round levels of one panel.

    ``fill`` bounds the colour bands (multiples of ``step / 5`` or ``step / 4``, covering
    the values shown); ``lines`` are the isotherms (multiples of ``step`` strictly inside
    the data range); ``ticks`` the colour-bar ticks; ``extend`` the colour-bar arrows:
    only at an end where values lie beyond the colour scale.
    """

    fill: np.ndarray
    lines: np.ndarray
    ticks: np.ndarray
    fmt: str
    extend: str
    uniform: bool = False


def levels(lo: float, hi: float, *, scale: tuple[float, float] | None = None) -> Levels:
    """Round levels for data in [lo, hi], on the colour scale ``scale`` (default the data's).

    Steps are 1, 2 or 5 × 10ⁿ (common practice for chart axes), so every tick and
    isotherm label is a round value.
    """
    a, b = scale if scale is not None else (lo, hi)
    if uniform(a, b):
        # One band half a kelvin either side of the single value: contour levels closer
        # than round-off are refused by matplotlib.
        mid = 0.5 * (a + b)
        return Levels(np.array([mid - 0.5, mid + 0.5]), np.array([]), np.array([mid]),
                      "%.2f", "neither", uniform=True)
    step = round_step(b - a, ISOTHERMS)
    fine = step / (4 if round(step / 10 ** np.floor(np.log10(step))) == 2 else 5)
    decimals = int(max(0, -np.floor(np.log10(step) + 1e-9)))
    clean = decimals + 2

    def multiples(s: float, x0: float, x1: float, inner: bool) -> np.ndarray:
        k0 = np.ceil(x0 / s - 1e-9) if inner else np.floor(x0 / s + 1e-9)
        k1 = np.floor(x1 / s + 1e-9) if inner else np.ceil(x1 / s - 1e-9)
        return np.round(np.arange(k0, k1 + 1) * s, clean)

    if scale is None:
        fill = multiples(fine, a, b, inner=False)
    else:                      # a given scale is kept: its ends bound the bands
        inner = multiples(fine, a, b, inner=True)
        fill = np.unique(np.concatenate([[a], inner, [b]]))
    ticks = multiples(step, fill[0], fill[-1], inner=True)
    lines = ticks[(ticks > lo) & (ticks < hi)]
    below, above = lo < fill[0] - 1e-12 * abs(fill[0]), hi > fill[-1] + 1e-12 * abs(fill[-1])
    extend = {(False, False): "neither", (True, False): "min", (False, True): "max",
              (True, True): "both"}[(bool(below), bool(above))]
    return Levels(fill, lines, ticks, f"%.{decimals}f", extend)


PAD = 0.006
"""Margin around a panel's extent, as a fraction of its longer drawn side."""


@dataclass(frozen=True)
class Panel:
    """What one panel shows: ``extent`` (x0, x1, y0, y1) in the model's length unit and the
    display stretch ``sx``, ``sy`` (1 = true scale); ``zoom`` for the hot-spot panel."""

    extent: tuple[float, float, float, float]
    sx: float = 1.0
    sy: float = 1.0
    zoom: bool = False

    def limits(self) -> tuple[float, float, float, float]:
        """The axes limits: the extent and a margin of PAD of the drawn size, so lines
        on the model's outline show whole."""
        x0, x1, y0, y1 = self.extent
        d = PAD * max((x1 - x0) * self.sx, (y1 - y0) * self.sy)
        return x0 - d / self.sx, x1 + d / self.sx, y0 - d / self.sy, y1 + d / self.sy

    @property
    def aspect(self) -> float:
        """Drawn height over drawn width."""
        x0, x1, y0, y1 = self.limits()
        return (y1 - y0) * self.sy / max((x1 - x0) * self.sx, 1e-300)

    def title(self, result: Result) -> str:
        if self.zoom:
            return f"around the hot spot ({result.summary['hot_spot']['shape']}), true scale"
        if self.sy > 1:
            return f"whole model, thickness (vertical) stretched ×{self.sy:g}"
        if self.sx > 1:
            return f"whole model, width (horizontal) stretched ×{self.sx:g}"
        return ""


def _round_up(factor: float) -> float:
    """The smallest of 2, 5, 10, 20, 50, ... at least ``factor``."""
    power = 10.0 ** np.floor(np.log10(factor))
    for mantissa in (1.0, 2.0, 5.0, 10.0):
        if mantissa * power >= factor * (1 - 1e-9):
            return max(mantissa * power, 2.0)
    return 10.0 * power       # not reached


def model_extent(result: Result) -> tuple[float, float, float, float]:
    (x0, y0), (x1, y1) = result.mesh.points.min(axis=0), result.mesh.points.max(axis=0)
    return float(x0), float(x1), float(y0), float(y1)


def whole_panel(result: Result) -> Panel:
    """The whole model, stretched by a round factor across its thin direction when its
    drawn aspect falls outside [MIN_ASPECT, MAX_ASPECT]."""
    extent = model_extent(result)
    panel = Panel(extent)
    a = (extent[3] - extent[2]) / max(extent[1] - extent[0], 1e-300)
    if a < MIN_ASPECT:
        return Panel(extent, sy=_round_up(MIN_ASPECT / a))
    if a > MAX_ASPECT:
        return Panel(extent, sx=_round_up(a / MAX_ASPECT))
    return panel


def hot_shape_bounds(result: Result) -> tuple[float, float, float, float]:
    """Bounds (x0, x1, y0, y1) of the hot-spot shape's visible part and of the shapes
    touching it that are smaller than half the model each way (the package around a die,
    not the board under it)."""
    mesh = result.mesh
    mx0, mx1, my0, my1 = model_extent(result)
    index = mesh.model.shape(result.summary["hot_spot"]["shape"]).index
    visible = mesh.geometry.visible
    geom = visible[index]
    if geom is None or geom.is_empty:
        pts = mesh.points[np.unique(mesh.triangles[mesh.triangle_shape == index])]
        (x0, y0), (x1, y1) = pts.min(axis=0), pts.max(axis=0)
        return float(x0), float(x1), float(y0), float(y1)
    x0, y0, x1, y1 = geom.bounds
    near = geom.buffer(1e-6 * max(mx1 - mx0, my1 - my0))
    for other in visible:
        if other is None or other.is_empty or other is geom:
            continue
        a, b, c, d = other.bounds
        if c - a < 0.5 * (mx1 - mx0) and d - b < 0.5 * (my1 - my0) and near.intersects(other):
            x0, y0, x1, y1 = min(x0, a), min(y0, b), max(x1, c), max(y1, d)
    return float(x0), float(x1), float(y0), float(y1)


def zoom_panel(result: Result, whole: Panel, axes_width: float, *,
               aspects: tuple[float, float] = (0.3, 0.7), force: bool = False) -> Panel | None:
    """The hot-spot panel, or None when the hot shape already reads in ``whole``.

    The window is the hot shape's bounds (with its small neighbours, see
    :func:`hot_shape_bounds`) and a margin of 0.2 × their longer side all round, cropped
    to the solid part inside it, taken over the model's whole height (width) where it
    covers most of it, widened or heightened to a drawn aspect in ``aspects`` and kept
    inside the model. A zoom is drawn when the shape's smaller side
    is shorter than ZOOM_BELOW_INCH in the whole-model panel ``axes_width`` inches wide,
    and the window is smaller than 60 % of the model in width or height.
    """
    mx0, mx1, my0, my1 = whole.extent
    sx0, sx1, sy0, sy1 = hot_shape_bounds(result)
    inch = axes_width / max((mx1 - mx0) * whole.sx, 1e-300)       # inches per unit, drawn
    small = min((sx1 - sx0) * whole.sx, (sy1 - sy0) * whole.sy) * inch < ZOOM_BELOW_INCH
    margin = 0.2 * max(sx1 - sx0, sy1 - sy0)
    w, h = sx1 - sx0 + 2 * margin, sy1 - sy0 + 2 * margin
    cx, cy = 0.5 * (sx0 + sx1), 0.5 * (sy0 + sy1)
    # Cropped to the solid part inside it, so the window shows no empty margin.
    import shapely

    body = result.mesh.geometry.body.intersection(
        shapely.box(cx - w / 2, cy - h / 2, cx + w / 2, cy + h / 2))
    if not body.is_empty:
        a, b, c, d = body.bounds
        w, h, cx, cy = c - a, d - b, 0.5 * (a + c), 0.5 * (b + d)
    if h > 0.5 * (my1 - my0):        # most of a thin model's thickness: all of it
        h, cy = my1 - my0, 0.5 * (my0 + my1)
    if w > 0.5 * (mx1 - mx0):
        w, cx = mx1 - mx0, 0.5 * (mx0 + mx1)
    lo, hi = aspects
    h = max(h, lo * w)
    w = max(w, h / hi)
    w, h = min(w, mx1 - mx0), min(h, my1 - my0)
    w = min(max(w, h / hi), mx1 - mx0)           # again after the cut at the model's height
    cx = float(np.clip(cx, mx0 + w / 2, mx1 - w / 2))
    cy = float(np.clip(cy, my0 + h / 2, my1 - h / 2))
    needed = w < 0.6 * (mx1 - mx0) or h < 0.6 * (my1 - my0)
    if not force and not (small and needed):
        return None
    return Panel((cx - w / 2, cx + w / 2, cy - h / 2, cy + h / 2), zoom=True)


def overlaps(mesh, window: tuple[float, float, float, float]) -> np.ndarray:
    """Triangles whose bounding box meets the window (large ones with no node inside)."""
    wx0, wx1, wy0, wy1 = window
    p = mesh.points[mesh.triangles]
    lo, hi = p.min(axis=1), p.max(axis=1)
    return (lo[:, 0] <= wx1) & (hi[:, 0] >= wx0) & (lo[:, 1] <= wy1) & (hi[:, 1] >= wy0)


def boundary_style(k: int, n: int) -> dict:
    """Colour (sampled from viridis, a perceptual map) and line style of boundary k of n."""
    import matplotlib

    cmap = matplotlib.colormaps["viridis"]
    colour = cmap(0.25 + 0.55 * (k / max(n - 1, 1))) if n > 1 else cmap(0.6)
    dashes = ["-", (0, (5, 2)), (0, (1.5, 1.5)), (0, (6, 2, 1.5, 2))]
    return {"color": colour, "linestyle": dashes[k % len(dashes)], "linewidth": 2.2}


def boundary_label(b, unit_w: str = "W/(m²·K)") -> str:
    """A boundary's name and condition in words, for the legend."""
    if b.kind == "temperature":
        what = f"held at {b.temperature:.4g} °C"
    elif b.kind == "heat_flux":
        what = "insulated cut (0 W/m²)" if b.heat_flux == 0 else f"{b.heat_flux:g} W/m² in"
    else:
        parts = []
        if b.h is not None:
            parts.append(f"h {b.h:.4g} {unit_w}")
        if b.emissivity is not None:
            parts.append(f"ε {b.emissivity:g}")
        what = ", ".join(parts) + (f" to {b.ambient:.4g} °C" if b.ambient is not None else
                                   f" to {b.surroundings:.4g} °C" if b.surroundings is not None
                                   else "")
    return f"{b.name}: {what}"


def draw_edges(ax, result: Result) -> list:
    """Draw the shapes' outlines, every boundary (its own colour and dash), the insulated
    outline, the symmetry axis and the interfaces; return legend handles, one per entry drawn."""
    from matplotlib.collections import LineCollection
    from matplotlib.lines import Line2D

    g = result.mesh.geometry
    model = result.model
    seg = g.vertices[g.segments]
    handles = []
    stroke = _stroke(3.4)
    n = len(model.boundaries)
    for b in model.boundaries:
        mask = g.segment_boundary == b.index
        if not mask.any():
            continue
        style = boundary_style(b.index, n)
        ax.add_collection(LineCollection(seg[mask], colors=[style["color"]],
                                         linestyles=style["linestyle"],
                                         linewidths=style["linewidth"], capstyle="butt",
                                         path_effects=stroke, zorder=4))
        handles.append(Line2D([], [], **style, path_effects=stroke, label=boundary_label(b)))
    inner = ~g.segment_exposed & ~g.segment_axis & (g.segment_interface < 0)
    ax.add_collection(LineCollection(seg[inner], colors="0.6", linewidths=0.6, alpha=0.8,
                                     zorder=3))
    handles.append(Line2D([], [], color="0.6", lw=0.6, label="outline of a shape"))
    bare = g.segment_exposed & (g.segment_boundary < 0) & ~g.segment_axis
    if bare.any():
        thin = _stroke(2.4)
        ax.add_collection(LineCollection(seg[bare], colors="0.8", linewidths=1.0,
                                         linestyles=(0, (2, 2)), path_effects=thin, zorder=4))
        handles.append(Line2D([], [], color="0.8", lw=1.0, ls=(0, (2, 2)), path_effects=thin,
                              label="insulated (no boundary entry)"))
    if g.segment_axis.any():
        ax.add_collection(LineCollection(seg[g.segment_axis], colors="0.2", linewidths=1.2,
                                         linestyles="-.", zorder=4))
        handles.append(Line2D([], [], color="0.2", lw=1.2, ls="-.", label="axis of symmetry"))
    for face in model.interfaces:
        mask = g.segment_interface == face.index
        if not mask.any():
            continue
        ax.add_collection(LineCollection(seg[mask], colors="white", linewidths=1.6,
                                         linestyles=(0, (4, 1.5)), path_effects=_stroke(3.0),
                                         zorder=4))
        handles.append(Line2D([], [], color="white", lw=1.6, ls=(0, (4, 1.5)),
                              path_effects=_stroke(3.0),
                              label=f"interface {face.name}: R″ {face.resistance:.2g} m²·K/W"))
    return handles


def _stroke(width: float) -> list:
    """A dark outline under a line or text, so it reads on light and dark colours."""
    from matplotlib import patheffects

    return [patheffects.Stroke(linewidth=width, foreground="black", alpha=0.8),
            patheffects.Normal()]


def _candidates(geom) -> list:
    """Points to try for a name inside ``geom``: the pole of inaccessibility of its largest
    part, then points along its longer middle line."""
    import shapely
    import shapely.ops

    parts = sorted(shapely.get_parts(geom), key=lambda p: -p.area)
    out = []
    for part in parts[:2]:
        out.append(shapely.ops.polylabel(part, tolerance=0.02 * np.sqrt(part.area)))
        x0, y0, x1, y1 = part.bounds
        for f in (0.5, 0.25, 0.75, 0.12, 0.88):
            if x1 - x0 >= y1 - y0:
                line = shapely.LineString([(x0 + f * (x1 - x0), y0), (x0 + f * (x1 - x0), y1)])
            else:
                line = shapely.LineString([(x0, y0 + f * (y1 - y0)), (x1, y0 + f * (y1 - y0))])
            cut = part.intersection(line)
            if not cut.is_empty:
                out.append(cut.interpolate(0.5, normalized=True) if cut.geom_type ==
                           "LineString" else cut.centroid)
    return out


def name_shapes(ax, result: Result, renderer, *, zoom: bool = False, avoid=(),
                fontsize: float = 7.5) -> list:
    """Write each shape's name inside its visible part where it fits without touching
    another name. On the whole model (``zoom`` False) a stack is named once over its
    layers together where that fits; otherwise shapes are named, and a stack or repeat
    none of whose shapes could be is named over them together. Returns the texts placed.

    ``avoid`` are display-space boxes (the hot-spot marker) no name may cover.
    """
    import shapely
    import shapely.ops
    from matplotlib.font_manager import FontProperties
    from matplotlib.transforms import Bbox

    model, g = result.model, result.mesh.geometry
    x0, x1 = ax.get_xlim()
    y0, y1 = ax.get_ylim()
    view = shapely.box(x0, y0, x1, y1)
    inverse = ax.transData.inverted()
    taken = [Bbox(b) for b in avoid]
    placed = []

    def tall(geom) -> bool:
        a, b, c, d = geom.bounds
        (p, q), (r, t) = ax.transData.transform([[a, b], [c, d]])
        return abs(t - q) > 1.5 * abs(r - p)

    def place(name: str, geom) -> bool:
        geom = geom.intersection(view) if geom is not None else None
        if geom is None or geom.is_empty or geom.area <= 0:
            return False
        points = _candidates(geom)
        for size in (fontsize, 0.8 * fontsize):       # a smaller name where none fits
            # The name's size on the page, measured once; each candidate centres it.
            width, height, _ = renderer.get_text_width_height_descent(
                name, FontProperties(size=size), ismath=False)
            half = 0.5 * np.array([width * 1.06, height * 1.25])
            # Upright too, in a shape drawn taller than wide (a via, a fin).
            for angle in (0, 90) if tall(geom) else (0,):
                extent = half if angle == 0 else half[::-1]
                for point in points:
                    centre = ax.transData.transform([[point.x, point.y]])[0]
                    box = Bbox([centre - extent, centre + extent])
                    (a, b), (c, d) = inverse.transform([box.p0, box.p1])
                    inside = shapely.box(min(a, c), min(b, d), max(a, c), max(b, d))
                    if geom.covers(inside) and not any(box.overlaps(t) for t in taken):
                        taken.append(box)
                        placed.append(ax.text(point.x, point.y, name, fontsize=size,
                                              rotation=angle, color="white", ha="center",
                                              va="center", path_effects=_stroke(2.0),
                                              zorder=5, clip_on=True, gid="shape-name"))
                        return True
        return False

    def group_union(group):
        members = [s for s in model.members(group.name) if not s.void]
        return members, shapely.union_all([g.visible[s.index] for s in members
                                           if g.visible[s.index] is not None])

    skip = set()
    if not zoom:
        # The whole model: a stack is named once, over its layers together.
        for group in (g_ for g_ in model.groups if g_.kind == "stack"):
            members, union = group_union(group)
            if members and place(group.name, union):
                skip.update(s.name for s in members)
    named = set()
    solid = [s for s in model.shapes if not s.void and s.name not in skip]
    for s in sorted(solid, key=lambda s: -_area(g.visible[s.index])):
        if place(s.name, g.visible[s.index]):
            named.add(s.name)
    # Elsewhere each shape is named where it fits; a group only if none of its is.
    for group in model.groups:
        members, union = group_union(group)
        if members and not any(s.name in named or s.name in skip for s in members):
            place(group.name, union)
    return placed


def _area(geom) -> float:
    return 0.0 if geom is None else float(geom.area)
