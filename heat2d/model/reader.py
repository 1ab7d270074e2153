"""Stage 1: model text -> :class:`~heat2d.model.schema.Model`.

Reads the TOML model format (docs/model-format.md), evaluates parameters and
expressions, checks every key, type, reference and physical range, and hands
on a frozen :class:`~heat2d.model.schema.Model` in the file's own length unit.
This module holds the entry points (:func:`load`, :func:`parse`, :func:`from_dict`)
and the top-level sections ([model], [params], [materials], [[probe]], [mesh]); the
shapes and the boundaries are read by :mod:`.parts` and :mod:`.boundaries`.
"""

from __future__ import annotations

import copy
import re
import tomllib
from collections.abc import Mapping, Sequence
from pathlib import Path
from typing import Any

from ..errors import ModelError
from . import ranges
from .base import brief
from .boundaries import BoundaryReader
from .cuts import CutReader
from .expr import CONSTANTS, FUNCTIONS
from .lines import LineIndex
from .parts import ShapeReader
from .schema import (
    LENGTH_UNITS,
    MAX_MIN_ANGLE,
    Material,
    MeshSettings,
    Model,
    Probe,
    Shape,
    Table,
    use_checker,
)


def load(path: str | Path, *, params: Mapping[str, float | str] | None = None,
         node_limit: int | None = None) -> Model:
    """Read and check a model file.

    Parameters
    ----------
    path
        The TOML model file.
    params
        Parameter overrides by name (numbers or expressions), as ``--set`` does.
    node_limit
        Overrides ``[mesh] node_limit`` (the most nodes a mesh may have), as
        ``--node-limit`` does; kept in the model's data, so edited copies keep it.

    Raises
    ------
    ModelError
        On any bad input, naming the file, the entry and where known the line.
    """
    path = Path(path)
    try:
        text = path.read_text(encoding="utf-8")
    except (OSError, UnicodeDecodeError) as exc:
        raise ModelError(f"cannot read model file: {exc}", file=str(path)) from None
    return parse(text, source=str(path), params=params, node_limit=node_limit)


def parse(text: str, *, source: str = "<string>",
          params: Mapping[str, float | str] | None = None,
          node_limit: int | None = None) -> Model:
    """Check model text and build a :class:`Model`; see :func:`load`."""
    try:
        data = tomllib.loads(text)
    except RecursionError:
        raise ModelError(f"not valid TOML: arrays or tables nested too deeply (at most "
                         f"{ranges.MAX_TOML_DEPTH} levels)", file=source, entry="syntax",
                         line=None) from None
    except ValueError as exc:               # an integer beyond int()'s digit limit
        if isinstance(exc, tomllib.TOMLDecodeError):
            raise _syntax_error(exc, source) from None
        m = re.search(r"\d{100,}", text)
        line = text.count("\n", 0, m.start()) + 1 if m else None
        raise ModelError(f"number too long: at most {ranges.MAX_INTEGER:g} in magnitude",
                         file=source, entry="syntax", line=line) from None
    index = LineIndex(text)
    _check_depth(data, source, index)
    if node_limit is not None and isinstance(data.get("mesh", {}), dict):
        data.setdefault("mesh", {})["node_limit"] = node_limit
    order = [(t, i) for t in ("shape", "stack")
             for i in range(len(data.get(t, [])) if isinstance(data.get(t), list) else 0)]
    order.sort(key=lambda e: index.find(*e) or 0)
    return _Reader(source, index).read(data, dict(params or {}), order)


def _syntax_error(exc: tomllib.TOMLDecodeError, source: str) -> ModelError:
    msg = str(exc)
    m = re.search(r"\(at line (\d+), column \d+\)", msg)
    line = int(m.group(1)) if m else None
    reason = re.sub(r"\s*\(at line \d+, column \d+\)", "", msg)
    return ModelError(f"not valid TOML: {reason}", file=source, entry="syntax", line=line)


def _check_depth(data: Mapping[str, Any], source: str, index: LineIndex) -> None:
    """Refuse tables and arrays nested deeper than MAX_TOML_DEPTH (walked without
    recursion), naming the entry that holds them."""
    for top, value in data.items():
        entries = [(f"[{top}]", value, 1, index.find(top) or index.find("", 0, top))]
        if isinstance(value, list) and all(isinstance(v, dict) for v in value):
            entries = [(f"{top} \"{v['name']}\"" if isinstance(v.get("name"), str)
                        else f"{top} #{i + 1}", v, 2, index.find(top, i))
                       for i, v in enumerate(value)]
        for entry, node, depth, line in entries:
            stack = [(node, depth)]
            while stack:
                node, depth = stack.pop()
                if depth > ranges.MAX_TOML_DEPTH:
                    raise ModelError(f"arrays or tables nested more than "
                                     f"{ranges.MAX_TOML_DEPTH} deep", file=source,
                                     entry=entry, line=line)
                if isinstance(node, dict):
                    stack += [(v, depth + 1) for v in node.values()]
                elif isinstance(node, list):
                    stack += [(v, depth + 1) for v in node]


