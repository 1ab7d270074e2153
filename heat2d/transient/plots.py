"""Plots of a transient run: temperature history, thermal impedance, pulse peaks.

Each function draws one PNG from a ``TransientResult`` (see :mod:`heat2d.transient.files`
for the attributes used) with units on the axes, a legend, a grid, the model's title in
the heading and the caution line at the foot.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np

__all__ = ["CAUTION", "plot_duty", "plot_history", "plot_zth", "powered_names",
           "shape_columns"]

DPI = 110
CAUTION = "Estimates only: confirm against measurements and component ratings"
MAX_DUTY_PANELS = 4
"""Pulse-peak panels drawn at most (one per powered shape, in file order)."""
FIT_POINTS = 200
"""Points of the drawn Foster fit curve."""


def powered_names(model) -> list[str]:
    """Shapes whose power, power density or power schedule is set, then the conductors
    (shapes or groups carrying a current), each once, in file order."""
    names = [sh.name for sh in model.shapes if not sh.void and (
        sh.power is not None or sh.power_density is not None
        or getattr(sh, "schedule", None) is not None)]
    for name, _, _ in getattr(model, "conductors", ()):
        if name not in names:
            names.append(name)
    return names


def _member_weights(result, name: str) -> tuple[np.ndarray, np.ndarray]:
    """Columns of the model shapes a powered name stands for, and their volumes (for the
    mean of a group)."""
    model, mesh = result.model, result.mesh
    members = [s for s in model.members(name) if not s.void]
    cols = np.array([s.index for s in members], dtype=int)
    p = mesh.points[mesh.triangles]                       # (m, 3, 2)
    area = 0.5 * np.abs((p[:, 1, 0] - p[:, 0, 0]) * (p[:, 2, 1] - p[:, 0, 1])
                        - (p[:, 2, 0] - p[:, 0, 0]) * (p[:, 1, 1] - p[:, 0, 1]))
    if getattr(model, "axisymmetric", False):             # volume ∝ area · r̄ (2π cancels)
        area = area * np.abs(p[:, :, 0].mean(axis=1))
    volume = np.bincount(mesh.triangle_shape, area, minlength=len(model.shapes))
    return cols, volume[cols]


def shape_columns(result) -> dict[str, tuple[np.ndarray, np.ndarray]]:
    """Per powered name (:func:`powered_names`): its max and mean temperature (°C) at each
    report time. A group takes the max over its members and their volume-weighted mean."""
    h = result.history
    out = {}
    for name in powered_names(result.model):
        cols, vol = _member_weights(result, name)
        if len(cols) == 1:
            out[name] = (h.shape_max[:, cols[0]], h.shape_mean[:, cols[0]])
            continue
        top = np.nanmax(h.shape_max[:, cols], axis=1)
        mean = (h.shape_mean[:, cols] * vol).sum(axis=1) / vol.sum()
        out[name] = (top, mean)
    return out



def _figure(width: float, height: float):
    from matplotlib.backends.backend_agg import FigureCanvasAgg
    from matplotlib.figure import Figure

    fig = Figure(figsize=(width, height), dpi=DPI)
    FigureCanvasAgg(fig)
    return fig


def _heading(result, what: str) -> str:
    """What the plot shows, over the model's title (wrapped so it fits the figure)."""
    import textwrap

    model = result.model
    name = model.title or model.stem
    return what[:1].upper() + what[1:] + "\n" + "\n".join(textwrap.wrap(name, 90))


def _finish(fig, path) -> None:
    fig.text(0.5, 0.012, CAUTION, ha="center", va="bottom", fontsize=7, color="0.35",
             style="italic")
    fig.savefig(Path(path), dpi=DPI)


def _colours(n: int):
    from matplotlib import colormaps

    cmap = colormaps["tab10"]
    return [cmap(i % 10) for i in range(n)]


