"""The comparison map ``compare.png``: T_B − T_A node by node where the two runs share a
mesh, else the two temperature maps with one colour scale; a zoomed row where the
changed (or hot) shape is small in the model."""

from __future__ import annotations

from pathlib import Path

import numpy as np

from .sides import Side

DIVERGING = "coolwarm"
"""Colour map of the difference: diverging, light at 0 (no change), blue where B is
cooler and red where it is hotter (Moreland's map, matplotlib's perceptual diverging map
with a light centre; ``vanimo`` and ``berlin`` have a dark centre, which hides the shape
outlines where nothing changed)."""
SEQUENTIAL = "inferno"
"""Colour map of the side-by-side temperature maps (the same as the run's own map)."""
MAX_STRETCH_ASPECT = 1 / 6
"""Models flatter than this (height over width) are drawn with the vertical scale
stretched up to this aspect, and the axis label says by how much."""
ZOOM_BELOW = 0.4
"""A zoomed row is added when the window around the changed (or hot) shape is narrower
or lower than this fraction of the model."""
ZOOM_ASPECT = 2.5
"""Width over height of the zoomed window (before any stretch)."""
WIDTH = 10.0
"""Figure width, inches."""
LABEL_MIN_SIZE = 0.06
"""A shape is named on a panel when its extent is at least this fraction of the panel's
width and height (smaller ones would be covered by their name)."""


def plot_compare(a: Side, b: Side, path: str | Path | None = None, *,
                 same: bool | None = None, fig=None):
    """Draw the comparison map; save it to ``path`` if given and return the figure.

    Parameters
    ----------
    a, b
        The two sides (:func:`~heat2d.compare.load_side`).
    path
        Where to save the PNG.
    same
        Whether the runs share a mesh (:func:`~heat2d.compare.same_mesh` by default):
        then one map of T_B − T_A on a diverging scale centred on 0, else the two
        temperature maps with one shared scale. Either gets a zoomed row when the shape
        with the largest change (or B's hot shape) is small in the model.
    fig
        A matplotlib figure to draw into (a new one by default).
    """
    from matplotlib.figure import Figure

    if same is None:
        from .core import same_mesh

        same = same_mesh(a, b)
    sides = [s for s in (a, b) if s.has_mesh]
    unit = a.summary["units"].get("length") or ""
    box = None
    if sides:
        lo = np.min([s.points.min(axis=0) for s in sides], axis=0)
        hi = np.max([s.points.max(axis=0) for s in sides], axis=0)
        box = (lo[0], hi[0], lo[1], hi[1])
        aspect = float((hi[1] - lo[1]) / max(hi[0] - lo[0], 1e-300))
    else:
        aspect = 0.5
    stretch = max(1.0, MAX_STRETCH_ASPECT / max(aspect, 1e-300))
    shown = aspect * stretch
    d = b.temperature - a.temperature if same else None
    focus = _focus(a, b, d)
    window = _window(focus, box) if focus is not None else None
    panels = 1 if same else 2
    stacked = panels == 2 and shown < 0.7        # wide models: B under A
    cols = 2 if panels == 2 and not stacked else 1
    full_rows = 2 if stacked else 1
    panel_w = (WIDTH - 2.2) / cols
    full_h = float(np.clip(panel_w * shown, 1.0, 6.0))
    zoom_h = (WIDTH - 2.2) / (1 if same else 2) / ZOOM_ASPECT if window else 0.0
    heights = [full_h] * full_rows + ([zoom_h] if window else [])
    height = sum(heights) + 1.0 * len(heights) + 0.6
    if fig is None:
        fig = Figure(figsize=(WIDTH, height))
    grid = fig.add_gridspec(len(heights), 2, height_ratios=heights,
                            left=0.9 / WIDTH, right=1 - 1.3 / WIDTH, bottom=0.6 / height,
                            top=1 - 0.9 / height, hspace=0.6 / np.mean(heights), wspace=0.25)
    if same:
        axes = [fig.add_subplot(grid[0, :])] + ([fig.add_subplot(grid[1, :])] if window
                                                else [])
        views = [box] + ([window] if window else [])
        _difference(fig, axes, views, a, b, d)
    else:
        full = ([fig.add_subplot(grid[0, :]), fig.add_subplot(grid[1, :])] if stacked
                else [fig.add_subplot(grid[0, 0]), fig.add_subplot(grid[0, 1])])
        zoom = ([fig.add_subplot(grid[full_rows, 0]), fig.add_subplot(grid[full_rows, 1])]
                if window else [])
        axes = full + zoom
        _side_by_side(fig, full, zoom, box, window, a, b)
    for ax in axes:
        ax.set_aspect(stretch)
        ax.set_xlabel(f"x ({unit})")
        ax.set_ylabel(f"y ({unit})" + (f", stretched ×{stretch:.3g}" if stretch > 1 else ""))
    if window:
        zoomed = axes[-1:] if same else axes[-2:]
        for ax, label in zip(zoomed, ("",) if same else ("A, ", "B, "), strict=True):
            ax.set_title(f"{label}zoomed around {focus[1]}", fontsize=9, loc="left")
    _declutter(fig, axes)
    fig.text(0.01, 0.005, "Estimate only: confirm against measurements and component "
             "ratings.", fontsize=7, color="0.35", va="bottom")
    if path is not None:
        fig.savefig(path, dpi=110, bbox_inches="tight", pad_inches=0.15)
    return fig


