"""Stage 7: :class:`~heat2d.post.results.Result` -> files.

Every writer puts one file into a scratch folder; :func:`write` moves them
into place only when all have succeeded, so a failed run leaves nothing
half-written.
"""

from __future__ import annotations

import json
import os
import shutil
import tempfile
from collections.abc import Callable, Iterable
from pathlib import Path
from typing import TYPE_CHECKING

import numpy as np

from ..errors import Heat2dError

if TYPE_CHECKING:                 # annotations only: results imports this module
    from .results import Result

VTU_COMPRESS_LIMIT = 20_000
"""VTU files of meshes with more nodes are written uncompressed (speed over size)."""


def write_vtu(result: Result, path: Path, **options) -> None:
    """The mesh with point data ``temperature`` and cell data ``heat_flux``, ``shape_id``,
    ``material_id`` (ids index ``summary["ids"]``)."""
    import meshio

    mesh = result.mesh
    points = np.column_stack([mesh.points, np.zeros(len(mesh.points))])
    # zlib costs seconds on large meshes for a 2-3x smaller file: large meshes go plain.
    compression = "zlib" if len(points) <= VTU_COMPRESS_LIMIT else None
    flux = np.column_stack([result.heat_flux, np.zeros(len(result.heat_flux))])
    meshio.Mesh(
        points, [("triangle", mesh.triangles)],
        point_data={"temperature": result.temperature},
        cell_data={"heat_flux": [flux], "shape_id": [mesh.triangle_shape.astype(np.int32)],
                   "material_id": [mesh.triangle_material.astype(np.int32)]},
    ).write(path, file_format="vtu", compression=compression)


def write_json(result: Result, path: Path, **options) -> None:
    """The summary as JSON (see docs/model-format.md for the keys)."""
    path.write_text(json.dumps(result.summary, indent=2, allow_nan=False) + "\n",
                    encoding="utf-8")


def write_text(result: Result, path: Path, **options) -> None:
    """The summary as a readable table, with the caution."""
    path.write_text(format_summary(result.summary) + "\n", encoding="utf-8")


def write_png(result: Result, path: Path, *, show_mesh: bool = False, **options) -> None:
    """A temperature map: filled contours, isotherms, shape outlines, hot spot, colour bar;
    the triangles too with ``show_mesh``."""
    from .plot import plot_temperature

    plot_temperature(result, path, show_mesh=show_mesh)


WRITERS: dict[str, tuple[str, Callable[..., None]]] = {
    "vtu": ("{stem}.vtu", write_vtu),
    "json": ("summary.json", write_json),
    "txt": ("summary.txt", write_text),
    "png": ("{stem}.png", write_png),
}
"""Output writers by name: file name pattern and function ``(result, path, **options)``;
each ignores the options that are not its own."""


def write(result: Result, out_dir: str | Path, *, formats: Iterable[str] | None = None,
          stem: str | None = None, **options) -> list[Path]:
    """Write the outputs of a run into ``out_dir`` (created if needed), all or nothing.

    Parameters
    ----------
    result
        From :func:`heat2d.run`.
    out_dir
        Destination folder.
    formats
        Names from :data:`WRITERS`; all by default.
    stem
        File stem for the VTU and PNG; the model file's stem by default.
    **options
        Passed to every writer (``show_mesh=True`` draws the triangles on the PNG).

    Returns
    -------
    list of Path
        The files written.
    """
    names = list(WRITERS) if formats is None else list(formats)
    unknown = sorted(set(names) - set(WRITERS))
    if unknown:
        raise Heat2dError(f"unknown output format {unknown[0]!r} (choose from: "
                          f"{', '.join(sorted(WRITERS))})")
    stem = stem or result.model.stem
    out = Path(out_dir)
    try:
        out.mkdir(parents=True, exist_ok=True)
    except OSError as exc:
        raise Heat2dError(f"cannot create output folder: {exc}", file=str(out)) from None
    scratch = Path(tempfile.mkdtemp(prefix=".heat2d-partial-", dir=out))
    try:
        written = []
        for name in names:
            pattern, func = WRITERS[name]
            target = scratch / pattern.format(stem=stem)
            func(result, target, **options)
            written.append(target)
        final = []
        for f in written:
            os.replace(f, out / f.name)
            final.append(out / f.name)
        return final
    except OSError as exc:
        raise Heat2dError(f"cannot write outputs: {exc}", file=str(out)) from None
    finally:
        shutil.rmtree(scratch, ignore_errors=True)


def _fmt(value: float | None, spec: str = ".2f") -> str:
    return "-" if value is None else format(value, spec)


def _pm(error: float | None, spec: str = ".2g") -> str:
    """' ± e' for an error estimate, or nothing where none was made."""
    return "" if error is None else f" ± {error:{spec}}"