def plot_history(result, path: str | Path) -> None:
    """Each powered shape's max (solid) and mean (dashed) temperature and each probe
    (dash-dot) against time, °C; a log time axis when the report times are log-spaced
    (t = 0 is left out there)."""
    h = result.history
    t = np.asarray(h.times, dtype=float)
    keep = t > 0 if result.log_time else np.ones(len(t), bool)
    curves = shape_columns(result)
    probes = list(result.model.probes)
    fig = _figure(8.0, 5.0)
    ax = fig.add_axes((0.09, 0.15, 0.62, 0.76))
    colours = _colours(len(curves) + len(probes))
    for c, (name, (top, mean)) in zip(colours[:len(curves)], curves.items(), strict=True):
        ax.plot(t[keep], np.asarray(top)[keep], color=c, lw=1.8, label=f"{name} max")
        ax.plot(t[keep], np.asarray(mean)[keep], color=c, lw=1.4, ls="--",
                label=f"{name} mean")
    for j, (c, probe) in enumerate(zip(colours[len(curves):], probes, strict=True)):
        ax.plot(t[keep], h.probes[keep, j], color=c, lw=1.2, ls="-.",
                label=f"probe {probe.name}")
    if result.log_time:
        ax.set_xscale("log")
    elif len(t):
        ax.set_xlim(t[0], t[-1])
    ax.set_xlabel("time (s)")
    ax.set_ylabel("temperature (°C)")
    ax.set_title(_heading(result, "temperature against time"), fontsize=11)
    ax.grid(True, which="major", alpha=0.5)
    ax.grid(True, which="minor", alpha=0.15)
    if ax.get_legend_handles_labels()[0]:
        ax.legend(loc="upper left", bbox_to_anchor=(1.02, 1.0), fontsize=8, frameon=False)
    _finish(fig, path)


def _positive(t, z) -> tuple[np.ndarray, np.ndarray]:
    t, z = np.asarray(t, dtype=float), np.asarray(z, dtype=float)
    ok = (t > 0) & (z > 0) & np.isfinite(z)
    return t[ok], z[ok]


def _steady_r(result, name: str) -> float | None:
    zth = (result.summary.get("transient") or {}).get("zth") or {}
    r = (zth.get(name) or {}).get("r_k_per_w")
    if r is None:
        foster = (result.networks.get(name) or {}).get("foster")
        r = None if foster is None else float(np.sum(foster.r))
    return None if r is None else float(r)


def plot_zth(result, path: str | Path) -> None:
    """Zth(t) of each powered shape, K/W against s (log-log): the marched curve as markers,
    the Foster fit as a line (its terms and fit error in the legend), the steady
    resistance as a dotted line."""
    names = [n for n in result.zth if len(_positive(*result.zth[n])[0])]
    rows = max(len(names), 1)
    legend_h = 0.22 * rows + 0.2
    height = 4.6 + legend_h
    fig = _figure(8.5, height)
    bottom = (legend_h + 0.75) / height
    ax = fig.add_axes((0.1, bottom, 0.86, 1 - bottom - 0.45 / height))
    kinds: dict[str, list] = {"marched": [], "fit": [], "steady": []}
    lo, hi = np.inf, 0.0
    for c, name in zip(_colours(len(names)), names, strict=True):
        t, z = _positive(*result.zth[name])
        lo, hi = min(lo, t[0]), max(hi, t[-1])
        kinds["marched"] += ax.plot(t, z, ls="none", marker="o", ms=3.5, mfc="none",
                                    color=c, label=f"{name}: marched")
        foster = (result.networks.get(name) or {}).get("foster")
        if foster is not None:
            tt = np.geomspace(t[0], t[-1], FIT_POINTS)
            err = float(foster.error)
            tail = f", fit error {100 * err:.2g} %" if np.isfinite(err) else ""
            kinds["fit"] += ax.plot(tt, foster.z(tt), color=c, lw=1.3,
                                    label=f"Foster N = {len(foster.r)}{tail}")
        r = _steady_r(result, name)
        if r is not None and r > 0:
            kinds["steady"].append(ax.axhline(r, color=c, lw=1.0, ls=":",
                                              label=f"steady R = {r:.4g} K/W"))
    ax.set_xscale("log")
    ax.set_yscale("log")
    if hi > 0:
        ax.set_xlim(lo, hi)
    ax.set_xlabel("time after a power step (s)")
    ax.set_ylabel("thermal impedance Zth (K/W)")
    ax.set_title(_heading(result, "thermal impedance, max rise per watt"), fontsize=11)
    ax.grid(True, which="major", alpha=0.5)
    ax.grid(True, which="minor", alpha=0.15)
    columns = [h for h in kinds.values() if h]
    if columns:                 # one row per shape: marched, fit, steady
        handles = [h for col in columns for h in col]
        fig.legend(handles=handles, loc="upper left", ncol=len(columns), fontsize=8,
                   frameon=False, bbox_to_anchor=(0.08, (legend_h + 0.05) / height))
    _finish(fig, path)


