"""Files of a transient run: the history table, the RC networks, the VTU series and plots.

Every writer puts its files into the folder it is given; :func:`write_transient` hands
them all to :func:`heat2d.post.writers.write_folder`, which swaps the folder in whole, so
the result folder is always absent, the previous complete result or the new one.

The result written from (a ``TransientResult``) provides ``model``, ``mesh``, ``history``
(:class:`~heat2d.transient.history.History`), ``zth`` ({shape: (t s, z K/W)}),
``networks`` ({shape: {"foster", "cauer", "modal"}}), ``duty`` ({shape: {"widths",
"duties", "peaks"}}), ``summary`` (the ``summary.json`` content) and ``log_time``.
"""

from __future__ import annotations

import csv
import json
import math
from collections.abc import Callable, Iterable
from pathlib import Path
from xml.sax.saxutils import quoteattr

import numpy as np

from ..post.writers import VTU_COMPRESS_LIMIT, chosen_formats, is_output_name, write_folder
from .plots import plot_duty, plot_history, plot_zth, powered_names, shape_columns

__all__ = ["TRANSIENT_WRITERS", "is_transient_output", "powered_names",
           "shape_columns", "write_csv", "write_networks", "write_series", "write_summary",
           "write_transient"]

def is_transient_output(name: str) -> bool:
    """Whether a file name is one a transient or steady run writes (for some stem): the
    names :func:`heat2d.post.writers.is_output_name` knows, which include the time series,
    the RC networks, the VTU series and its ``.pvd``."""
    return is_output_name(name)


def _number(x) -> str:
    """A float written so that it reads back exactly (``repr``: shortest round trip)."""
    return repr(float(x))


def write_csv(result, path: str | Path) -> None:
    """``transient.csv``: a header row, then one row per report time.

    Columns: ``time_s``; for each powered shape ``SHAPE max_c`` and ``SHAPE mean_c``; each
    probe ``PROBE_c``; each boundary ``BOUNDARY heat_out_w`` (positive leaving);
    ``stored_j`` (relative to the initial state) and ``power_in_w``. Numbers read back
    exactly as floats; names with commas or quotes are quoted as RFC 4180 says.
    """
    h, model = result.history, result.model
    header = ["time_s"]
    columns = [np.asarray(h.times, dtype=float)]
    for name, (top, mean) in shape_columns(result).items():
        header += [f"{name} max_c", f"{name} mean_c"]
        columns += [top, mean]
    for j, probe in enumerate(model.probes):
        header.append(f"{probe.name}_c")
        columns.append(h.probes[:, j])
    for j, b in enumerate(model.boundaries):
        header.append(f"{b.name} heat_out_w")
        columns.append(h.heat_out[:, j])
    header += ["stored_j", "power_in_w"]
    columns += [h.stored, h.power_in]
    table = np.column_stack([np.asarray(c, dtype=float) for c in columns])
    with open(path, "w", newline="", encoding="utf-8") as f:
        w = csv.writer(f, lineterminator="\n")
        w.writerow(header)
        w.writerows([_number(x) for x in row] for row in table.tolist())


def _floats(a) -> list[float | None]:
    return [_finite(x) for x in np.asarray(a, dtype=float).ravel().tolist()]


def _finite(x) -> float | None:
    x = float(x)
    return x if math.isfinite(x) else None


def _r_total(result, name: str, foster) -> float:
    """The steady self-resistance of a shape (K/W): the summary's figure, else ΣR."""
    zth = (result.summary.get("transient") or {}).get("zth") or {}
    r = (zth.get(name) or {}).get("r_k_per_w")
    if r is None:
        r = (((result.summary.get("thermal_resistance") or {})
              .get("max_rise_k_per_w") or {}).get(name) or {}).get(name)
    return float(r) if r is not None else float(np.sum(foster.r))


def networks_data(result) -> dict:
    """The content of ``rc_networks.json`` (see :func:`write_networks`)."""
    data = {}
    for name, nets in result.networks.items():
        foster, cauer, modal = nets["foster"], nets.get("cauer"), nets.get("modal")
        entry = {
            "foster": {"r_k_per_w": _floats(foster.r), "tau_s": _floats(foster.tau),
                       "fit_error": _finite(foster.error),
                       "fit_rms": _finite(getattr(foster, "rms", float("nan")))},
            "cauer": None if cauer is None else {"r_k_per_w": _floats(cauer.r),
                                                 "c_j_per_k": _floats(cauer.c)},
            "modal": None if modal is None else {
                "r_k_per_w": _floats(modal.r), "tau_s": _floats(modal.tau),
                "r_sum_k_per_w": _finite(np.sum(modal.r))},
            "r_total_k_per_w": _finite(_r_total(result, name, foster)),
        }
        data[name] = entry
    return data


def write_networks(result, csv_path: str | Path, json_path: str | Path) -> None:
    """``rc_networks.csv`` and ``rc_networks.json``: each powered shape's Foster and Cauer
    networks, its fit error, and the modal network of the model (when computed).

    CSV rows: ``shape, network (foster|cauer|modal), index (1 = nearest the source),
    r_k_per_w, tau_s`` (Foster and modal; empty for Cauer) ``, c_j_per_k`` (Cauer; empty
    otherwise). JSON: ``{shape: {"foster": {"r_k_per_w", "tau_s", "fit_error",
    "fit_rms"}, "cauer": {"r_k_per_w", "c_j_per_k"}, "modal": {"r_k_per_w", "tau_s",
    "r_sum_k_per_w"} or null, "r_total_k_per_w"}}``; a number that is not finite is null.
    """
    rows = [["shape", "network", "index", "r_k_per_w", "tau_s", "c_j_per_k"]]
    for name, nets in result.networks.items():
        for kind in ("foster", "cauer", "modal"):
            net = nets.get(kind)
            if net is None:
                continue
            second = net.c if kind == "cauer" else net.tau
            for i, (r, x) in enumerate(zip(np.ravel(net.r), np.ravel(second), strict=True),
                                       start=1):
                cells = [_number(x), ""] if kind != "cauer" else ["", _number(x)]
                rows.append([name, kind, str(i), _number(r), *cells])
    with open(csv_path, "w", newline="", encoding="utf-8") as f:
        csv.writer(f, lineterminator="\n").writerows(rows)
    Path(json_path).write_text(json.dumps(networks_data(result), indent=2, allow_nan=False)
                               + "\n", encoding="utf-8")