def _focus(a: Side, b: Side, d: np.ndarray | None) -> tuple[Side, str] | None:
    """The side and shape to zoom on: the shape holding the largest change on a shared
    mesh, else B's hot shape."""
    if d is not None:
        # Of the shapes meeting at the node of the largest change, the smallest (the
        # die rather than the mould around it).
        k = int(np.argmax(np.abs(d)))
        touching = np.unique(a.shape_id[(a.triangles == k).any(axis=1)])
        sizes = [np.ptp(a.points[np.unique(a.triangles[a.shape_id == s])], axis=0).max()
                 for s in touching]
        return a, a.summary["ids"]["shape"][int(touching[int(np.argmin(sizes))])]
    for side in (b, a):
        if side.has_mesh:
            return side, side.summary["hot_spot"]["shape"]
    return None


def _window(focus: tuple[Side, str], box) -> tuple[float, float, float, float] | None:
    """A window of aspect ZOOM_ASPECT, three times the shape's size, when it is small in
    the model; else None."""
    side, name = focus
    names = side.summary["ids"]["shape"]
    if name not in names:
        return None
    mine = side.shape_id == names.index(name)
    pts = side.points[np.unique(side.triangles[mine])]
    (sx0, sy0), (sx1, sy1) = pts.min(axis=0), pts.max(axis=0)
    w = max(3 * (sx1 - sx0), 3 * ZOOM_ASPECT * (sy1 - sy0))
    h = w / ZOOM_ASPECT
    x0, x1, y0, y1 = box
    if w >= ZOOM_BELOW * (x1 - x0) and h >= ZOOM_BELOW * (y1 - y0):
        return None
    cx = float(np.clip(0.5 * (sx0 + sx1), x0 + w / 2, max(x1 - w / 2, x0 + w / 2)))
    cy = float(np.clip(0.5 * (sy0 + sy1), y0 + h / 2, max(y1 - h / 2, y0 + h / 2)))
    return cx - w / 2, cx + w / 2, cy - h / 2, cy + h / 2


def _view(ax, view) -> None:
    ax.set_xlim(view[0], view[1])
    ax.set_ylim(view[2], view[3])