def format_summary(summary: dict) -> str:
    """The run summary as a plain-text table."""
    unit = summary["units"]["length"]
    hs = summary["hot_spot"]
    eb = summary["energy_balance"]
    lines = [
        f"heat2d {summary['heat2d_version']}: {summary['model']['file']}"
        + (f"  ({summary['model']['title']})" if summary["model"]["title"] else ""),
        f"powers and heat flows are for the {summary['units']['powers_and_heat_flows_for']}",
        "",
        f"Hot spot      {hs['temperature']:.2f}{_pm(hs.get('temperature_error'))} °C in "
        f"\"{hs['shape']}\" at ({hs['x']:.4g}, {hs['y']:.4g}) {unit}",
        f"Temperature   min {summary['temperature']['min']:.2f} °C, "
        f"max {summary['temperature']['max']:.2f}"
        f"{_pm(summary['temperature'].get('max_error'))} °C",
        "",
        f"{'shape':<20} {'material':<16} {'min °C':>9} {'mean °C':>16} {'max °C':>16} "
        f"{'power W':>10}",
    ]
    for name, s in [*summary["shapes"].items(), *summary["groups"].items()]:
        label = s.get("material") or f"({s['kind']})"
        mean = _fmt(s["mean"]) + _pm(s.get("mean_error"))
        top = _fmt(s["max"]) + _pm(s.get("max_error"))
        lines.append(f"{name:<20} {label:<16} {_fmt(s['min']):>9} {mean:>16} {top:>16} "
                     f"{s['power_w']:>10.4g}")
    if summary["limits"]:
        lines += ["", f"{'limit':<20} {'max °C':>9} {'limit °C':>9} {'margin K':>16}"]
        for name, lim in summary["limits"].items():
            flag = "  EXCEEDED" if lim["exceeded"] else ""
            margin = f"{lim['margin']:.2f}{_pm(lim.get('margin_error'))}"
            lines.append(f"{name:<20} {lim['max']:>9.2f} {lim['limit']:>9.2f} "
                         f"{margin:>16}{flag}")
    lines += ["", f"{'boundary':<20} {'kind':<21} {'heat out W':>20} {'share':>7} "
              f"{'mean °C':>9} {'length ' + unit:>11}"]
    total_out = sum(max(b["heat_out_w"], 0.0) for b in summary["boundaries"].values())
    for name, b in summary["boundaries"].items():
        share = f"{100 * b['heat_out_w'] / total_out:.1f}%" if total_out > 0 else "-"
        heat = f"{b['heat_out_w']:.4g}{_pm(b.get('heat_out_error_w'))}"
        lines.append(f"{name:<20} {b['kind']:<21} {heat:>20} {share:>7} "
                     f"{b['mean_temperature']:>9.2f} {b['length']:>11.4g}")
    lines.append(f"{'(insulated)':<20} {'':<21} {0:>20} {'':>7} {'':>9} "
                 f"{summary['insulated_length']:>11.4g}")
    if summary["interfaces"]:
        lines += ["", f"{'interface':<20} {'heat W':>11} {'mean jump K':>12} {'R″ m²K/W':>10}"]
        for name, itf in summary["interfaces"].items():
            lines.append(f"{name:<20} {itf['heat_w']:>11.4g} {itf['mean_jump']:>12.4g} "
                         f"{itf['resistance']:>10.3g}")
    res = summary.get("thermal_resistance")
    if res and res["sources"]:
        head = "".join(f" {s[:12]:>12}" for s in res["sources"])
        lines += ["", f"{'rise K/W (mean)':<20}{head}   ({res['basis']})"]
        for row, vals in res["mean_rise_k_per_w"].items():
            lines.append(f"{row:<20}" + "".join(f" {_fmt(vals[s], '.4g'):>12}"
                                                 for s in res["sources"]))
    if summary["probes"]:
        lines += ["", f"{'probe':<20} {'°C':>9}"]
        errors = summary.get("probe_errors", {})
        lines += [f"{name:<20} {t:>9.2f}{_pm(errors.get(name))}"
                  for name, t in summary["probes"].items()]
    m, sv = summary["mesh"], summary["solver"]
    lines += [
        "",
        f"Energy balance  power in {eb['power_in_w']:.6g} W, heat out {eb['heat_out_w']:.6g} W, "
        f"relative error {eb['relative_error']:.1e}",
        f"Mesh            {m['nodes']} nodes, {m['triangles']} triangles, smallest angle "
        f"{m['min_angle_deg']:.1f}°",
        f"Solver          {sv['method']}, {sv['iterations']} iteration(s), relative residual "
        f"{sv['relative_residual']:.1e}"
        + (f", {len(sv['history'])} Newton step(s)" if sv["nonlinear"] else ""),
    ]
    if "errors" in summary:
        e = summary["errors"]
        if e["reliable"]:
            how = (f"against a nested refinement ({e['nodes'][0]} nodes, every triangle "
                   "split in four)")
        else:
            how = (f"grid convergence over non-nested meshes of "
                   f"{', '.join(str(n) for n in e['nodes'])} nodes (less reliable)")
        lines.append(f"Error estimate  ± figures {how}; energy-norm indicator "
                     f"{100 * e['energy_norm']['relative']:.2g} %")
    if "adaptive" in summary:
        lines += _adaptive_lines(summary["adaptive"])
    lines += [f"warning: {w}" for w in summary["warnings"]]
    lines += ["", "CAUTION: " + summary["caution"]]
    return "\n".join(lines)


def _adaptive_lines(adaptive: dict) -> list[str]:
    """The adaptive refinement steps: nodes, max temperature and each target's estimate."""
    keys = list(adaptive["targets"])
    names = ["max" if k == "temperature.max" else k.split(".", 1)[1] for k in keys]
    asked = ", ".join(f"{n} ± {adaptive['targets'][k]:.3g} K" for n, k in zip(names, keys,
                                                                            strict=True))
    steps = adaptive["steps"]
    state = ("reached" if adaptive["reached"] else
             f"NOT reached ({adaptive.get('stopped', 'node budget')})")
    widths = [max(12, len(n) + 2) for n in names]
    lines = [f"Adaptive        {asked}: {state} after {len(steps)} mesh(es)",
             f"  {'step':>4} {'nodes':>8} {'max °C':>10}"
             + "".join(f" {'± ' + n:>{w}}" for n, w in zip(names, widths, strict=True))]
    for i, step in enumerate(steps, 1):
        lines.append(f"  {i:>4} {step['nodes']:>8} {step['max_temperature']:>10.3f}"
                     + "".join(f" {step['estimate'][k]:>{w}.2g}"
                               for k, w in zip(keys, widths, strict=True)))
    return lines
