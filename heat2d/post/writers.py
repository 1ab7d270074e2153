"""Stage 7: :class:`~heat2d.post.results.Result` -> files.

Every writer puts one file into a new folder beside the result folder; :func:`write`
swaps it in only when all have succeeded, so the result folder is always absent, the
previous complete result or the new one.
"""

from __future__ import annotations

import errno
import json
import os
import re
import secrets
import shutil
import sys
import time
from collections.abc import Callable, Iterable
from pathlib import Path
from typing import TYPE_CHECKING

import numpy as np

from ..errors import Heat2dError, ModelError
from . import text
from .text import format_summary  # noqa: F401  (re-exported: the table moved to .text)

if TYPE_CHECKING:                 # annotations only: results imports this module
    from .results import Result

VTU_COMPRESS_LIMIT = 20_000
"""VTU files of meshes with more nodes are written uncompressed (speed over size)."""


VTU_CHUNK = 1 << 18
"""Rows of a derived array (points with z, flux with z, offsets) built at a time."""


def write_vtu(result: Result, path: Path, **options) -> None:
    """The mesh with point data ``temperature`` and cell data ``heat_flux``, ``shape_id``,
    ``material_id`` (ids index ``summary["ids"]``)."""
    mesh = result.mesh
    if len(mesh.points) > VTU_COMPRESS_LIMIT:
        # zlib costs seconds on large meshes for a 2-3x smaller file: large meshes go plain,
        # streamed to the file without a copy of any whole field.
        _write_vtu_raw(result, path)
        return
    import meshio

    points = np.column_stack([mesh.points, np.zeros(len(mesh.points))])
    flux = np.column_stack([result.heat_flux, np.zeros(len(result.heat_flux))])
    meshio.Mesh(
        points, [("triangle", mesh.triangles)],
        point_data={"temperature": result.temperature},
        cell_data={"heat_flux": [flux], "shape_id": [mesh.triangle_shape.astype(np.int32)],
                   "material_id": [mesh.triangle_material.astype(np.int32)]},
    ).write(path, file_format="vtu", compression="zlib")


_VTK_TYPES = {np.dtype("<f8"): "Float64", np.dtype("<i8"): "Int64", np.dtype("<i4"): "Int32",
              np.dtype("u1"): "UInt8"}


def _write_vtu_raw(result: Result, path: Path) -> None:
    """VTK XML unstructured grid with raw appended data (UInt64 block headers), each
    array written in chunks of :data:`VTU_CHUNK` rows."""
    mesh = result.mesh
    n, m = len(mesh.points), len(mesh.triangles)
    tri = mesh.triangles
    tri_type = np.dtype("<i8") if tri.dtype.itemsize == 8 else np.dtype("<i4")

    def pad_z(a):
        return lambda lo, hi: np.column_stack([a[lo:hi], np.zeros(hi - lo)])

    # name, section, dtype, components, rows, rows lo..hi as an array of that dtype
    arrays = [
        ("Points", "Points", np.dtype("<f8"), 3, n, pad_z(mesh.points)),
        ("connectivity", "Cells", tri_type, 1, 3 * m, lambda lo, hi: tri.reshape(-1)[lo:hi]),
        ("offsets", "Cells", np.dtype("<i8"), 1, m,
         lambda lo, hi: 3 * np.arange(lo + 1, hi + 1, dtype=np.int64)),
        ("types", "Cells", np.dtype("u1"), 1, m, lambda lo, hi: np.full(hi - lo, 5, np.uint8)),
        ("temperature", "PointData", np.dtype("<f8"), 1, n,
         lambda lo, hi: result.temperature[lo:hi]),
        ("heat_flux", "CellData", np.dtype("<f8"), 3, m, pad_z(result.heat_flux)),
        ("shape_id", "CellData", np.dtype("<i4"), 1, m,
         lambda lo, hi: mesh.triangle_shape[lo:hi]),
        ("material_id", "CellData", np.dtype("<i4"), 1, m,
         lambda lo, hi: mesh.triangle_material[lo:hi]),
    ]
    offset = 0
    tags: dict[str, list[str]] = {"Points": [], "Cells": [], "PointData": [], "CellData": []}
    for name, section, dtype, comps, rows, _ in arrays:
        components = f' NumberOfComponents="{comps}"' if comps > 1 else ""
        tags[section].append(f'<DataArray type="{_VTK_TYPES[dtype]}" Name="{name}"'
                             f'{components} format="appended" offset="{offset}"/>')
        offset += 8 + rows * comps * dtype.itemsize
    head = ['<?xml version="1.0"?>',
            '<VTKFile type="UnstructuredGrid" version="1.0" byte_order="LittleEndian" '
            'header_type="UInt64">', "<UnstructuredGrid>",
            f'<Piece NumberOfPoints="{n}" NumberOfCells="{m}">']
    for section, lines in tags.items():
        head += [f"<{section}>", *lines, f"</{section}>"]
    head += ["</Piece>", "</UnstructuredGrid>", '<AppendedData encoding="raw">', "_"]
    with open(path, "wb") as f:
        f.write("\n".join(head).encode("ascii"))
        for _, _, dtype, comps, rows, part in arrays:
            f.write(np.uint64(rows * comps * dtype.itemsize).astype("<u8").tobytes())
            for lo in range(0, rows, VTU_CHUNK):
                f.write(np.ascontiguousarray(part(lo, min(lo + VTU_CHUNK, rows)),
                                             dtype=dtype).tobytes())
        f.write(b"\n</AppendedData>\n</VTKFile>\n")


