"""The temperature map written as ``<stem>.png``, and the hot-spot view alone.

Layout: the whole model (stretched by a round factor through a thin model's thickness,
and said so in its title) and, when the hot shape is small in it, a panel at true scale
around the hot spot with its own colour scale. Flat models stack the panels, tall or
square ones put them side by side. Each panel has its colour bar; one legend below names
the boundaries, interfaces, the hot spot and the zoomed window. The figure is sized from
the panels' aspects, so there is no empty margin.
"""

from __future__ import annotations

from pathlib import Path
from typing import TYPE_CHECKING

import numpy as np

from . import mapview
from .mapview import Panel

if TYPE_CHECKING:                 # annotations only: results imports this module
    from .results import Result

DPI = 110
LEFT, RIGHT = 0.78, 1.12
"""Inches left of each panel (y ticks and label) and right of it (its colour bar)."""
STACK_WIDTH = 8.2
"""Inches of panel width when the panels are stacked."""
ROW_HEIGHT = 5.4
"""Inches of panel height when the panels stand side by side."""
SIDE_BY_SIDE = 0.8
"""Whole-model panels taller than this (height over width, as drawn) stand beside the
zoomed panel; flatter ones are stacked above it."""


def plot_temperature(result: Result, path: str | Path | None = None, *, fig=None,
                     show_mesh: bool = False, scale: tuple[float, float] | None = None):
    """Draw the temperature map; save it to ``path`` if given and return the figure.

    Parameters
    ----------
    result
        A solved model.
    path
        Where to write the PNG; nothing is written when None.
    fig
        A matplotlib figure to draw into (resized to the layout); a new one when None.
    show_mesh
        Draw the triangles too.
    scale
        (low, high) °C of the colour scale, shared by the panels (to compare runs);
        default each panel's own range. Values beyond it get an arrow at that end.
    """
    whole = mapview.whole_panel(result)
    side = whole.aspect > SIDE_BY_SIDE
    width = ROW_HEIGHT / whole.aspect if side else STACK_WIDTH
    zoom = mapview.zoom_panel(result, whole, width,
                              aspects=(0.8, 1.5) if side else (0.22, 0.7))
    panels = [whole] if zoom is None else [whole, zoom]
    return _draw(result, panels, path, fig=fig, side=side, show_mesh=show_mesh, scale=scale)


def plot_zoom(result: Result, path: str | Path | None = None, *, fig=None,
              show_mesh: bool = False, scale: tuple[float, float] | None = None):
    """Draw the true-scale view around the hot spot alone (for a report); save it to
    ``path`` if given and return the figure. Options as for :func:`plot_temperature`.

    The window is the one :func:`plot_temperature` zooms on, drawn even where the map
    itself does not need it.
    """
    whole = mapview.whole_panel(result)
    zoom = mapview.zoom_panel(result, whole, STACK_WIDTH, aspects=(0.45, 1.0), force=True)
    return _draw(result, [zoom], path, fig=fig, side=False, show_mesh=show_mesh,
                 scale=scale, title=False)