def _difference(fig, axes, views, a: Side, b: Side, d: np.ndarray) -> None:
    """T_B − T_A on the shared mesh, centred on 0, with the largest change marked."""
    import matplotlib.tri as mtri
    from matplotlib.colors import Normalize
    from matplotlib.ticker import MaxNLocator

    tri = mtri.Triangulation(a.points[:, 0], a.points[:, 1], a.triangles)
    big = float(np.abs(d).max())
    k = int(np.argmax(np.abs(d)))
    if big > 0:
        # Round ticks over the changes found (0 always among them), two bands per tick;
        # the colours are symmetric about 0 (light: no change) even where every change
        # has one sign.
        ticks = MaxNLocator(nbins=8).tick_values(min(d.min(), 0.0), max(d.max(), 0.0))
        levels = np.linspace(ticks[0], ticks[-1], 2 * (len(ticks) - 1) + 1)
        top = float(np.abs(levels).max())
        options = {"levels": levels, "cmap": DIVERGING, "norm": Normalize(-top, top)}
    else:
        ticks = [0.0]
        options = {"levels": [-0.5, 0.5], "cmap": DIVERGING}
    for ax, view in zip(axes, views, strict=True):
        filled = ax.tricontourf(tri, d, **options)
        _outlines(ax, a)
        _view(ax, view)
        _names(ax, a, view)
        if big > 0:
            ax.plot(*a.points[k], marker="o", mfc="none", mec="k", ms=10, mew=1.5,
                    gid="marker")
    bar = fig.colorbar(filled, ax=axes, pad=0.01, ticks=ticks, shrink=0.95)
    bar.set_label("T_B − T_A (K)")
    x, y = a.points[k]
    words = ("no change anywhere" if big == 0 else
             f"from {d.min():+.3g} K to {d.max():+.3g} K; largest change {d[k]:+.3g} K "
             f"at the circle ({x:.4g}, {y:.4g})")
    moment = a.summary["hot_spot"].get("time_s")
    if moment is not None:          # transient runs: the fields of their hottest moment
        words += f", at t = {moment:.4g} s (the hottest moment of both)"
    axes[0].set_title(f"B minus A on the shared mesh: {words}\nA: {_name(a)}\n"
                      f"B: {_name(b)}", fontsize=9, loc="left")


def _side_by_side(fig, full, zoom, box, window, a: Side, b: Side) -> None:
    """The two temperature maps with one colour scale, hot spots marked; the zoomed
    row shows the same window of each."""
    import matplotlib.tri as mtri
    from matplotlib.colors import Normalize
    from matplotlib.ticker import MaxNLocator

    sides = [s for s in (a, b) if s.has_mesh]
    filled = None
    if sides:
        lo = min(float(s.temperature.min()) for s in sides)
        hi = max(float(s.temperature.max()) for s in sides)
        if hi - lo <= 1e-9 * max(1.0, abs(hi)):
            lo, hi = lo - 0.5, hi + 0.5
        levels = MaxNLocator(nbins=24).tick_values(lo, hi)
        norm = Normalize(levels[0], levels[-1])
    rows = [(full, box)] + ([(zoom, window)] if zoom else [])
    for axes, view in rows:
        for ax, side in zip(axes, (a, b), strict=True):
            hs = side.summary["hot_spot"]
            if not side.has_mesh:
                ax.text(0.5, 0.5, "no mesh in this result folder\n(no VTU file): no map",
                        ha="center", va="center", transform=ax.transAxes, fontsize=9)
                _view(ax, view)
                ax.set_xticks([])
                ax.set_yticks([])
                continue
            tri = mtri.Triangulation(side.points[:, 0], side.points[:, 1], side.triangles)
            filled = ax.tricontourf(tri, side.temperature, levels=levels, cmap=SEQUENTIAL,
                                    norm=norm)
            _outlines(ax, side, color="0.6")
            _view(ax, view)
            _names(ax, side, view, dark=True)
            ax.plot(hs["x"], hs["y"], marker="x", color="black", ms=9, mew=2, gid="marker")
    for ax, side in zip(full, (a, b), strict=True):
        hs = side.summary["hot_spot"]
        when = "" if hs.get("time_s") is None else f" at t = {hs['time_s']:.4g} s"
        ax.set_title(f"{side.label}: max {hs['temperature']:.1f} °C in {hs['shape']} (×)"
                     f"{when}\n"
                     f"{_name(side)}", fontsize=9, loc="left")
    if filled is not None:
        bar = fig.colorbar(filled, ax=full + zoom, pad=0.02, shrink=0.95,
                           ticks=MaxNLocator(nbins=8).tick_values(levels[0], levels[-1]))
        bar.set_label("temperature (°C), one scale for both")