def write_json(result: Result, path: Path, **options) -> None:
    """The summary as JSON (see docs/model-format.md for the keys)."""
    path.write_text(json.dumps(result.summary, indent=2, allow_nan=False) + "\n",
                    encoding="utf-8")


def write_text(result: Result, path: Path, **options) -> None:
    """The summary as a readable table, with the caution."""
    path.write_text(text.format_summary(result.summary) + "\n", encoding="utf-8")


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
    """Write the outputs of a run into ``out_dir``, all or nothing.

    At every moment ``out_dir`` is absent, the previous complete result or the new
    complete result, even when the process is interrupted or killed: the files are
    written into a new sibling folder ``.NAME.new-PID-RANDOM`` (same file system) that
    replaces ``out_dir`` only when every file is there (see :func:`write_folder`).

    Files in an existing ``out_dir`` that heat2d did not write (any name other than the
    :data:`WRITERS` patterns, e.g. ``notes.txt`` or a subfolder) are never deleted: the
    write is refused with :class:`OutputFolderError` naming the folder, before any file is
    written. Earlier outputs (``summary.json``, ``summary.txt``, ``*.vtu``, ``*.png``),
    including those of another model's stem, are replaced together as the previous result.

    Parameters
    ----------
    result
        From :func:`heat2d.run`.
    out_dir
        Destination folder (its parents are created if needed).
    formats
        Names from :data:`WRITERS`; all by default.
    stem
        File stem for the VTU and PNG; the model file's stem by default.
    **options
        Passed to every writer (``show_mesh=True`` draws the triangles on the PNG).

    Returns
    -------
    list of Path
        The files written (under ``out_dir`` as given).
    """
    names = chosen_formats(formats, WRITERS)
    stem = stem or result.model.stem

    def fill(folder: Path) -> list[str]:
        timings = result.summary.setdefault("timings_s", {})
        files = []
        for name in names:
            pattern, func = WRITERS[name]
            start = time.perf_counter()
            func(result, folder / pattern.format(stem=stem), **options)
            timings[f"write_{name}"] = time.perf_counter() - start
            files.append(pattern.format(stem=stem))
        if "json" in names:         # again, now with every writer's time (a few kB)
            pattern, func = WRITERS["json"]
            func(result, folder / pattern.format(stem=stem), **options)
        return files

    return write_folder(out_dir, fill)


def chosen_formats(formats: Iterable[str] | None, known) -> list[str]:
    """The output formats asked for (all of ``known`` when None), each checked."""
    names = list(known) if formats is None else list(formats)
    unknown = sorted(set(names) - set(known))
    if unknown:
        raise Heat2dError(f"unknown output format {unknown[0]!r} (choose from: "
                          f"{', '.join(sorted(known))})")
    return names


class OutputFolderError(ModelError):
    """The output folder cannot take the results (it holds the user's own files, is a
    file, or is the working folder): bad input, nothing written."""


_SIBLING = re.compile(r"\.(?P<name>.+)\.(?P<kind>new|old|del)-(?P<pid>\d+)-[0-9a-f]+\Z",
                      re.DOTALL)