def _draw(result: Result, panels: list[Panel], path, *, fig, side: bool, show_mesh: bool,
          scale, title: bool = True):
    from matplotlib.figure import Figure
    from matplotlib.lines import Line2D
    from matplotlib.patches import Rectangle

    summary, model = result.summary, result.model
    hs = summary["hot_spot"]
    unit = model.length_unit
    title_lines = _title(result) if title else []
    if fig is None:
        fig = Figure()
    axes = [fig.add_axes((0, 0, 1, 1)) for _ in panels]
    bars = [fig.add_axes((0, 0, 1, 1), label="<colorbar>") for _ in panels]
    handles = []
    for ax, panel in zip(axes, panels, strict=True):
        x0, x1, y0, y1 = panel.limits()
        ax.set_xlim(x0, x1)
        ax.set_ylim(y0, y1)
        ax.set_aspect(panel.sy / panel.sx, adjustable="box")
        edge_handles = mapview.draw_edges(ax, result)
        handles = handles or edge_handles
        ax.set_xlabel(f"r ({unit})" if model.axisymmetric else f"x ({unit})")
        ax.set_ylabel(f"z ({unit})" if model.axisymmetric else f"y ({unit})")
        ax.set_title(panel.title(result), fontsize=9)
        ax.set_facecolor("white")
    # Sizes in inches, from the panels' drawn aspects.
    if side:
        sizes = [(ROW_HEIGHT / p.aspect, ROW_HEIGHT) for p in panels]
        fig_w = sum(LEFT + w + RIGHT for w, _ in sizes)
    else:
        sizes = [(STACK_WIDTH, STACK_WIDTH * p.aspect) for p in panels]
        fig_w = LEFT + STACK_WIDTH + RIGHT
    extra = [Line2D([], [], ls="none", marker="o", ms=8, mfc="none", mec="white", mew=1.6,
                    path_effects=[_ring_stroke()],
                    label=_hot_label(result))]
    if len(panels) == 2:
        extra.append(Line2D([], [], color="white", ls=(0, (3, 2)), lw=1.2,
                            path_effects=[_ring_stroke(2.6)], label="window of the zoomed panel"))
    entries = handles + extra
    ncol = max(1, min(len(entries), int(fig_w // 4.2)))
    legend_h = 0.12 + 0.2 * -(-len(entries) // ncol)
    head = 0.12 + 0.19 * len(title_lines)
    caption = 0.2
    panel_titles = [0.26 if p.title(result) else 0.08 for p in panels]
    below = 0.5                        # x tick labels and x label
    if side:
        fig_h = head + max(panel_titles) + ROW_HEIGHT + below + legend_h + caption
    else:
        fig_h = head + sum(t + h + below for t, (_, h) in zip(panel_titles, sizes, strict=True)) \
            + legend_h + caption
    fig.set_size_inches(fig_w, fig_h)
    fig.set_dpi(DPI)
    renderer = _renderer(fig)
    left, top = 0.0, fig_h - head
    for k, (ax, cax) in enumerate(zip(axes, bars, strict=True)):
        w, h = sizes[k]
        if side:
            x, y = left + LEFT, top - max(panel_titles) - h
            left += LEFT + w + RIGHT
        else:
            x, y = LEFT, top - panel_titles[k] - h
            top = y - below
        ax.set_position((x / fig_w, y / fig_h, w / fig_w, h / fig_h))
        cax.set_position(((x + w + 0.12) / fig_w, y / fig_h, 0.16 / fig_w, h / fig_h))
        ax.apply_aspect()
    for k, (ax, cax, panel) in enumerate(zip(axes, bars, panels, strict=True)):
        w, h = sizes[k]
        _field(result, ax, cax, panel, fig, show_mesh=show_mesh, scale=scale,
               pixels=(int(w * DPI), int(h * DPI)))
        marker = ax.plot([hs["x"]], [hs["y"]], ls="none", marker="o", ms=8, mfc="none",
                         mec="white", mew=1.6, zorder=6, gid="hot-spot",
                         path_effects=[_ring_stroke()])[0]
        if panel.zoom is False and len(panels) == 2:
            zx0, zx1, zy0, zy1 = panels[1].extent
            ax.add_patch(Rectangle((zx0, zy0), zx1 - zx0, zy1 - zy0, fill=False, ec="white",
                                   ls=(0, (3, 2)), lw=1.2, zorder=5,
                                   path_effects=[_ring_stroke(2.6)]))
        avoid = [marker.get_window_extent(renderer).expanded(1.6, 1.6)]
        mapview.name_shapes(ax, result, renderer, zoom=panel.zoom, avoid=avoid)
    fig.legend(handles=entries, loc="lower left", ncol=ncol, fontsize=8, frameon=False,
               bbox_to_anchor=(LEFT / fig_w, caption / fig_h), borderaxespad=0.1,
               facecolor="0.6", handlelength=3.2)
    if title_lines:
        exceeded = any(v["exceeded"] for v in summary.get("limits", {}).values())
        fig.text(LEFT / fig_w, 1 - 0.06 / fig_h, "\n".join(title_lines), fontsize=10,
                 va="top", ha="left", color="firebrick" if exceeded else "black")
    fig.text(0.01, 0.03 / fig_h, "Estimate only: confirm against measurements and component "
             "ratings; safety standards, codes and qualified review take precedence.",
             fontsize=7, color="0.35", va="bottom")
    if path is not None:
        fig.savefig(path, dpi=DPI)
    return fig


def _field(result: Result, ax, cax, panel: Panel, fig, *, show_mesh: bool, scale, pixels):
    """Filled bands, isotherms, colour bar and (optionally) the mesh of one panel."""
    import matplotlib.tri as mtri

    mesh, T = result.mesh, result.temperature
    triangles = mesh.triangles
    if panel.zoom:
        triangles = triangles[mapview.overlaps(mesh, panel.limits())]
    used = np.zeros(len(T), dtype=bool)
    used[triangles] = True
    shown = T[used]
    lo, hi = float(shown.min()), float(shown.max())
    del used, shown
    lv = mapview.levels(lo, hi, scale=scale)
    tri = None
    if len(triangles) > RASTER_ABOVE and not show_mesh:
        # Large meshes: contour a pixel grid sampled from the linear field (exact at the
        # picture's resolution, several times faster than contouring every triangle).
        nx, ny = max(pixels[0], 50), max(pixels[1], 50)
        args = raster(mesh.points, triangles, T, panel.limits(), nx, ny)
        fill, lines = ax.contourf, ax.contour
    else:
        tri = mtri.Triangulation(mesh.points[:, 0], mesh.points[:, 1], triangles)
        args, fill, lines = (tri, T), ax.tricontourf, ax.tricontour
    filled = fill(*args, levels=lv.fill, cmap="inferno", extend=lv.extend, zorder=1)
    bar = fig.colorbar(filled, cax=cax, format=lv.fmt, ticks=lv.ticks, extend=lv.extend)
    bar.set_label("temperature (°C)" + (" (uniform)" if lv.uniform else ""))
    if len(lv.lines):               # a uniform field has no isotherms
        iso = lines(*args, levels=lv.lines, colors="k", linewidths=0.5, alpha=0.7, zorder=2)
        ax.clabel(iso, fmt=lv.fmt, fontsize=7, inline=True)
        bar.add_lines(iso)
    if show_mesh:
        ax.triplot(tri, color="white", lw=0.15, alpha=0.5, zorder=3)


def _ring_stroke(width: float = 3.4):
    """A dark outline under the white marks, so they read on light and dark colours."""
    from matplotlib import patheffects

    return patheffects.withStroke(linewidth=width, foreground="black")


def _hot_label(result: Result) -> str:
    hs = result.summary["hot_spot"]
    err = hs.get("temperature_error")
    pm = f" ± {err:.1g}" if err is not None else ""
    return (f"hot spot {hs['temperature']:.1f}{pm} °C in {hs['shape']} at "
            f"({hs['x']:.3g}, {hs['y']:.3g}) {result.model.length_unit}")


def _title(result: Result) -> list[str]:
    """The title, the power and the tightest limits, one per line."""
    model, summary = result.model, result.summary
    hs = summary["hot_spot"]
    unit = model.length_unit
    extent = "full revolution" if model.axisymmetric else f"{model.depth:g} {unit} depth"
    lines = [f"{model.title or model.stem}: max {hs['temperature']:.1f} °C, "
             f"{summary['energy_balance']['power_in_w']:.3g} W over {extent}"]
    limits = summary.get("limits", {})
    shown = sorted(limits.items(), key=lambda kv: kv[1]["margin"])
    for name, lim in shown[:3]:
        state = (f"EXCEEDED by {-lim['margin']:.1f} K" if lim["exceeded"]
                 else f"margin {lim['margin']:.1f} K")
        lines.append(f"{name} {lim['max']:.1f} °C vs limit {lim['limit']:g} °C ({state})")
    if len(limits) > 3:
        lines[-1] += f" (+{len(limits) - 3} more limits in summary.txt)"
    return lines


def _renderer(fig):
    """The figure's renderer (an Agg canvas is attached when it has none), to measure
    text before placing it."""
    canvas = fig.canvas
    if not hasattr(canvas, "get_renderer"):
        from matplotlib.backends.backend_agg import FigureCanvasAgg

        canvas = FigureCanvasAgg(fig)
    return canvas.get_renderer()


RASTER_ABOVE = 100_000
"""Panels with more triangles are drawn from a pixel grid."""


RASTER_CHUNK = 200_000
"""Triangles sampled at a time by :func:`raster` (bounds its temporaries)."""


def raster(points: np.ndarray, triangles: np.ndarray, T: np.ndarray,
           extent: tuple[float, float, float, float], nx: int, ny: int):
    """The linear field sampled at the centres of an ``nx`` × ``ny`` pixel grid over
    ``extent`` (masked outside the mesh).

    Vectorized over (triangle, pixel) candidates: the pixel centres inside each
    triangle's bounding box (none for most triangles of a mesh finer than the pixels),
    :data:`RASTER_CHUNK` triangles at a time.
    """
    x0, x1, y0, y1 = extent
    dx, dy = (x1 - x0) / nx, (y1 - y0) / ny
    grid = np.full((ny, nx), np.nan)
    for start in range(0, len(triangles), RASTER_CHUNK):
        _sample(grid, points, triangles[start:start + RASTER_CHUNK], T, x0, y0, dx, dy)
    gx, gy = np.meshgrid(x0 + (np.arange(nx) + 0.5) * dx, y0 + (np.arange(ny) + 0.5) * dy)
    return gx, gy, np.ma.masked_invalid(grid)


def _sample(grid: np.ndarray, points: np.ndarray, triangles: np.ndarray, T: np.ndarray,
            x0: float, y0: float, dx: float, dy: float) -> None:
    """Write into ``grid`` the field of ``triangles`` at the pixel centres they hold."""
    ny, nx = grid.shape
    p = points[triangles]
    # Pixel columns (rows) whose centre x0 + (i + ½)dx lies within the bounding box.
    fx = (p[:, :, 0] - x0) / dx - 0.5
    fy = (p[:, :, 1] - y0) / dy - 0.5
    ix0 = np.clip(np.ceil(fx.min(axis=1) - 1e-9), 0, nx).astype(np.int64)
    ix1 = np.clip(np.floor(fx.max(axis=1) + 1e-9), -1, nx - 1).astype(np.int64)
    iy0 = np.clip(np.ceil(fy.min(axis=1) - 1e-9), 0, ny).astype(np.int64)
    iy1 = np.clip(np.floor(fy.max(axis=1) + 1e-9), -1, ny - 1).astype(np.int64)
    w, h = np.maximum(ix1 - ix0 + 1, 0), np.maximum(iy1 - iy0 + 1, 0)
    count = w * h
    keep = np.flatnonzero(count)
    if len(keep) == 0:
        return
    p, ix0, iy0, w, count = p[keep], ix0[keep], iy0[keep], w[keep], count[keep]
    # Per triangle: barycentric l1, l2 and T as affine functions a + b·x + c·y.
    (ax, ay), (bx, by), (cx_, cy_) = (p[:, i].T for i in range(3))
    det = (bx - ax) * (cy_ - ay) - (by - ay) * (cx_ - ax)
    l1 = np.stack([(-ax * (cy_ - ay) + ay * (cx_ - ax)), cy_ - ay, -(cx_ - ax)]) / det
    l2 = np.stack([(-(bx - ax) * ay + (by - ay) * ax), -(by - ay), bx - ax]) / det
    t0, t1, t2 = T[triangles[keep]].T
    tv = t0 * np.stack([1 - l1[0] - l2[0], -l1[1] - l2[1], -l1[2] - l2[2]]) \
        + t1 * l1 + t2 * l2
    t = np.repeat(np.arange(len(keep)), count)
    local = np.arange(count.sum()) - np.repeat(np.cumsum(count) - count, count)
    px = ix0[t] + local % w[t]
    py = iy0[t] + local // w[t]
    x, y = x0 + (px + 0.5) * dx, y0 + (py + 0.5) * dy
    u = l1[0, t] + l1[1, t] * x + l1[2, t] * y
    v = l2[0, t] + l2[1, t] * x + l2[2, t] * y
    inside = (u >= -1e-9) & (v >= -1e-9) & (u + v <= 1 + 1e-9)
    t, x, y = t[inside], x[inside], y[inside]
    grid[py[inside], px[inside]] = tv[0, t] + tv[1, t] * x + tv[2, t] * y