def _name(side: Side) -> str:
    where = side.folder or side.model
    return where + (f" ({side.title})" if side.title else "")


def outline_segments(side: Side) -> np.ndarray:
    """The mesh edges on a shape's outline, (k, 2, 2): edges of one triangle only (the
    body's boundary and split interfaces) or between triangles of two shapes."""
    edges = np.sort(side.triangles[:, [[0, 1], [1, 2], [2, 0]]].reshape(-1, 2), axis=1)
    owner = np.repeat(side.shape_id, 3)
    uniq, inverse, count = np.unique(edges, axis=0, return_inverse=True, return_counts=True)
    inverse = inverse.ravel()
    low = np.full(len(uniq), np.iinfo(np.int64).max)
    high = np.full(len(uniq), np.iinfo(np.int64).min)
    np.minimum.at(low, inverse, owner)
    np.maximum.at(high, inverse, owner)
    keep = (count == 1) | (low != high)
    return side.points[uniq[keep]]


def _outlines(ax, side: Side, *, color: str = "0.25") -> None:
    from matplotlib.collections import LineCollection

    ax.add_collection(LineCollection(outline_segments(side), colors=color, linewidths=0.7))


def _names(ax, side: Side, view, *, dark: bool = False) -> None:
    """Name each shape large enough in this view to hold its name, at the triangle
    nearest its centroid within the view (inside the shape even when it is not convex).
    Larger shapes come first; :func:`_declutter` drops names that overlap."""
    p, t = side.points, side.triangles
    names = side.summary.get("ids", {}).get("shape", [])
    centres = p[t].mean(axis=1)
    x0, x1, y0, y1 = view
    inside = (centres[:, 0] > x0) & (centres[:, 0] < x1) & (centres[:, 1] > y0) & \
        (centres[:, 1] < y1)
    span = np.array([x1 - x0, y1 - y0])
    found = []
    for index, name in enumerate(names):
        c = centres[(side.shape_id == index) & inside]
        if len(c) == 0:
            continue
        extent = np.ptp(c, axis=0) + span / 50
        if (extent < LABEL_MIN_SIZE * span).any():
            continue
        found.append((-float(np.prod(extent)), name,
                      c[np.argmin(((c - c.mean(axis=0)) ** 2).sum(axis=1))]))
    for _, name, (x, y) in sorted(found, key=lambda f: f[0]):
        text = ax.text(x, y, name, ha="center", va="center", fontsize=8, clip_on=True,
                       color="white" if dark else "black",
                       bbox={"boxstyle": "round,pad=0.15", "lw": 0, "alpha": 0.55,
                             "fc": "black" if dark else "white"})
        text.set_gid("shape-name")


def _declutter(fig, axes) -> None:
    """Remove shape names that overlap an earlier (larger) one or leave their panel."""
    fig.draw_without_rendering()
    for ax in axes:
        frame = ax.get_window_extent()
        # The marks are obstacles: no name covers them.
        kept = [line.get_window_extent().expanded(1.2, 1.2) for line in ax.lines
                if line.get_gid() == "marker"]
        for text in [t for t in ax.texts if t.get_gid() == "shape-name"]:
            box = text.get_window_extent()
            if any(box.overlaps(k) for k in kept) or not (
                    frame.contains(box.x0, box.y0) and frame.contains(box.x1, box.y1)):
                text.remove()
            else:
                kept.append(box)
