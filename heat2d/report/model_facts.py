"""What the report says about the model file itself: its digest, its description and
each material's values with their source, re-read from the file with the run's params."""

from __future__ import annotations

import hashlib
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from ..errors import ModelError
from ..model import load


@dataclass(frozen=True)
class Material:
    """One material as the report lists it: k along x and y at 25 °C, the k(T) table
    points of an axis whose k varies, the note (its source), the shapes made of it, and
    its density and specific heat (None when not given; ``..._varies`` for a table)."""

    name: str
    kx: float
    ky: float
    note: str
    tables: dict[str, tuple[tuple[float, float], ...]]
    shapes: tuple[str, ...]
    density: float | None = None
    specific_heat: float | None = None
    density_varies: bool = False
    specific_heat_varies: bool = False


@dataclass(frozen=True)
class ModelFacts:
    """The model file's path, digest and description, and its materials; ``problem``
    says why any of them is missing (the file moved, or no longer reads)."""

    path: str
    digest: str | None = None
    size: int | None = None
    description: str = ""
    materials: tuple[Material, ...] = ()
    problem: str = ""
    params: dict[str, Any] = field(default_factory=dict)


def sha256_of(path: str | Path) -> str:
    """Hex SHA-256 of a file's bytes."""
    return hashlib.sha256(Path(path).read_bytes()).hexdigest()


def leading_comment(text: str) -> str:
    """The comment block that opens a model file (its author's description)."""
    lines = []
    for line in text.splitlines():
        stripped = line.strip()
        if stripped.startswith("#"):
            lines.append(stripped[1:].removeprefix(" "))
        elif stripped:
            break
        elif lines:
            lines.append("")
    return "\n".join(lines).strip()


def find_model_file(summary: dict[str, Any], *, folder: Path | None = None,
                    model_file: str | Path | None = None) -> Path | None:
    """The model file of a summary: ``model_file`` if given, else the recorded path as
    it stands, then taken from the result folder's parent (where a run is usually
    started); None when none of them exists."""
    if model_file is not None:
        return Path(model_file)
    recorded = Path(summary["model"]["file"])
    candidates = [recorded]
    if folder is not None and not recorded.is_absolute():
        candidates += [folder.parent / recorded, folder.parent / recorded.name]
    return next((c for c in candidates if c.is_file()), None)


def model_facts(summary: dict[str, Any], path: Path | None) -> ModelFacts:
    """Digest, description and materials of the model file at ``path`` (``None``: not
    found). The model is read with the summary's param values where they differ from the
    file's, so mixed materials (coverage, vias) match the run."""
    recorded = summary["model"]["file"]
    if path is None:
        return ModelFacts(recorded, problem=f"model file {recorded} not found; its digest "
                                            "and materials are not shown")
    try:
        data = path.read_bytes()
    except OSError as exc:
        return ModelFacts(recorded, problem=f"cannot read model file {path}: {exc}")
    digest = hashlib.sha256(data).hexdigest()
    text = data.decode("utf-8", errors="replace")
    try:
        model = load(path)
        run_params = summary["model"].get("params", {})
        changed = {k: v for k, v in run_params.items()
                   if k in dict(model.params) and dict(model.params)[k] != v}
        if changed:
            model = load(path, params=changed)
    except ModelError as exc:
        return ModelFacts(str(path), digest, len(data), leading_comment(text),
                          problem=f"the model file no longer reads: {exc.message()}")
    described = summary["model"].get("description") or model.data.get("model", {}).get(
        "description") or leading_comment(text)
    used: dict[str, list[str]] = {}
    for name, s in summary["shapes"].items():
        if s.get("material"):
            used.setdefault(s["material"], []).append(name)
    materials = tuple(
        Material(m.name, m.kx, m.ky, m.note,
                 {axis: t for axis, t in (("kx", m.kx_table), ("ky", m.ky_table)) if t},
                 tuple(used.get(m.name, ())), m.density, m.specific_heat,
                 m.density_table is not None, m.specific_heat_table is not None)
        for m in model.materials if m.name in used or not used)
    return ModelFacts(str(path), digest, len(data), str(described), materials,
                      params=dict(model.params))
