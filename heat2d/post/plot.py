"""The temperature map written as ``<stem>.png``."""

from __future__ import annotations

from pathlib import Path
from typing import TYPE_CHECKING

import numpy as np

if TYPE_CHECKING:                 # annotations only: results imports this module
    from .results import Result

LEVELS = 24
ZOOM_FRACTION = 0.3
"""Add a panel zoomed on the hot shape when its window is smaller than this fraction of
the model's width."""
ZOOM_ASPECT = 3.0
"""Width over height of the zoomed window."""


def plot_temperature(result: Result, path: str | Path | None = None, *, fig=None,
                     show_mesh: bool = False):
    """Draw the temperature map; save it to ``path`` if given and return the figure.

    Filled contours with isotherm lines, shape outlines, the hot spot marked and
    labelled, colour bar in °C, axes in the model's length unit, equal aspect.
    A flat model (a board slice) gets a second panel zoomed on the hot spot;
    ``show_mesh`` draws the triangles too.
    """
    import matplotlib.tri as mtri
    from matplotlib.figure import Figure

    mesh, model, summary = result.mesh, result.model, result.summary
    T = result.temperature
    x0, y0 = mesh.points.min(axis=0)
    x1, y1 = mesh.points.max(axis=0)
    aspect = (y1 - y0) / max(x1 - x0, 1e-300)
    hs = summary["hot_spot"]
    window = _zoom_window(result, hs["shape"])
    zoom = window[1] - window[0] < ZOOM_FRACTION * (x1 - x0)
    width = 11.0
    full_h = float(np.clip(width * 0.8 * aspect, 0.6, 7.5))
    zoom_h = width * 0.8 / ZOOM_ASPECT if zoom else 0.0
    if fig is None:
        # Fixed margins (in inches) instead of a layout engine, which would draw the
        # figure twice.
        height = full_h + zoom_h + 1.6 + (0.9 if zoom else 0.0)
        fig = Figure(figsize=(width, height))
        fig.subplots_adjust(left=0.8 / width, right=1 - 1.1 / width, bottom=0.75 / height,
                            top=1 - 0.75 / height, hspace=0.9 / max(full_h + zoom_h, 1.0) * 2)
    axes = fig.subplots(2 if zoom else 1, 1, squeeze=False,
                        height_ratios=[full_h, zoom_h] if zoom else None)[:, 0]
    triangulations = [mtri.Triangulation(mesh.points[:, 0], mesh.points[:, 1], mesh.triangles)]
    unit = model.length_unit
    ranges = [(float(T.min()), float(T.max()))]
    if zoom:
        # The zoomed panel gets its own colour scale, so the detail near the hot spot shows.
        wx0, wx1, wy0, wy1 = window
        p = mesh.points
        near = (p[:, 0] >= wx0) & (p[:, 0] <= wx1) & (p[:, 1] >= wy0) & (p[:, 1] <= wy1)
        ranges.append((float(T[near].min()), float(T[near].max())))
        # The zoomed panel contours only the triangles that reach into its window.
        keep = _overlaps(mesh, window)
        triangulations.append(mtri.Triangulation(mesh.points[:, 0], mesh.points[:, 1],
                                                 mesh.triangles[keep]))
    for k, ax in enumerate(axes):
        tri = triangulations[k]
        lo, hi = ranges[k]
        uniform = _uniform(lo, hi)
        if uniform:
            # One band half a kelvin either side of the single value: contour levels
            # closer than round-off are refused by matplotlib.
            mid = 0.5 * (lo + hi)
            levels = np.array([mid - 0.5, mid + 0.5])
        else:
            levels = np.linspace(lo, hi, LEVELS + 1)
        if len(tri.triangles) > RASTER_ABOVE and not show_mesh:
            # Large meshes: contour a pixel grid sampled from the linear field (exact at
            # the picture's resolution, several times faster than contouring every triangle).
            gx, gy, grid = _raster(mesh.points, tri.triangles, T, ax_extent(k, window, mesh))
            contour, contour_lines = ax.contourf, ax.contour
            args = (gx, gy, grid)
        else:
            contour, contour_lines = ax.tricontourf, ax.tricontour
            args = (tri, T)
        filled = contour(*args, levels=levels, cmap="inferno", extend="both")
        fmt = _label_format(lo, hi)
        bar = fig.colorbar(filled, ax=ax, shrink=0.95, format=fmt, pad=0.01,
                           ticks=[mid] if uniform else None)
        bar.set_label("temperature (°C)" + (" (uniform)" if uniform else ""))
        if not uniform:             # a uniform field has no isotherms
            lines = contour_lines(*args, levels=levels[::4], colors="k", linewidths=0.4,
                                  alpha=0.6)
            ax.clabel(lines, fmt=fmt, fontsize=7, inline=True)
        if show_mesh:
            ax.triplot(tri, color="white", lw=0.15, alpha=0.5)
        _outlines(ax, result)
        ax.plot(hs["x"], hs["y"], marker="x", color="cyan", markersize=9, mew=2)
        if k == len(axes) - 1:
            upper = hs["y"] > 0.5 * (y0 + y1)
            right = hs["x"] > 0.5 * (x0 + x1) if not zoom else False
            err = hs.get("temperature_error")
            pm = f" ± {err:.2g}" if err is not None else ""
            ax.annotate(f"hot spot {hs['temperature']:.1f}{pm} °C ({hs['shape']})",
                        (hs["x"], hs["y"]), xytext=(-10 if right else 10, -12 if upper else 12),
                        textcoords="offset points", color="white", fontsize=9,
                        ha="right" if right else "left", va="top" if upper else "bottom",
                        bbox={"boxstyle": "round", "fc": "black", "alpha": 0.6, "lw": 0})
        ax.set_aspect("equal")
        ax.set_xlabel(f"r ({unit})" if model.axisymmetric else f"x ({unit})")
        ax.set_ylabel(f"z ({unit})" if model.axisymmetric else f"y ({unit})")
    if zoom:
        axes[1].set_xlim(wx0, wx1)
        axes[1].set_ylim(wy0, wy1)
        axes[1].set_title("around the hot spot", fontsize=9)
        from matplotlib.patches import Rectangle

        axes[0].add_patch(Rectangle((wx0, wy0), wx1 - wx0, wy1 - wy0, fill=False,
                                    ec="cyan", lw=1.0, ls="--"))
    title = model.title or model.stem
    extent = ("full revolution" if model.axisymmetric else f"{model.depth:g} {unit} depth")
    lines = [f"{title}: max {hs['temperature']:.1f} °C, "
             f"{summary['energy_balance']['power_in_w']:.3g} W over {extent}"]
    limits = []
    for name, lim in summary.get("limits", {}).items():
        state = (f"EXCEEDED by {-lim['margin']:.1f} K" if lim["exceeded"]
                 else f"margin {lim['margin']:.1f} K")
        limits.append(f"{name} {lim['max']:.1f} °C vs limit {lim['limit']:g} °C ({state})")
    shown = sorted(summary.get("limits", {}).items(), key=lambda kv: kv[1]["margin"])
    if limits:
        # The tightest three, one per line.
        order = [list(summary["limits"]).index(name) for name, _ in shown[:3]]
        lines += [limits[i] for i in order]
        if len(limits) > 3:
            lines.append(f"(+{len(limits) - 3} more limits in summary.txt)")
    axes[0].set_title("\n".join(lines), fontsize=10,
                      color="firebrick" if any(v["exceeded"] for v in summary["limits"].values())
                      else "black")
    fig.text(0.01, 0.002, "Estimate only: confirm against measurements and component ratings.",
             fontsize=7, color="0.35", va="bottom")
    if path is not None:
        fig.savefig(path, dpi=110)
    return fig