"""Scratch siblings of a result folder: ``new`` (being written, or after the exchange the
replaced result), ``old`` (the previous complete result, set aside during a two-rename
swap) and ``del`` (being removed, possibly incomplete: never restored)."""
_LEGACY_SCRATCH = ".heat2d-partial-"
"""Scratch folders that earlier releases left inside the result folder."""


_REPORT_FILES = re.compile(r"report\.html|\.report\.html\.new-\d+-[0-9a-f]+")
"""``report.html``, which ``heat2d run --report`` adds to a result folder, and the scratch
name it is written under before its rename."""


_TRANSIENT_FILES = re.compile(r"transient\.csv|rc_networks\.(csv|json)|.+\.pvd", re.DOTALL)
"""What a transient run writes beside these (``heat2d.transient.files``): the time series,
the RC networks and the VTU collection; its VTU series and plots match the patterns of
:data:`WRITERS`."""


def is_output_name(name: str) -> bool:
    """Whether a file name is one :func:`write` or a transient run produces (for some
    stem), or the report ``heat2d run --report`` adds."""
    if _REPORT_FILES.fullmatch(name) or _TRANSIENT_FILES.fullmatch(name):
        return True
    return any(re.fullmatch(".+".join(re.escape(part) for part in pattern.split("{stem}")),
                            name, re.DOTALL) for pattern, _ in WRITERS.values())


def write_folder(out_dir: str | Path, fill: Callable[[Path], Iterable[str]], *,
                 is_output: Callable[[str], bool] = is_output_name) -> list[Path]:
    """Replace the folder ``out_dir`` by the files ``fill(folder)`` writes, all or nothing.

    1. Leftovers of dead processes beside ``out_dir`` are cleared first: if ``out_dir``
       is missing but a ``.NAME.old-*`` complete result is there, it is restored; other
       ``.NAME.new-*``, ``.old-*``, ``.del-*`` siblings whose process id is not alive are
       removed.
    2. ``fill`` writes into a new sibling ``.NAME.new-PID-RANDOM``.
    3. The new folder is swapped in. On Linux ``renameat2(RENAME_EXCHANGE)`` exchanges
       the two folders in one atomic step, so ``out_dir`` always exists. Elsewhere (or on
       a file system without it) the old folder is renamed to ``.NAME.old-...`` and the
       new one into place: between these two renames ``out_dir`` is briefly absent, and a
       process killed there leaves the complete ``.old-`` folder, which the next write
       restores. With no previous folder the new one is renamed into place (atomic).
    4. The replaced folder is renamed to ``.NAME.del-...`` and removed.

    Any exception or interrupt before step 3 removes the new folder and leaves
    ``out_dir`` as it was. :class:`OutputFolderError` if ``out_dir`` holds entries for
    which ``is_output`` is false (checked before ``fill`` runs and again before the swap),
    is a file, or contains the working folder; :class:`~heat2d.errors.Heat2dError` on
    other file-system failures.

    Returns
    -------
    list of Path
        ``out_dir / name`` for every name ``fill`` returned.
    """
    given = Path(out_dir)
    target = check_output_folder(given, is_output=is_output)
    try:
        target.parent.mkdir(parents=True, exist_ok=True)
        recover(target)
        _refuse_foreign(target, given, is_output)
        scratch = _sibling(target, "new")
        scratch.mkdir()
    except OSError as exc:
        raise Heat2dError(f"cannot create output folder: {exc}", file=str(given)) from None
    try:
        names = list(fill(scratch))
        _refuse_foreign(target, given, is_output)
        _swap_in(scratch, target)
    except OSError as exc:
        shutil.rmtree(scratch, ignore_errors=True)
        raise Heat2dError(f"cannot write outputs: {exc}", file=str(given)) from None
    except BaseException:           # a failed writer, Ctrl-C, SIGTERM: out_dir untouched
        shutil.rmtree(scratch, ignore_errors=True)
        raise
    return [given / name for name in names]