def _duty_names(result) -> list[str]:
    order = [n for n in powered_names(result.model) if n in result.duty]
    order += [n for n in result.duty if n not in order]
    return order[:MAX_DUTY_PANELS]


def plot_duty(result, path: str | Path) -> None:
    """Peak rise per watt (K/W) against pulse width (s), log-log, for a single pulse and
    each duty of a periodic pulse train, in one panel per powered shape (up to
    :data:`MAX_DUTY_PANELS`); the steady resistance (duty 1) dotted."""
    from matplotlib import colormaps

    names = _duty_names(result)
    n = max(len(names), 1)
    cols = 1 if n == 1 else 2
    rows = (n + cols - 1) // cols
    fig = _figure(8.0 if cols == 1 else 11.0, 1.2 + 4.0 * rows)
    axes = fig.subplots(rows, cols, squeeze=False)
    fig.subplots_adjust(left=0.09 if cols == 1 else 0.07, right=0.74 if cols == 1 else 0.83,
                        top=1 - 0.75 / (1.2 + 4.0 * rows), bottom=0.75 / (1.2 + 4.0 * rows),
                        wspace=0.25, hspace=0.35)
    cmap = colormaps["viridis"]
    handles = None
    for k, ax in enumerate(axes.ravel()):
        if k >= len(names):
            ax.set_visible(False)
            continue
        name = names[k]
        d = result.duty[name]
        widths = np.asarray(d["widths"], dtype=float)
        peaks = np.asarray(d["peaks"], dtype=float)
        duties = list(d["duties"])
        ax.plot(widths, peaks[0], color="black", lw=2.0, label="single pulse")
        for i, duty in enumerate(duties):
            c = cmap(0.8 * (1 - i / max(len(duties) - 1, 1)))
            ax.plot(widths, peaks[i + 1], color=c, lw=1.3, marker=".", ms=4,
                    label=f"duty {100 * duty:g} %")
        r = _steady_r(result, name)
        if r is not None and r > 0:
            ax.axhline(r, color="0.4", lw=1.0, ls=":", label=f"continuous (R = {r:.4g} K/W)")
        ax.set_xscale("log")
        ax.set_yscale("log")
        ax.set_xlabel("pulse width (s)")
        ax.set_ylabel("peak rise per watt (K/W)")
        ax.set_title(name, fontsize=10)
        ax.grid(True, which="major", alpha=0.5)
        ax.grid(True, which="minor", alpha=0.15)
        handles = ax.get_legend_handles_labels()
    if handles and handles[0]:
        fig.legend(*handles, loc="upper left", fontsize=8, frameon=False,
                   bbox_to_anchor=(0.755 if cols == 1 else 0.84, 1 - 0.55 / (1.2 + 4.0 * rows)))
    fig.suptitle(_heading(result, "peak rise of periodic power pulses"), fontsize=11)
    _finish(fig, path)