def from_dict(data: Mapping[str, Any], *, source: str = "<dict>",
              params: Mapping[str, float | str] | None = None,
              paint_order: Sequence[tuple[str, int]] | None = None) -> Model:
    """Check model data (the TOML structure as Python dicts and lists) and build a Model.

    Parameters
    ----------
    data
        As ``tomllib`` would read the model file.
    source
        Name used in messages.
    params
        Parameter overrides.
    paint_order
        (``"shape"`` or ``"stack"``, index) pairs in painting order; by default all
        shapes, then all stacks.
    """
    _check_depth(data, source, LineIndex(""))
    data = copy.deepcopy(dict(data))
    if paint_order is None:
        paint_order = [(t, i) for t in ("shape", "stack")
                       for i in range(len(data.get(t, [])) if isinstance(data.get(t), list)
                                      else 0)]
    return _Reader(source, LineIndex("")).read(data, dict(params or {}), list(paint_order))


class _Reader(ShapeReader, BoundaryReader, CutReader):
    """Reads one model: the top-level sections here, shapes and boundaries from
    the mixed-in readers."""

    # -- sections
    def read(self, data: dict[str, Any], overrides: dict[str, float | str],
             order: list[tuple[str, int]]) -> Model:
        raw = copy.deepcopy(data)
        self.check_keys(data, "", "top level", ("", 0))
        model = self.table(data.get("model", {}), "[model]", "model", ("", 0))
        self.check_keys(model, "model", "[model]", ("model", 0))
        unit = model.get("length_unit", "m")
        if not isinstance(unit, str) or unit not in LENGTH_UNITS:
            raise self.fail("[model]", f"length_unit: must be one of "
                            f"{', '.join(sorted(LENGTH_UNITS))}, got {brief(unit)}",
                            self.index.find("model", 0, "length_unit"))
        title = model.get("title", "")
        if not isinstance(title, str):
            raise self.fail("[model]", "title: expected a string",
                            self.index.find("model", 0, "title"))
        axisymmetric = model.get("axisymmetric", False)
        if not isinstance(axisymmetric, bool):
            raise self.fail("[model]", "axisymmetric: expected true or false",
                            self.index.find("model", 0, "axisymmetric"))
        if axisymmetric and "depth" in model:
            raise self.fail("[model]", "depth: an axisymmetric model is solved for the full "
                            "revolution and takes no depth", self.index.find("model", 0, "depth"))
        self.unit, self.unit_m = unit, LENGTH_UNITS[unit]
        params = self.read_params(data.get("params", {}), overrides)
        default_depth = 1.0 / LENGTH_UNITS[unit]
        depth = self.size(model.get("depth", default_depth), "[model]", "depth",
                          ("model", 0))
        self.transient = self.read_transient(data.get("transient"))
        materials = self.read_materials(data.get("materials", {}))
        self.materials = materials
        shapes, groups = self.read_shapes(data, order)
        self.check_capacity(shapes)
        if axisymmetric:
            self.check_radius(shapes)
        by_name = {sh.name: sh for sh in shapes}
        group_names = {g.name: g for g in groups}
        boundaries = self.read_boundaries(self.array_of_tables(data, "boundary"), by_name,
                                          group_names)
        interfaces = self.read_interfaces(self.array_of_tables(data, "interface"), by_name,
                                          group_names)
        probes = self.read_probes(self.array_of_tables(data, "probe"))
        cuts = self.read_cuts(self.array_of_tables(data, "cut"))
        mesh = self.read_mesh(data.get("mesh", {}))
        transient = self.start_state(self.transient, boundaries)
        return Model(source=self.source, length_unit=unit, depth=depth, params=params,
                     materials=tuple(materials.values()), shapes=tuple(shapes),
                     boundaries=tuple(boundaries), probes=tuple(probes), mesh=mesh,
                     title=title, axisymmetric=axisymmetric, groups=tuple(groups),
                     interfaces=tuple(interfaces), cuts=tuple(cuts), transient=transient,
                     data=raw,
                     overrides=dict(overrides),
                     paint_order=tuple(order))

    def check_radius(self, shapes: list[Shape]) -> None:
        for sh in shapes:
            xs = ([sh.circle[0] - sh.circle[2]] if sh.circle else [p[0] for p in sh.points])
            if min(xs) < -1e-12 * max(1.0, max(abs(x) for x in xs)):
                raise self.fail(f"shape \"{sh.name}\"", "an axisymmetric model needs x >= 0 "
                                f"(x is the radius), got x = {min(xs):g}", sh.line)

    def read_params(self, raw: Any, overrides: dict[str, float | str]
                    ) -> tuple[tuple[str, float], ...]:
        raw = self.table(raw, "[params]", "params", ("", 0))
        unknown = sorted(set(overrides) - set(raw))
        if unknown:
            known = ", ".join(raw) or "none"
            raise self.fail(f"param \"{unknown[0]}\"",
                            f"no such parameter in [params] to set (known: {known})", None)
        out = []
        for name, value in raw.items():
            if not re.fullmatch(r"[A-Za-z_][A-Za-z0-9_]*", name):
                raise self.fail(f"param \"{name}\"", "parameter names are letters, digits and _",
                                self.index.find("params", 0, name))
            if name in CONSTANTS or name in FUNCTIONS:
                raise self.fail(f"param \"{name}\"", "this name is reserved for expressions",
                                self.index.find("params", 0, name))
            given = overrides.get(name, value)
            entry = f"param \"{name}\"" + (" (--set)" if name in overrides else "")
            self.names[name] = self.number(given, entry, name, ("params", 0))
            out.append((name, self.names[name]))
        return tuple(out)

    def read_materials(self, raw: Any) -> dict[str, Material]:
        raw = self.table(raw, "[materials]", "materials", ("", 0))
        out: dict[str, Material] = {}
        for name, spec in raw.items():
            where = (f"materials.{name}", 0)
            if len(name) > ranges.MAX_NAME:
                raise self.fail(f"material \"{name[:40]}...\"", f"name: at most "
                                f"{ranges.MAX_NAME} characters, got {len(name)}",
                                self.index.find(*where))
            entry = f"material \"{name}\""
            spec = self.table(spec, entry, name, ("materials", 0))
            self.check_keys(spec, "material", entry, where)
            if "k" in spec and ("kx" in spec or "ky" in spec):
                raise self.fail(entry, "give either k (isotropic) or kx and ky, not both",
                                self.index.find(*where, "k"))
            if "k" in spec:
                (kx, tx) = (ky, ty) = self.conductivity(spec["k"], entry, "k", where)
            elif "kx" in spec and "ky" in spec:
                kx, tx = self.conductivity(spec["kx"], entry, "kx", where)
                ky, ty = self.conductivity(spec["ky"], entry, "ky", where)
            else:
                raise self.fail(entry, "needs a conductivity: k, or both kx and ky",
                                self.index.find(*where))
            note = spec.get("note", "")
            if not isinstance(note, str):
                raise self.fail(entry, "note: expected a string", self.index.find(*where, "note"))
            out[name] = Material(name, kx, ky, note, tx, ty,
                                 **self.property_keys(spec, entry, where))
        return out

    def conductivity(self, value: Any, entry: str, key: str, where: tuple[str, int]
                     ) -> tuple[float, Table | None]:
        """A number, or a table [[°C, k], ...] increasing in temperature."""
        return self.temperature_table(value, entry, key, where, within=ranges.CONDUCTIVITY,
                                      unit="W/(m·K)", quantity="conductivity")

    def read_probes(self, raw: list[dict[str, Any]]) -> list[Probe]:
        out: list[Probe] = []
        seen: set[str] = set()
        for i, spec in enumerate(raw):
            name, entry, where = self.named_entry(spec, "probe", i, seen)
            if "at" not in spec:
                raise self.fail(entry, "needs at = [x, y]", self.index.find(*where))
            x, y = self.point(spec["at"], entry, "at", where)
            accuracy = None
            if "accuracy" in spec:
                accuracy = self.number(spec["accuracy"], entry, "accuracy", where, low=0.0,
                                       low_open=True, high=ranges.ACCURACY_K, what=" K")
            out.append(Probe(name, x, y, self.index.find(*where), accuracy))
        return out

    def read_mesh(self, raw: Any) -> MeshSettings:
        raw = self.table(raw, "[mesh]", "mesh", ("", 0))
        self.check_keys(raw, "mesh", "[mesh]", ("mesh", 0))
        where = ("mesh", 0)
        size = None
        if "size" in raw:
            size = self.size(raw["size"], "[mesh]", "size", where, bounds_m=ranges.MESH_SIZE_M)
        angle = self.number(raw.get("min_angle", 30.0), "[mesh]", "min_angle", where,
                            low=0.0, high=MAX_MIN_ANGLE, what=" degrees")
        accuracy = None
        if "accuracy" in raw:
            accuracy = self.number(raw["accuracy"], "[mesh]", "accuracy", where, low=0.0,
                                   low_open=True, high=ranges.ACCURACY_K, what=" K")
        budget = self.number(raw.get("max_nodes", 200_000), "[mesh]", "max_nodes", where,
                             low=100, high=ranges.MAX_NODES)
        limit = self.number(raw.get("node_limit", ranges.NODE_LIMIT), "[mesh]", "node_limit",
                            where, low=ranges.MIN_NODE_LIMIT, high=ranges.MAX_NODES)
        return MeshSettings(size=size, min_angle=angle, accuracy=accuracy,
                            max_nodes=int(budget), node_limit=int(limit))


use_checker(from_dict)                      # Model.edited and with_* check through from_dict
