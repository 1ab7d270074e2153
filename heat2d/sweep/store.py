"""Stored results: the input digest of a variant, the ``inputs.json`` written beside its
outputs, reading a still-valid row back, clearing stale files before a re-run and placing
files atomically."""

from __future__ import annotations

import dataclasses
import hashlib
import json
import os
from collections.abc import Sequence
from pathlib import Path
from typing import Any

from ..errors import Heat2dError
from ..model import Model
from ..version import __version__
from .grid import _Variant, legacy_folder_name
from .table import _row

INPUTS_NAME = "inputs.json"
"""Written beside each variant's outputs: the input hash, the values and the table row."""
VARIANT_FORMATS = ("vtu", "json", "txt")
"""Outputs written for each variant (``png`` is added on request: it takes seconds)."""


def _canonical(value: Any) -> Any:
    """The model's content as nested tuples, floats exact; no file name or line numbers."""
    if dataclasses.is_dataclass(value) and not isinstance(value, type):
        return (type(value).__name__,) + tuple(
            (f.name, _canonical(getattr(value, f.name))) for f in dataclasses.fields(value)
            if f.compare and f.name not in ("source", "line"))
    if isinstance(value, tuple | list):
        return tuple(_canonical(v) for v in value)
    if isinstance(value, float):
        return value.hex()
    return value


def input_digest(model: Model, *, refine: float = 1.0, method: str = "auto",
                 formats: Sequence[str] = VARIANT_FORMATS, estimate: bool = False) -> str:
    """A hash of everything a variant's outputs depend on: the resolved model content,
    the run options and the heat2d version. Comments, layout and the file's path do not
    count; any value, name or order that reaches the model does."""
    content = repr((_canonical(model), float(refine).hex(), method, tuple(formats),
                    bool(estimate), __version__))
    return hashlib.sha256(content.encode("utf-8")).hexdigest()


def _stored_row(folder: Path, digest: str) -> dict[str, Any] | None:
    """The stored row if the folder holds complete results for these inputs."""
    try:
        stored = json.loads((folder / INPUTS_NAME).read_text(encoding="utf-8"))
    except (OSError, ValueError):
        return None
    if not isinstance(stored, dict) or stored.get("input_hash") != digest:
        return None
    files = stored.get("files", [])
    if not isinstance(stored.get("row"), dict) or not all((folder / f).is_file()
                                                          for f in files):
        return None
    return stored["row"]


def adopt_legacy(out: Path, v: _Variant) -> bool:
    """Rename the variant's folder from an earlier heat2d's ``NAME=VALUE,...`` name to its
    name now, when the new name is free and the old folder's inputs.json holds exactly
    these values. The folder is then treated as any stored variant (skipped when its
    digest still matches, cleared and solved again otherwise), so an old sweep folder is
    carried on, not left beside a new copy. True when a folder was renamed."""
    old = out / legacy_folder_name(v.values, v.index)
    new = out / v.name
    if old == new or new.exists() or not old.is_dir():
        return False
    try:
        stored = json.loads((old / INPUTS_NAME).read_text(encoding="utf-8"))
    except (OSError, ValueError):
        return False
    if not isinstance(stored, dict) or stored.get("values") != v.values:
        return False
    try:
        old.rename(new)
    except OSError:          # left as it is; the variant is solved into its new folder
        return False
    return True


def _clear_stale(folder: Path) -> None:
    """Before a variant runs again: remove its old inputs.json and the files it listed."""
    path = folder / INPUTS_NAME
    # A half-written temporary of an interrupted run goes too (a file heat2d wrote).
    path.with_name(f".{INPUTS_NAME}.partial").unlink(missing_ok=True)
    try:
        stored = json.loads(path.read_text(encoding="utf-8"))
    except (OSError, ValueError):
        stored = None
    path.unlink(missing_ok=True)
    for name in stored.get("files", []) if isinstance(stored, dict) else []:
        if isinstance(name, str) and "/" not in name and "\\" not in name:
            (folder / name).unlink(missing_ok=True)


def _store(folder: Path, v: _Variant, outcome: dict[str, Any]) -> dict[str, Any]:
    """Put shipped files in place and write inputs.json; a failure fails the variant."""
    files = outcome.get("files", [])
    try:
        if isinstance(files, dict):
            _place(folder, files)
            files = list(files)
        row = _row(v, outcome)
        _replace_text(folder / INPUTS_NAME, json.dumps(
            {"heat2d_version": __version__, "input_hash": v.digest, "values": v.values,
             "files": files, "row": row}, indent=2, allow_nan=False) + "\n")
    except Heat2dError as exc:
        return {"index": v.index, "status": "failed", "error": exc.message()}
    except (OSError, ValueError) as exc:
        return {"index": v.index, "status": "failed", "error": f"cannot write outputs: {exc}"}
    return outcome


def _place(folder: Path, files: dict[str, bytes]) -> None:
    """Write files received from a worker, all or nothing (as :func:`writers.write`:
    the folder is swapped in whole)."""
    from ..post.writers import write_folder

    def fill(scratch: Path) -> list[str]:
        for name, data in files.items():
            (scratch / name).write_bytes(data)
        return list(files)

    write_folder(folder, fill)


def _replace_text(path: Path, text: str) -> None:
    """Write ``text`` to ``path`` through a temporary file beside it, so that a reader
    never sees half a file."""
    tmp = path.with_name(f".{path.name}.partial")
    tmp.write_text(text, encoding="utf-8", newline="")
    os.replace(tmp, path)