UNIFORM_SPAN = 1e-6
"""A panel whose temperature spread is below this fraction of max(1, |T|) °C is drawn
as a uniform field: one colour and a colour bar with its single value."""


def _uniform(lo: float, hi: float) -> bool:
    """Whether the range [lo, hi] is one value to round-off (an unpowered model)."""
    return hi - lo <= UNIFORM_SPAN * max(1.0, abs(lo), abs(hi))


def _label_format(lo: float, hi: float) -> str:
    """Colour-bar and isotherm labels with enough decimals that the ticks (about six
    over the range) differ: one decimal for spreads of a few kelvin and more."""
    if _uniform(lo, hi):
        return "%.2f"
    decimals = int(np.clip(np.ceil(-np.log10((hi - lo) / 6)), 1, 9))
    return f"%.{decimals}f"


RASTER_ABOVE = 100_000
"""Panels with more triangles are drawn from a pixel grid."""
RASTER_PIXELS = 800


def ax_extent(k: int, window, mesh) -> tuple[float, float, float, float]:
    if k == 1:
        return window
    (x0, y0), (x1, y1) = mesh.points.min(axis=0), mesh.points.max(axis=0)
    return (x0, x1, y0, y1)


def _raster(points: np.ndarray, triangles: np.ndarray, T: np.ndarray,
            extent: tuple[float, float, float, float]):
    """The linear field sampled at pixel centres (masked outside the mesh).

    Vectorized over (triangle, pixel) candidates from each triangle's bounding box.
    """
    x0, x1, y0, y1 = extent
    nx = RASTER_PIXELS
    ny = int(np.clip(nx * (y1 - y0) / max(x1 - x0, 1e-300), 50, RASTER_PIXELS))
    dx, dy = (x1 - x0) / nx, (y1 - y0) / ny
    p = points[triangles]
    ix0 = np.clip(np.floor((p[:, :, 0].min(axis=1) - x0) / dx - 0.5).astype(int), 0, nx - 1)
    ix1 = np.clip(np.ceil((p[:, :, 0].max(axis=1) - x0) / dx - 0.5).astype(int), 0, nx - 1)
    iy0 = np.clip(np.floor((p[:, :, 1].min(axis=1) - y0) / dy - 0.5).astype(int), 0, ny - 1)
    iy1 = np.clip(np.ceil((p[:, :, 1].max(axis=1) - y0) / dy - 0.5).astype(int), 0, ny - 1)
    # Per triangle: barycentric l1, l2 and T as affine functions a + b·x + c·y.
    (ax, ay), (bx, by), (cx_, cy_) = (p[:, i].T for i in range(3))
    det = (bx - ax) * (cy_ - ay) - (by - ay) * (cx_ - ax)
    l1 = np.stack([(-ax * (cy_ - ay) + ay * (cx_ - ax)), cy_ - ay, -(cx_ - ax)]) / det
    l2 = np.stack([(-(bx - ax) * ay + (by - ay) * ax), -(by - ay), bx - ax]) / det
    t0, t1, t2 = T[triangles].T
    tv = t0 * np.stack([1 - l1[0] - l2[0], -l1[1] - l2[1], -l1[2] - l2[2]]) \
        + t1 * l1 + t2 * l2
    w, h = ix1 - ix0 + 1, iy1 - iy0 + 1
    count = w * h
    t = np.repeat(np.arange(len(triangles)), count)
    local = np.arange(count.sum()) - np.repeat(np.cumsum(count) - count, count)
    px = ix0[t] + local % w[t]
    py = iy0[t] + local // w[t]
    x, y = x0 + (px + 0.5) * dx, y0 + (py + 0.5) * dy
    u = l1[0, t] + l1[1, t] * x + l1[2, t] * y
    v = l2[0, t] + l2[1, t] * x + l2[2, t] * y
    inside = (u >= -1e-9) & (v >= -1e-9) & (u + v <= 1 + 1e-9)
    t, x, y = t[inside], x[inside], y[inside]
    grid = np.full((ny, nx), np.nan)
    grid[py[inside], px[inside]] = tv[0, t] + tv[1, t] * x + tv[2, t] * y
    gx, gy = np.meshgrid(x0 + (np.arange(nx) + 0.5) * dx, y0 + (np.arange(ny) + 0.5) * dy)
    return gx, gy, np.ma.masked_invalid(grid)


