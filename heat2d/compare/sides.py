"""One side of a comparison: a result folder read back from its files, or a model solved
here, reduced to what :mod:`heat2d.compare.core` compares and :mod:`.plot` draws."""

from __future__ import annotations

import json
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import numpy as np

from ..errors import Heat2dError, ModelError
from ..model import Model, load


@dataclass(frozen=True)
class Side:
    """One run of a comparison.

    Attributes
    ----------
    label
        ``"A"`` or ``"B"``.
    folder
        The result folder read, or None for a model solved here.
    model
        The model file the run was made from, as its summary records it (or the
        ``Model``'s source).
    title
        The model's title ("" when it has none).
    summary
        The run's summary (the ``summary.json`` content).
    points, triangles
        The mesh: node coordinates (n, 2) in the model's length unit and the node
        indices of each triangle (m, 3); None when the folder holds no VTU.
    temperature
        Nodal temperature, °C (n,); None without a mesh.
    shape_id
        Index into ``summary["ids"]["shape"]`` of each triangle (m,); None without a mesh.
    """

    label: str
    folder: str | None
    model: str
    title: str
    summary: dict[str, Any]
    points: np.ndarray | None = None
    triangles: np.ndarray | None = None
    temperature: np.ndarray | None = None
    shape_id: np.ndarray | None = None

    @property
    def has_mesh(self) -> bool:
        """Whether the nodal field is known (a map can be drawn)."""
        return self.points is not None

    @property
    def estimated(self) -> bool:
        """Whether the run carries error estimates (it was not made with --no-estimate)."""
        return "errors" in self.summary

    @property
    def where(self) -> str:
        """The path to name in messages: the folder, else the model file."""
        return self.folder or self.model


def load_side(item: str | Path | Model, *, label: str, method: str = "auto",
              transient=None) -> Side:
    """Read a result folder, or solve a model, as one side of a comparison.

    Parameters
    ----------
    item
        A result folder (``summary.json`` and ``MODELSTEM.vtu`` as ``heat2d run``
        writes them), a ``summary.json`` file, a model file (``.toml``) or a
        :class:`~heat2d.Model`. Models are solved by :func:`heat2d.pipeline.run` with its
        default error estimate.
    label
        ``"A"`` or ``"B"``: the name of this side in the comparison.
    method
        Linear solver for models (``auto``, ``direct`` or ``multigrid``).
    transient
        For a model with a ``[transient]`` section: the function that marches it,
        ``transient(model, method=...)`` returning a result with ``summary``, ``mesh`` and
        ``history`` (``heat2d.transient.run.run_transient``; this room does not import the
        transient room). The side's field is that of the run's hottest moment, as the
        result folder's ``MODELSTEM.vtu`` holds it.

    Returns
    -------
    Side

    Raises
    ------
    ModelError
        The path does not exist, a folder holds no ``summary.json``, a file in it cannot
        be read, or the model is invalid, or it is transient and no ``transient``
        function was given; the message names the path.
    """
    if isinstance(item, Model):
        return _solved(item, label=label, method=method, transient=transient)
    path = Path(item)
    if not path.exists():
        raise ModelError("no such file or folder", file=str(path))
    if path.is_dir():
        return _folder(path, label=label)
    if path.name == "summary.json":
        return _folder(path.parent, label=label)
    return _solved(load(path), label=label, method=method, transient=transient)


def _solved(model: Model, *, label: str, method: str, transient=None) -> Side:
    from ..pipeline import run

    if model.is_transient:
        if transient is None:
            raise ModelError(f"{label} is a transient model ([transient]) and no transient "
                             "solver was given: compare the result folders of 'heat2d run'",
                             file=model.source)
        result = transient(model, method=method)
        history = result.history
        field = getattr(history, "hottest", None)
        temperature = history.final if field is None else field
    else:
        result = run(model, method=method)
        temperature = result.temperature
    mesh = result.mesh
    return Side(label=label, folder=None, model=model.source, title=model.title,
                summary=result.summary, points=np.asarray(mesh.points, dtype=float),
                triangles=np.asarray(mesh.triangles), temperature=np.asarray(
                    temperature, dtype=float),
                shape_id=np.asarray(mesh.triangle_shape))


def _folder(folder: Path, *, label: str) -> Side:
    file = folder / "summary.json"
    if not file.is_file():
        raise ModelError("not a result folder: it holds no summary.json", file=str(folder))
    try:
        summary = json.loads(file.read_text(encoding="utf-8"))
    except (OSError, UnicodeDecodeError, json.JSONDecodeError) as exc:
        raise ModelError(f"cannot read summary.json: {exc}", file=str(folder)) from None
    if not isinstance(summary, dict) or not {"model", "units", "shapes"} <= set(summary):
        raise ModelError("summary.json is not a heat2d run summary (no model, units or "
                         "shapes)", file=str(folder))
    model = summary["model"]
    points = triangles = temperature = shape_id = None
    vtu = _vtu_file(folder, Path(str(model.get("file") or "model")).stem)
    if vtu is not None:
        points, triangles, temperature, shape_id = _read_vtu(vtu, folder)
    return Side(label=label, folder=str(folder), model=str(model.get("file") or ""),
                title=str(model.get("title") or ""), summary=summary, points=points,
                triangles=triangles, temperature=temperature, shape_id=shape_id)


def _vtu_file(folder: Path, stem: str) -> Path | None:
    """``STEM.vtu``, else the folder's only VTU file, else None."""
    named = folder / f"{stem}.vtu"
    if named.is_file():
        return named
    found = sorted(folder.glob("*.vtu"))
    return found[0] if len(found) == 1 else None


def _read_vtu(path: Path, folder: Path) -> tuple[np.ndarray, ...]:
    import meshio

    try:
        mesh = meshio.read(path)
        triangles = mesh.cells_dict["triangle"]
        temperature = np.asarray(mesh.point_data["temperature"], dtype=float)
        shape_id = np.asarray(mesh.cell_data_dict["shape_id"]["triangle"])
    except (OSError, KeyError, ValueError, Heat2dError) as exc:
        raise ModelError(f"cannot read {path.name}: {exc}", file=str(folder)) from None
    except Exception as exc:      # meshio raises its own ReadError for damaged files
        raise ModelError(f"cannot read {path.name}: {type(exc).__name__}: {exc}",
                         file=str(folder)) from None
    return (np.asarray(mesh.points, dtype=float)[:, :2], np.asarray(triangles), temperature,
            shape_id)