def check_output_folder(out_dir: str | Path, *,
                        is_output: Callable[[str], bool] = is_output_name) -> Path:
    """Refuse an output folder :func:`write_folder` could not replace without losing
    the user's files (:class:`OutputFolderError`); returns the folder that will be
    replaced (absolute, a symbolic link followed). Cheap: callers check before solving."""
    given = Path(out_dir)
    target = Path(os.path.abspath(given))
    if target.is_symlink():         # replace the linked folder, keep the user's link
        target = Path(os.path.realpath(target))
    if target.exists() and not target.is_dir():
        raise OutputFolderError("the output folder is a file", file=str(given))
    cwd = Path.cwd()
    if cwd == target or target in cwd.parents:
        raise OutputFolderError("the output folder contains the working folder; choose "
                                "another folder", file=str(given))
    _refuse_foreign(target, given, is_output)
    return target


def recover(target: Path) -> None:
    """Restore or remove the scratch siblings of ``target`` left by dead processes."""
    dead = []
    with os.scandir(target.parent) as entries:
        for entry in entries:
            m = _SIBLING.match(entry.name)
            if m and m["name"] == target.name and not _alive(int(m["pid"])):
                dead.append((m["kind"], Path(entry.path)))
    if not os.path.lexists(target):
        old = sorted((p for kind, p in dead if kind == "old"),
                     key=lambda p: p.stat().st_mtime)
        if old:                     # killed between the two renames of a swap
            os.rename(old[-1], target)
            dead.remove(("old", old[-1]))
    for _, path in dead:
        shutil.rmtree(path, ignore_errors=True)


def _alive(pid: int) -> bool:
    """Whether process ``pid`` runs (a zombie counts as dead; a process of another user
    as alive). A reused pid only delays the clean-up of a leftover."""
    if pid == os.getpid():
        return True
    try:
        os.kill(pid, 0)             # signal 0: existence check, nothing is sent
    except ProcessLookupError:
        return False
    except OSError:
        return True
    try:
        stat = Path(f"/proc/{pid}/stat").read_text()
    except OSError:
        return True
    return stat.rpartition(")")[2].split()[:1] != ["Z"]


def _sibling(target: Path, kind: str) -> Path:
    return target.with_name(f".{target.name}.{kind}-{os.getpid()}-{secrets.token_hex(4)}")


def _refuse_foreign(target: Path, given: Path, is_output: Callable[[str], bool]) -> None:
    try:
        with os.scandir(target) as entries:
            foreign = sorted(e.name for e in entries
                             if not ((e.name.startswith(_LEGACY_SCRATCH) and e.is_dir())
                                     or (e.is_file(follow_symlinks=False)
                                         and is_output(e.name))))
    except FileNotFoundError:
        return
    if foreign:
        shown = ", ".join(foreign[:3]) + (f" and {len(foreign) - 3} more"
                                          if len(foreign) > 3 else "")
        raise OutputFolderError(f"the output folder holds files heat2d did not write "
                                f"({shown}); move them or choose another folder (nothing "
                                "was written)", file=str(given))


def _swap_in(new: Path, target: Path) -> None:
    """Put the complete folder ``new`` in place of ``target`` (steps 3 and 4 above)."""
    if not os.path.lexists(target):
        os.rename(new, target)      # atomic; fails if target appeared meanwhile
        return
    if _exchange(new, target):
        replaced = new              # now holds the previous result
    else:
        replaced = _sibling(target, "old")
        try:
            os.rename(target, replaced)
            os.rename(new, target)
        except BaseException:       # put the previous result back before going on
            if not os.path.lexists(target) and os.path.lexists(replaced):
                os.rename(replaced, target)
            raise
    trash = _sibling(target, "del")
    os.rename(replaced, trash)
    shutil.rmtree(trash, ignore_errors=True)


_RENAME_EXCHANGE = 2
_AT_FDCWD = -100


def _exchange(a: Path, b: Path) -> bool:
    """Exchange two paths atomically with Linux ``renameat2``; False where unsupported."""
    if not sys.platform.startswith("linux"):
        return False
    import ctypes

    try:
        func = ctypes.CDLL(None, use_errno=True).renameat2
    except (OSError, AttributeError):
        return False
    func.argtypes = [ctypes.c_int, ctypes.c_char_p, ctypes.c_int, ctypes.c_char_p,
                     ctypes.c_uint]
    if func(_AT_FDCWD, os.fsencode(a), _AT_FDCWD, os.fsencode(b), _RENAME_EXCHANGE) == 0:
        return True
    err = ctypes.get_errno()
    if err in (errno.EINVAL, errno.ENOSYS, errno.ENOTSUP, errno.EPERM):
        return False
    raise OSError(err, os.strerror(err), str(b))