def _overlaps(mesh, window: tuple[float, float, float, float]) -> np.ndarray:
    """Triangles whose bounding box meets the window (large ones with no node inside)."""
    wx0, wx1, wy0, wy1 = window
    p = mesh.points[mesh.triangles]
    lo, hi = p.min(axis=1), p.max(axis=1)
    return (lo[:, 0] <= wx1) & (hi[:, 0] >= wx0) & (lo[:, 1] <= wy1) & (hi[:, 1] >= wy0)


def _zoom_window(result: Result, shape: str) -> tuple[float, float, float, float]:
    """A window of aspect ZOOM_ASPECT around the hot shape, three times its size."""
    mesh = result.mesh
    index = mesh.model.shape(shape).index
    pts = mesh.points[np.unique(mesh.triangles[mesh.triangle_shape == index])]
    (sx0, sy0), (sx1, sy1) = pts.min(axis=0), pts.max(axis=0)
    w = max(3 * (sx1 - sx0), 3 * ZOOM_ASPECT * (sy1 - sy0))
    h = w / ZOOM_ASPECT
    cx, cy = 0.5 * (sx0 + sx1), 0.5 * (sy0 + sy1)
    return cx - w / 2, cx + w / 2, cy - h / 2, cy + h / 2


def _outlines(ax, result: Result) -> None:
    """Draw the visible outline of every shape as thin white lines."""
    import shapely

    segments = []
    for geom in result.mesh.geometry.visible:
        for part in shapely.get_parts(shapely.boundary(geom)):
            for ring in shapely.get_parts(part):
                segments.append(shapely.get_coordinates(ring))
    from matplotlib.collections import LineCollection

    ax.add_collection(LineCollection(segments, colors="0.55", linewidths=0.8))