def write_series(result, folder: str | Path, stem: str) -> list[str]:
    """One VTU per snapshot (``STEM_0000.vtu``, ...) with point data ``temperature`` (°C)
    and cell data ``shape_id``, ``material_id``, and the collection ``STEM.pvd`` listing
    each with its time (s). Returns the file names (VTUs first, the PVD last)."""
    import meshio

    folder = Path(folder)
    h, mesh = result.history, result.mesh
    points = np.column_stack([mesh.points, np.zeros(len(mesh.points))])
    compression = "zlib" if len(points) <= VTU_COMPRESS_LIMIT else None
    cells = [("triangle", mesh.triangles)]
    cell_data = {"shape_id": [mesh.triangle_shape.astype(np.int32)],
                 "material_id": [mesh.triangle_material.astype(np.int32)]}
    times = np.asarray(h.snapshot_times, dtype=float)
    width = max(4, len(str(max(len(times) - 1, 0))))
    names, lines = [], []
    for i, t in enumerate(times.tolist()):
        name = f"{stem}_{i:0{width}d}.vtu"
        meshio.Mesh(points, cells,
                    point_data={"temperature": np.asarray(h.snapshots[i], dtype=float)},
                    cell_data=cell_data).write(folder / name, file_format="vtu",
                                               compression=compression)
        names.append(name)
        lines.append(f'    <DataSet timestep={quoteattr(_number(t))} group="" part="0" '
                     f"file={quoteattr(name)}/>")
    pvd = f"{stem}.pvd"
    (folder / pvd).write_text(
        '<?xml version="1.0"?>\n<VTKFile type="Collection" version="0.1" '
        'byte_order="LittleEndian">\n  <Collection>\n' + "".join(x + "\n" for x in lines)
        + "  </Collection>\n</VTKFile>\n", encoding="utf-8")
    return [*names, pvd]


def write_summary(result, path: str | Path) -> None:
    """``summary.json``: the run's summary (see docs/model-format.md for the keys)."""
    Path(path).write_text(json.dumps(result.summary, indent=2, allow_nan=False) + "\n",
                          encoding="utf-8")


def _fill_json(result, folder: Path, stem: str) -> list[str]:
    write_summary(result, folder / "summary.json")
    return ["summary.json"]


def _fill_csv(result, folder: Path, stem: str) -> list[str]:
    write_csv(result, folder / "transient.csv")
    return ["transient.csv"]


def _fill_networks(result, folder: Path, stem: str) -> list[str]:
    if not result.networks:
        return []
    write_networks(result, folder / "rc_networks.csv", folder / "rc_networks.json")
    return ["rc_networks.csv", "rc_networks.json"]


def _fill_series(result, folder: Path, stem: str) -> list[str]:
    if len(result.history.snapshot_times) == 0:
        return []
    return write_series(result, folder, stem)


def _fill_png(result, folder: Path, stem: str) -> list[str]:
    names = [f"{stem}_history.png"]
    plot_history(result, folder / names[0])
    if result.zth:
        names.append(f"{stem}_zth.png")
        plot_zth(result, folder / names[-1])
    if result.duty:
        names.append(f"{stem}_duty.png")
        plot_duty(result, folder / names[-1])
    return names


TRANSIENT_WRITERS: dict[str, Callable[..., list[str]]] = {
    "json": _fill_json,
    "csv": _fill_csv,
    "networks": _fill_networks,
    "vtu": _fill_series,
    "png": _fill_png,
}
"""Transient outputs by format name: ``fill(result, folder, stem) -> file names``; a
format with nothing to show (no snapshots, no impedance curves) writes no file."""


def write_transient(result, out_dir: str | Path, *, formats: Iterable[str] | None = None,
                    stem: str | None = None,
                    extra: Callable[[Path], Iterable[str]] | None = None) -> list[Path]:
    """Write the outputs of a transient run into ``out_dir``, all or nothing.

    Parameters
    ----------
    result
        A ``TransientResult``.
    out_dir
        Destination folder, replaced whole by :func:`heat2d.post.writers.write_folder`
        (files other than heat2d outputs in it refuse the write before anything runs).
    formats
        Names from :data:`TRANSIENT_WRITERS`; all by default.
    stem
        File stem of the VTU series and the PNGs; the model file's stem by default.
    extra
        ``fill(folder) -> file names``: more files written into the same new folder (a
        failure there leaves ``out_dir`` as it was).

    Returns
    -------
    list of Path
        The files written (under ``out_dir`` as given).
    """
    names = chosen_formats(formats, TRANSIENT_WRITERS)
    stem = stem or result.model.stem

    def fill(folder: Path) -> list[str]:
        files: list[str] = []
        for name in names:
            files += TRANSIENT_WRITERS[name](result, folder, stem)
        if extra is not None:
            files += [f for f in extra(folder) if f not in files]
        return files

    return write_folder(out_dir, fill, is_output=is_transient_output)
