"""Stage 1: model text -> :class:`Model`.

Reads the TOML model format (docs/model-format.md), evaluates parameters and
expressions, checks every key, type, reference and physical range, and hands
on a frozen :class:`Model` in the file's own length unit.
"""

from __future__ import annotations

import copy
import math
import re
import tomllib
from collections.abc import Mapping, Sequence
from dataclasses import dataclass, field, replace
from pathlib import Path
from typing import Any

import numpy as np

from ..errors import ModelError
from .expr import CONSTANTS, FUNCTIONS, ExpressionError, evaluate

LENGTH_UNITS: dict[str, float] = {"m": 1.0, "mm": 1e-3, "um": 1e-6}
"""Metres per model length unit."""
SIDES = ("left", "right", "top", "bottom")
MAX_MIN_ANGLE = 34.0
"""Largest minimum angle (degrees) for which the mesher is known to terminate."""
ABSOLUTE_ZERO_C = -273.15


Table = tuple[tuple[float, float], ...]
"""Conductivity against temperature: ((°C, W/(m·K)), ...), temperatures increasing."""


@dataclass(frozen=True)
class Material:
    """A conductor: ``kx``, ``ky`` in W/(m·K) along the model axes.

    A temperature-dependent axis has a table (piecewise linear in °C, held constant
    beyond its ends); ``kx``/``ky`` then hold its value at 25 °C.
    """

    name: str
    kx: float
    ky: float
    note: str = ""
    kx_table: Table | None = None
    ky_table: Table | None = None

    @property
    def isotropic(self) -> bool:
        return self.kx == self.ky and self.kx_table == self.ky_table

    @property
    def varies(self) -> bool:
        """True when k depends on temperature."""
        return self.kx_table is not None or self.ky_table is not None

    def k_at(self, temperature: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray,
                                                     np.ndarray]:
        """kx, ky and their slopes dk/dT at the given temperatures (°C)."""
        out = []
        for const, table in ((self.kx, self.kx_table), (self.ky, self.ky_table)):
            if table is None:
                out += [np.full_like(temperature, const), np.zeros_like(temperature)]
            else:
                t, k = np.array(table).T
                slope = np.diff(k) / np.diff(t)
                seg = np.clip(np.searchsorted(t, temperature) - 1, 0, len(t) - 2)
                inside = (temperature >= t[0]) & (temperature <= t[-1])
                out += [np.interp(temperature, t, k), np.where(inside, slope[seg], 0.0)]
        return out[0], out[2], out[1], out[3]


@dataclass(frozen=True)
class Shape:
    """One painted shape, in file order; ``kind`` is ``rect``, ``polygon`` or ``circle``.

    ``points`` holds the outline for rect and polygon (rect: lower-left,
    lower-right, upper-right, upper-left); ``circle`` holds (x, y, r).
    """

    name: str
    index: int
    kind: str
    material: str | None
    void: bool = False
    points: tuple[tuple[float, float], ...] = ()
    circle: tuple[float, float, float] | None = None
    power: float | None = None
    power_density: float | None = None
    mesh_size: float | None = None
    max_temperature: float | None = None
    group: str | None = None
    line: int | None = None

    @property
    def rect(self) -> tuple[float, float, float, float] | None:
        """(x0, y0, x1, y1) for a rect shape, else None."""
        if self.kind != "rect":
            return None
        (x0, y0), _, (x1, y1), _ = self.points
        return (x0, y0, x1, y1)


@dataclass(frozen=True)
class Selector:
    """Which exposed edges a boundary entry claims.

    ``kind`` is ``side`` (``shape`` and ``side`` set), ``shape``, ``exterior`` or
    ``box`` (``box`` = x0, y0, x1, y1).
    """

    kind: str
    shape: str | None = None
    side: str | None = None
    box: tuple[float, float, float, float] | None = None

    def __str__(self) -> str:
        if self.kind == "side":
            return f"{self.shape}.{self.side}"
        if self.kind == "shape":
            return str(self.shape)
        if self.kind == "box":
            return "box " + str(list(self.box or ()))
        return self.kind


@dataclass(frozen=True)
class Boundary:
    """A boundary condition on the edges its selector claims.

    ``kind`` is one of :data:`BOUNDARY_KINDS`; values are in °C, W/m² and W/(m²·K).
    """

    name: str
    index: int
    selector: Selector
    kind: str
    temperature: float | None = None
    heat_flux: float | None = None
    h: float | None = None
    ambient: float | None = None
    emissivity: float | None = None
    surroundings: float | None = None
    line: int | None = None

    @property
    def label(self) -> str:
        """The kind as reported, with radiation added where it applies."""
        if self.emissivity is None or self.kind == "radiation":
            return self.kind
        return self.kind + "+radiation"


@dataclass(frozen=True)
class Group:
    """Shapes reported and selected together: a layer stack or the copies of a repeat.

    ``rect`` is the outline of a stack (x0, y0, x1, y1); None for a repeat.
    """

    name: str
    kind: str
    members: tuple[str, ...]
    rect: tuple[float, float, float, float] | None = None
    line: int | None = None


@dataclass(frozen=True)
class Interface:
    """A thermal contact resistance R″ (m²·K/W) on the edges shared by ``a`` and ``b``,
    each a shape or a group (a stack or repeated shape) name."""

    name: str
    index: int
    a: str
    b: str
    resistance: float
    line: int | None = None


@dataclass(frozen=True)
class Probe:
    """A named point where the temperature is reported."""

    name: str
    x: float
    y: float
    line: int | None = None
    accuracy: float | None = None


@dataclass(frozen=True)
class MeshSettings:
    """Target edge length (model units; None = automatic), minimum angle (degrees), and
    for adaptive refinement the accuracy wanted on the max temperature (K) and the node
    budget."""

    size: float | None = None
    min_angle: float = 30.0
    accuracy: float | None = None
    max_nodes: int = 200_000


@dataclass(frozen=True)
class Model:
    """A checked model, all lengths in ``length_unit``.

    Build one with :func:`load` or :func:`parse`.
    """

    source: str
    length_unit: str
    depth: float
    params: tuple[tuple[str, float], ...]
    materials: tuple[Material, ...]
    shapes: tuple[Shape, ...]
    boundaries: tuple[Boundary, ...]
    probes: tuple[Probe, ...]
    mesh: MeshSettings
    title: str = ""
    axisymmetric: bool = False
    groups: tuple[Group, ...] = ()
    interfaces: tuple[Interface, ...] = ()
    data: Mapping[str, Any] = field(default_factory=dict, compare=False, repr=False)
    overrides: Mapping[str, float | str] = field(default_factory=dict, compare=False,
                                                 repr=False)
    paint_order: tuple[tuple[str, int], ...] = field(default=(), compare=False, repr=False)

    # -- changing a model from Python: every change is checked like the text is.
    def edited(self, change) -> Model:
        """A new model from ``change(data)``, which edits a copy of the model's TOML data.

        The result is checked exactly as a model file would be.
        """
        data = copy.deepcopy(dict(self.data))
        order = list(self.paint_order)
        change(data)
        for table in ("shape", "stack"):                       # entries added by the change
            known = {i for t, i in order if t == table}
            order += [(table, i) for i in range(len(data.get(table, []))) if i not in known]
        order = [(t, i) for t, i in order if i < len(data.get(t, []))]
        return from_dict(data, source=self.source, params=self.overrides, paint_order=order)

    def with_params(self, **values: float | str) -> Model:
        """The model with parameters of ``[params]`` set (numbers or expressions)."""
        unknown = sorted(set(values) - {name for name, _ in self.params})
        if unknown:
            raise ModelError(f"no such parameter in [params] to set (known: "
                             f"{', '.join(n for n, _ in self.params) or 'none'})",
                             file=self.source, entry=f"param \"{unknown[0]}\"")
        merged = {**self.overrides, **values}
        return from_dict(copy.deepcopy(dict(self.data)), source=self.source, params=merged,
                         paint_order=self.paint_order)

    def with_material(self, name: str, **spec: Any) -> Model:
        """The model with material ``name`` added or replaced (keys as in [materials.NAME])."""
        return self.edited(lambda d: d.setdefault("materials", {}).__setitem__(name, spec))

    def with_shape(self, **spec: Any) -> Model:
        """The model with a shape painted last (keys as in [[shape]])."""
        return self.edited(lambda d: d.setdefault("shape", []).append(spec))

    def with_boundary(self, **spec: Any) -> Model:
        """The model with a boundary added, or replaced where the name exists."""
        def change(d: dict[str, Any]) -> None:
            items = d.setdefault("boundary", [])
            names = [b.get("name") for b in items]
            if spec.get("name") in names:
                items[names.index(spec["name"])] = spec
            else:
                items.append(spec)
        return self.edited(change)

    def with_probe(self, name: str, at: tuple[float, float]) -> Model:
        """The model with a probe added."""
        return self.edited(lambda d: d.setdefault("probe", []).append(
            {"name": name, "at": list(at)}))

    @property
    def unit_m(self) -> float:
        """Metres per length unit."""
        return LENGTH_UNITS[self.length_unit]

    @property
    def depth_m(self) -> float:
        """Depth normal to the section, in metres (for an axisymmetric model: 1, the
        assembly integrates 2πr instead)."""
        return 1.0 if self.axisymmetric else self.depth * self.unit_m

    @property
    def adaptive(self) -> bool:
        """True when the model asks for an accuracy (mesh or probe)."""
        return self.mesh.accuracy is not None or any(p.accuracy for p in self.probes)

    @property
    def nonlinear(self) -> bool:
        """True when k depends on temperature or a boundary radiates."""
        return (any(m.varies for m in self.materials)
                or any(b.emissivity is not None for b in self.boundaries))

    def group(self, name: str) -> Group:
        for g in self.groups:
            if g.name == name:
                return g
        raise KeyError(name)

    def members(self, name: str) -> tuple[Shape, ...]:
        """The shapes a shape or group name stands for."""
        for g in self.groups:
            if g.name == name:
                return tuple(self.shape(m) for m in g.members)
        return (self.shape(name),)

    @property
    def stem(self) -> str:
        return Path(self.source).stem if self.source != "<string>" else "model"

    def material(self, name: str) -> Material:
        for m in self.materials:
            if m.name == name:
                return m
        raise KeyError(name)

    def shape(self, name: str) -> Shape:
        for s in self.shapes:
            if s.name == name:
                return s
        raise KeyError(name)

    def __repr__(self) -> str:
        return (f"Model({self.source!r}, unit={self.length_unit}, shapes={len(self.shapes)}, "
                f"materials={len(self.materials)}, boundaries={len(self.boundaries)}, "
                f"probes={len(self.probes)})")


# ---------------------------------------------------------------------------
# Reading


def load(path: str | Path, *, params: Mapping[str, float | str] | None = None) -> Model:
    """Read and check a model file.

    Parameters
    ----------
    path
        The TOML model file.
    params
        Parameter overrides by name (numbers or expressions), as ``--set`` does.

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
    return parse(text, source=str(path), params=params)


def parse(text: str, *, source: str = "<string>",
          params: Mapping[str, float | str] | None = None) -> Model:
    """Check model text and build a :class:`Model`; see :func:`load`."""
    try:
        data = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        msg = str(exc)
        m = re.search(r"\(at line (\d+), column \d+\)", msg)
        line = int(m.group(1)) if m else None
        reason = re.sub(r"\s*\(at line \d+, column \d+\)", "", msg)
        raise ModelError(f"not valid TOML: {reason}", file=source, entry="syntax",
                         line=line) from None
    index = _LineIndex(text)
    order = [(t, i) for t in ("shape", "stack")
             for i in range(len(data.get(t, [])) if isinstance(data.get(t), list) else 0)]
    order.sort(key=lambda e: index.find(*e) or 0)
    return _Reader(source, index).read(data, dict(params or {}), order)


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
    data = copy.deepcopy(dict(data))
    if paint_order is None:
        paint_order = [(t, i) for t in ("shape", "stack")
                       for i in range(len(data.get(t, [])) if isinstance(data.get(t), list)
                                      else 0)]
    return _Reader(source, _LineIndex("")).read(data, dict(params or {}), list(paint_order))


class _LineIndex:
    """Finds the line of a table header or of a key inside it (tomllib keeps no positions)."""

    _HEADER = re.compile(r"^\s*(\[\[?)\s*([^\]]+?)\s*\]\]?")

    def __init__(self, text: str) -> None:
        self.lines = text.splitlines()
        self.blocks: list[tuple[str, int, int, int]] = []  # (table, ordinal, start, end)
        counts: dict[str, int] = {}
        starts: list[tuple[str, int, int]] = []
        for i, raw in enumerate(self.lines):
            m = self._HEADER.match(raw)
            if m:
                name = m.group(2).replace('"', "").replace(" ", "")
                ordinal = counts.get(name, 0)
                counts[name] = ordinal + 1
                starts.append((name, ordinal, i))
        for j, (name, ordinal, start) in enumerate(starts):
            end = starts[j + 1][2] if j + 1 < len(starts) else len(self.lines)
            self.blocks.append((name, ordinal, start, end))
        first = starts[0][2] if starts else len(self.lines)
        self.blocks.append(("", 0, -1, first))

    def find(self, table: str, ordinal: int = 0, key: str | None = None) -> int | None:
        for name, o, start, end in self.blocks:
            if name == table and o == ordinal:
                if key is None:
                    return start + 1 if start >= 0 else None
                pat = re.compile(rf"^\s*\"?{re.escape(key)}\"?\s*=")
                for i in range(max(start, 0), end):
                    if pat.match(self.lines[i]):
                        return i + 1
                return start + 1 if start >= 0 else None
        return None


_ALLOWED = {
    "": {"model", "params", "materials", "shape", "stack", "boundary", "interface", "mesh",
         "probe"},
    "model": {"length_unit", "depth", "title", "axisymmetric"},
    "material": {"k", "kx", "ky", "note"},
    "shape": {"name", "material", "void", "rect", "polygon", "circle", "power",
              "power_density", "mesh_size", "max_temperature", "vias", "repeat"},
    "stack": {"name", "x", "y", "width", "layers", "mesh_size"},
    "layer": {"name", "thickness", "material", "coverage", "fill", "power", "power_density",
              "mesh_size", "max_temperature"},
    "vias": {"drill", "plating", "pitch", "metal", "fill"},
    "repeat": {"count", "dx", "dy"},
    "interface": {"name", "between", "resistance"},
    "boundary": {"name", "on", "temperature", "heat_flux", "h", "ambient", "emissivity",
                 "surroundings"},
    "mesh": {"size", "min_angle", "accuracy", "max_nodes"},
    "probe": {"name", "at", "accuracy"},
}


class _Reader:
    def __init__(self, source: str, index: _LineIndex) -> None:
        self.source = source
        self.index = index
        self.names: dict[str, float] = {}

    # -- error helpers
    def fail(self, entry: str, reason: str, line: int | None) -> ModelError:
        return ModelError(reason, file=self.source, entry=entry, line=line)

    def check_keys(self, table: dict[str, Any], allowed: str, entry: str,
                   where: tuple[str, int]) -> None:
        for key in table:
            if key not in _ALLOWED[allowed]:
                raise self.fail(entry, f"unknown key {key!r} (allowed: "
                                f"{', '.join(sorted(_ALLOWED[allowed]))})",
                                self.index.find(where[0], where[1], key))

    def number(self, value: Any, entry: str, key: str, where: tuple[str, int], *,
               low: float | None = None, high: float | None = None,
               low_open: bool = False, what: str = "") -> float:
        line = self.index.find(where[0], where[1], key.split("[")[0].split(".")[0])
        if isinstance(value, bool) or not isinstance(value, int | float | str):
            raise self.fail(entry, f"{key}: expected a number or an expression string, "
                            f"got {type(value).__name__} {value!r}", line)
        if isinstance(value, str):
            try:
                value = evaluate(value, self.names)
            except ExpressionError as exc:
                raise self.fail(entry, f"{key}: {exc}", line) from None
        value = float(value)
        if not math.isfinite(value):
            raise self.fail(entry, f"{key}: must be a finite number, got {value}", line)
        if low is not None and (value <= low if low_open else value < low):
            rel = ">" if low_open else ">="
            raise self.fail(entry, f"{key}: must be {rel} {low:g}{what}, got {value:g}", line)
        if high is not None and value > high:
            raise self.fail(entry, f"{key}: must be <= {high:g}{what}, got {value:g}", line)
        return value

    def table(self, value: Any, entry: str, key: str, where: tuple[str, int]) -> dict[str, Any]:
        if not isinstance(value, dict):
            raise self.fail(entry, f"{key}: expected a table, got {type(value).__name__}",
                            self.index.find(where[0], where[1], key))
        return value

    def string(self, value: Any, entry: str, key: str, where: tuple[str, int]) -> str:
        if not isinstance(value, str) or not value.strip():
            raise self.fail(entry, f"{key}: expected a non-empty string, got {value!r}",
                            self.index.find(where[0], where[1], key))
        return value.strip()

    def array_of_tables(self, data: dict[str, Any], key: str) -> list[dict[str, Any]]:
        value = data.get(key, [])
        if not isinstance(value, list) or not all(isinstance(v, dict) for v in value):
            raise self.fail(f"[[{key}]]", f"write each {key} as a [[{key}]] table",
                            self.index.find(key))
        return value

    # -- sections
    def read(self, data: dict[str, Any], overrides: dict[str, float | str],
             order: list[tuple[str, int]]) -> Model:
        raw = copy.deepcopy(data)
        self.check_keys(data, "", "top level", ("", 0))
        model = self.table(data.get("model", {}), "[model]", "model", ("", 0))
        self.check_keys(model, "model", "[model]", ("model", 0))
        unit = model.get("length_unit", "m")
        if unit not in LENGTH_UNITS:
            raise self.fail("[model]", f"length_unit: must be one of "
                            f"{', '.join(sorted(LENGTH_UNITS))}, got {unit!r}",
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
        params = self.read_params(data.get("params", {}), overrides)
        default_depth = 1.0 / LENGTH_UNITS[unit]
        depth = self.number(model.get("depth", default_depth), "[model]", "depth",
                            ("model", 0), low=0.0, low_open=True)
        materials = self.read_materials(data.get("materials", {}))
        self.materials = materials
        shapes, groups = self.read_shapes(data, order)
        if axisymmetric:
            self.check_radius(shapes)
        by_name = {sh.name: sh for sh in shapes}
        group_names = {g.name: g for g in groups}
        boundaries = self.read_boundaries(self.array_of_tables(data, "boundary"), by_name,
                                          group_names)
        interfaces = self.read_interfaces(self.array_of_tables(data, "interface"), by_name,
                                          group_names)
        probes = self.read_probes(self.array_of_tables(data, "probe"))
        mesh = self.read_mesh(data.get("mesh", {}))
        return Model(source=self.source, length_unit=unit, depth=depth, params=params,
                     materials=tuple(materials.values()), shapes=tuple(shapes),
                     boundaries=tuple(boundaries), probes=tuple(probes), mesh=mesh,
                     title=title, axisymmetric=axisymmetric, groups=tuple(groups),
                     interfaces=tuple(interfaces), data=raw, overrides=dict(overrides),
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
            out[name] = Material(name, kx, ky, note, tx, ty)
        return out

    def conductivity(self, value: Any, entry: str, key: str, where: tuple[str, int]
                     ) -> tuple[float, Table | None]:
        """A number, or a table [[°C, k], ...] increasing in temperature."""
        if not isinstance(value, list):
            return self.number(value, entry, key, where, low=0.0, low_open=True,
                               what=" W/(m·K)"), None
        line = self.index.find(*where, key)
        if len(value) < 2:
            raise self.fail(entry, f"{key}: a table needs at least two [°C, W/(m·K)] points",
                            line)
        rows = []
        for j, row in enumerate(value):
            if not isinstance(row, list) or len(row) != 2:
                raise self.fail(entry, f"{key}[{j}]: expected [°C, W/(m·K)], got {row!r}", line)
            t = self.number(row[0], entry, f"{key}[{j}] temperature", where,
                            low=ABSOLUTE_ZERO_C, low_open=True, what=" °C")
            k = self.number(row[1], entry, f"{key}[{j}] conductivity", where, low=0.0,
                            low_open=True, what=" W/(m·K)")
            if rows and t <= rows[-1][0]:
                raise self.fail(entry, f"{key}: table temperatures must increase, got "
                                f"{rows[-1][0]:g} then {t:g} °C", line)
            rows.append((t, k))
        table = tuple(rows)
        t, k = np.array(table).T
        return float(np.interp(25.0, t, k)), table

    def read_shapes(self, data: dict[str, Any], order: list[tuple[str, int]]
                    ) -> tuple[list[Shape], list[Group]]:
        """Shapes and stacks in painting order (file order), repeats expanded."""
        tables = {t: self.array_of_tables(data, t) for t in ("shape", "stack")}
        entries = [(t, i, tables[t][i]) for t, i in order]
        shapes: list[Shape] = []
        groups: list[Group] = []
        for table, i, spec in entries:
            if table == "shape":
                new, group = self.read_shape(spec, i)
            else:
                new, group = self.read_stack(spec, i)
            shapes += new
            if group:
                groups.append(group)
        seen: dict[str, Shape | Group] = {}
        for item in [*shapes, *groups]:
            kind = "shape" if isinstance(item, Shape) else item.kind
            if item.name in seen:
                raise self.fail(f"{kind} \"{item.name}\"", "name already used by another "
                                "shape, stack or repeat", item.line)
            seen[item.name] = item
        if not shapes:
            raise self.fail("[[shape]]", "the model has no shapes", None)
        if all(sh.void for sh in shapes):
            raise self.fail("[[shape]]", "every shape is void: nothing to solve", None)
        return [replace(sh, index=k) for k, sh in enumerate(shapes)], groups

    def name_of(self, spec: dict[str, Any], table: str, i: int, allowed: str) -> tuple[str, str]:
        where = (table, i)
        name = spec.get("name")
        entry = f"{table} \"{name}\"" if isinstance(name, str) else f"{table} #{i + 1}"
        self.check_keys(spec, allowed, entry, where)
        name = self.string(name, entry, "name", where)
        if name == "exterior" or any(name.endswith("." + side) for side in SIDES) \
                or "[" in name:
            raise self.fail(entry, "name clashes with a selector: it may not be exterior, end "
                            "in .left/.right/.top/.bottom, or hold [",
                            self.index.find(*where, "name"))
        return name, entry

    def material_ref(self, value: Any, entry: str, key: str, where: tuple[str, int]) -> str:
        name = self.string(value, entry, key, where)
        if name not in self.materials:
            known = ", ".join(sorted(self.materials)) or "none defined"
            raise self.fail(entry, f"{key}: unknown material {name!r} (known: {known})",
                            self.index.find(*where, key))
        return name

    def power_keys(self, spec: dict[str, Any], entry: str, where: tuple[str, int]
                   ) -> dict[str, float | None]:
        if "power" in spec and "power_density" in spec:
            raise self.fail(entry, "give power or power_density, not both",
                            self.index.find(*where, "power"))
        out: dict[str, float | None] = {}
        if "power" in spec:
            out["power"] = self.number(spec["power"], entry, "power", where, low=0.0, what=" W")
        if "power_density" in spec:
            out["power_density"] = self.number(spec["power_density"], entry, "power_density",
                                               where, low=0.0, what=" W/m³")
        for key in ("mesh_size",):
            if key in spec:
                out[key] = self.number(spec[key], entry, key, where, low=0.0, low_open=True)
        if "max_temperature" in spec:
            out["max_temperature"] = self.number(spec["max_temperature"], entry,
                                                 "max_temperature", where, low=ABSOLUTE_ZERO_C,
                                                 low_open=True, what=" °C")
        return out

    def read_shape(self, spec: dict[str, Any], i: int) -> tuple[list[Shape], Group | None]:
        where = ("shape", i)
        name, entry = self.name_of(spec, "shape", i, "shape")
        void = spec.get("void", False)
        if not isinstance(void, bool):
            raise self.fail(entry, "void: expected true or false",
                            self.index.find(*where, "void"))
        material = spec.get("material")
        if void:
            for key in ("material", "power", "power_density", "vias", "max_temperature"):
                if key in spec:
                    raise self.fail(entry, f"{key}: a void shape takes no {key}",
                                    self.index.find(*where, key))
        else:
            if material is None:
                raise self.fail(entry, "needs a material (or void = true)",
                                self.index.find(*where))
            material = self.material_ref(material, entry, "material", where)
        kinds = [k for k in ("rect", "polygon", "circle") if k in spec]
        if len(kinds) != 1:
            raise self.fail(entry, "give exactly one of rect, polygon, circle"
                            + (f" (found {', '.join(kinds)})" if kinds else ""),
                            self.index.find(*where))
        kind = kinds[0]
        points: tuple[tuple[float, float], ...] = ()
        circle = None
        if kind == "rect":
            r = self.table(spec["rect"], entry, "rect", where)
            self.exact_keys(r, {"x", "y", "width", "height"}, entry, "rect", where)
            x = self.number(r["x"], entry, "rect.x", where)
            y = self.number(r["y"], entry, "rect.y", where)
            w = self.number(r["width"], entry, "rect.width", where, low=0.0, low_open=True)
            h = self.number(r["height"], entry, "rect.height", where, low=0.0, low_open=True)
            points = _rect_points(x, y, w, h)
        elif kind == "polygon":
            pts = spec["polygon"]
            if not isinstance(pts, list) or len(pts) < 3:
                raise self.fail(entry, "polygon: expected a list of at least 3 [x, y] points",
                                self.index.find(*where, "polygon"))
            points = tuple(self.point(p, entry, f"polygon[{j}]", where)
                           for j, p in enumerate(pts))
        else:
            c = self.table(spec["circle"], entry, "circle", where)
            self.exact_keys(c, {"x", "y", "r"}, entry, "circle", where)
            circle = (self.number(c["x"], entry, "circle.x", where),
                      self.number(c["y"], entry, "circle.y", where),
                      self.number(c["r"], entry, "circle.r", where, low=0.0, low_open=True))
        if "vias" in spec:
            material = self.via_material(spec["vias"], name, material, entry, where)
        base = Shape(name=name, index=i, kind=kind, material=material, void=void,
                     points=points, circle=circle, line=self.index.find(*where),
                     **self.power_keys(spec, entry, where))
        if "repeat" not in spec:
            return [base], None
        rep = self.table(spec["repeat"], entry, "repeat", where)
        self.check_keys(rep, "repeat", entry, where)
        if "count" not in rep:
            raise self.fail(entry, "repeat: needs count (and dx, dy)", self.index.find(*where))
        count = self.number(rep["count"], entry, "repeat.count", where, low=1)
        if count != int(count):
            raise self.fail(entry, f"repeat.count: must be a whole number, got {count:g}",
                            self.index.find(*where, "repeat"))
        dx = self.number(rep.get("dx", 0.0), entry, "repeat.dx", where)
        dy = self.number(rep.get("dy", 0.0), entry, "repeat.dy", where)
        if dx == 0 and dy == 0 and count > 1:
            raise self.fail(entry, "repeat: dx and dy are both 0, the copies would coincide",
                            self.index.find(*where, "repeat"))
        copies = []
        for k in range(int(count)):
            ox, oy = k * dx, k * dy
            copies.append(replace(
                base, name=f"{name}[{k + 1}]", group=name,
                points=tuple((px + ox, py + oy) for px, py in base.points),
                circle=(circle[0] + ox, circle[1] + oy, circle[2]) if circle else None))
        return copies, Group(name, "repeat", tuple(c.name for c in copies), None, base.line)

    def via_material(self, raw: Any, shape: str, host: str | None, entry: str,
                     where: tuple[str, int]) -> str:
        """Effective material of a plated-through-hole field on a square grid.

        Through the board (y): copper barrels, fill and laminate in parallel,
        k_y = f_Cu k_Cu + f_fill k_fill + (1 − f_Cu − f_hole) k_host,y, with
        f_Cu = π(r_o² − r_i²)/p², f_hole = π r_i²/p² (common practice); in-plane: the host's.
        """
        via = self.table(raw, entry, "vias", where)
        self.check_keys(via, "vias", entry, where)
        for key in ("drill", "plating", "pitch", "metal"):
            if key not in via:
                raise self.fail(entry, f"vias: needs {key} (drill, plating, pitch in the "
                                "length unit; metal = the plating material)",
                                self.index.find(*where, "vias"))
        drill = self.number(via["drill"], entry, "vias.drill", where, low=0.0, low_open=True)
        plating = self.number(via["plating"], entry, "vias.plating", where, low=0.0,
                              low_open=True)
        pitch = self.number(via["pitch"], entry, "vias.pitch", where, low=0.0, low_open=True)
        line = self.index.find(*where, "vias")
        if plating >= drill / 2:
            raise self.fail(entry, f"vias: plating {plating:g} must be less than the drill "
                            f"radius {drill / 2:g}", line)
        if drill >= pitch:
            raise self.fail(entry, f"vias: pitch {pitch:g} must exceed the drill {drill:g}", line)
        metal = self.material_ref(via["metal"], entry, "metal", where)
        ro = drill / 2
        ri = ro - plating
        f_cu = math.pi * (ro**2 - ri**2) / pitch**2
        f_hole = math.pi * ri**2 / pitch**2
        k_fill = 0.0
        note = ""
        if "fill" in via:
            fill = self.material_ref(via["fill"], entry, "fill", where)
            k_fill = self.constant(fill, entry, line).ky
            note = f", filled with {fill}"
        host_m = self.constant(host, entry, line)
        ky = f_cu * self.constant(metal, entry, line).ky + f_hole * k_fill \
            + (1 - f_cu - f_hole) * host_m.ky
        name = f"{shape} (vias)"
        self.materials[name] = Material(
            name, host_m.kx, ky, f"{host} with plated vias: drill {drill:g}, plating "
            f"{plating:g}, pitch {pitch:g}{note}; copper fraction {f_cu:.4f}")
        return name

    def constant(self, name: str | None, entry: str, line: int | None) -> Material:
        """A material that a mixing rule may use: its k must not depend on temperature."""
        m = self.materials[str(name)]
        if m.varies:
            raise self.fail(entry, f"material {name!r} has a temperature table; mixing rules "
                            "need constant conductivities", line)
        return m

    def read_stack(self, spec: dict[str, Any], i: int) -> tuple[list[Shape], Group]:
        """A layer stack: one rect shape per layer, named STACK.LAYER, bottom to top.

        A layer with copper ``coverage`` φ gets the effective material (common practice)
        k_x = φ k_m,x + (1 − φ) k_fill,x and k_y = φ k_m,y + (1 − φ) k_fill,y.
        """
        where = ("stack", i)
        name, entry = self.name_of(spec, "stack", i, "stack")
        for key in ("x", "y", "width", "layers"):
            if key not in spec:
                raise self.fail(entry, f"needs {key} (x, y: lower-left corner; width; layers "
                                "bottom to top)", self.index.find(*where))
        x = self.number(spec["x"], entry, "x", where)
        y0 = self.number(spec["y"], entry, "y", where)
        width = self.number(spec["width"], entry, "width", where, low=0.0, low_open=True)
        size = (self.number(spec["mesh_size"], entry, "mesh_size", where, low=0.0,
                            low_open=True) if "mesh_size" in spec else None)
        layers = spec["layers"]
        line = self.index.find(*where, "layers")
        if not isinstance(layers, list) or not layers or not all(isinstance(v, dict)
                                                                 for v in layers):
            raise self.fail(entry, "layers: expected a list of { name, thickness, material } "
                            "tables, bottom to top", line)
        shapes = []
        y = y0
        for j, layer in enumerate(layers):
            lname = layer.get("name")
            lentry = f"{entry} layer \"{lname}\"" if isinstance(lname, str) else \
                f"{entry} layer #{j + 1}"
            self.check_keys(layer, "layer", lentry, where)
            lname = self.string(lname, lentry, "name", where)
            if "." in lname or "[" in lname:
                raise self.fail(lentry, "a layer name may not hold . or [", line)
            if lname in SIDES:
                raise self.fail(lentry, f"a layer cannot be called left, right, top or bottom "
                                f"({name}.{lname} selects a side of the stack); try "
                                f"{lname}_cu", line)
            t = self.number(layer.get("thickness"), lentry, "thickness", where, low=0.0,
                            low_open=True)
            material = self.material_ref(layer.get("material"), lentry, "material", where)
            if "coverage" in layer:
                phi = self.number(layer["coverage"], lentry, "coverage", where, low=0.0,
                                  high=1.0)
                if "fill" not in layer:
                    raise self.fail(lentry, "coverage needs fill = the material between the "
                                    "copper", line)
                fill = self.material_ref(layer["fill"], lentry, "fill", where)
                m, f = self.constant(material, lentry, line), self.constant(fill, lentry, line)
                effective = f"{name}.{lname}"
                self.materials[effective] = Material(
                    effective, phi * m.kx + (1 - phi) * f.kx, phi * m.ky + (1 - phi) * f.ky,
                    f"{phi:g} {material} in {fill} (parallel rule both ways)")
                material = effective
            elif "fill" in layer:
                raise self.fail(lentry, "fill needs coverage", line)
            keys = self.power_keys(layer, lentry, where)
            keys.setdefault("mesh_size", size)
            shapes.append(Shape(name=f"{name}.{lname}", index=0, kind="rect", material=material,
                                points=_rect_points(x, y, width, t), group=name,
                                line=self.index.find(*where), **keys))
            y += t
        return shapes, Group(name, "stack", tuple(s.name for s in shapes),
                             (x, y0, x + width, y), self.index.find(*where))

    def exact_keys(self, table: dict[str, Any], keys: set[str], entry: str, key: str,
                   where: tuple[str, int]) -> None:
        if set(table) != keys:
            missing = sorted(keys - set(table))
            extra = sorted(set(table) - keys)
            what = "; ".join(x for x in (
                f"missing {', '.join(missing)}" if missing else "",
                f"unknown {', '.join(extra)}" if extra else "") if x)
            raise self.fail(entry, f"{key}: needs exactly {', '.join(sorted(keys))} ({what})",
                            self.index.find(*where, key))

    def point(self, p: Any, entry: str, key: str, where: tuple[str, int]) -> tuple[float, float]:
        if not isinstance(p, list) or len(p) != 2:
            raise self.fail(entry, f"{key}: expected [x, y], got {p!r}",
                            self.index.find(*where, key.split("[")[0]))
        return (self.number(p[0], entry, key, where), self.number(p[1], entry, key, where))

    def named_entry(self, spec: dict[str, Any], table: str, i: int, seen: set[str]
                    ) -> tuple[str, str, tuple[str, int]]:
        """Check an array-of-tables entry's keys and unique name; (name, entry, where)."""
        where = (table, i)
        name = spec.get("name")
        entry = f"{table} \"{name}\"" if isinstance(name, str) else f"{table} #{i + 1}"
        self.check_keys(spec, table, entry, where)
        name = self.string(name, entry, "name", where)
        if name in seen:
            raise self.fail(entry, f"name already used by another {table}",
                            self.index.find(*where, "name"))
        seen.add(name)
        return name, entry, where

    def read_boundaries(self, raw: list[dict[str, Any]], by_name: dict[str, Shape],
                        groups: dict[str, Group]) -> list[Boundary]:
        out: list[Boundary] = []
        seen: set[str] = set()
        for i, spec in enumerate(raw):
            name, entry, where = self.named_entry(spec, "boundary", i, seen)
            if "on" not in spec:
                raise self.fail(entry, "needs on = a selector", self.index.find(*where))
            selector = self.selector(spec["on"], by_name, groups, entry, where)
            given = [k for k in ("temperature", "heat_flux", "h") if k in spec]
            if "ambient" in spec and "h" not in spec:
                raise self.fail(entry, "ambient needs h (convection)",
                                self.index.find(*where, "ambient"))
            radiates = "emissivity" in spec
            if len(given) > 1 or not (given or radiates):
                raise self.fail(entry, "give exactly one of temperature, heat_flux, or h with "
                                "ambient (emissivity may add radiation)"
                                + (f" (found {', '.join(given)})" if given else ""),
                                self.index.find(*where))
            kind = BOUNDARY_KEYS[given[0]] if given else "radiation"
            values: dict[str, float] = {}
            if "surroundings" in spec and not radiates:
                raise self.fail(entry, "surroundings needs emissivity",
                                self.index.find(*where, "surroundings"))
            if radiates:
                if kind == "temperature":
                    raise self.fail(entry, "emissivity: a fixed-temperature edge cannot radiate "
                                    "as well", self.index.find(*where, "emissivity"))
                values["emissivity"] = self.number(spec["emissivity"], entry, "emissivity",
                                                   where, low=0.0, low_open=True, high=1.0)
                if "surroundings" not in spec and "ambient" not in spec:
                    raise self.fail(entry, "radiation needs surroundings (°C), or h with an "
                                    "ambient that it then shares",
                                    self.index.find(*where, "emissivity"))
                values["surroundings"] = self.number(
                    spec.get("surroundings", spec.get("ambient")), entry,
                    "surroundings" if "surroundings" in spec else "ambient", where,
                    low=ABSOLUTE_ZERO_C, low_open=True, what=" °C")
            if kind == "temperature":
                values["temperature"] = self.number(spec["temperature"], entry, "temperature",
                                                    where, low=ABSOLUTE_ZERO_C, low_open=True,
                                                    what=" °C")
            elif kind == "heat_flux":
                values["heat_flux"] = self.number(spec["heat_flux"], entry, "heat_flux", where)
            elif kind == "convection":
                if "ambient" not in spec:
                    raise self.fail(entry, "convection needs ambient (°C) beside h",
                                    self.index.find(*where, "h"))
                values["h"] = self.number(spec["h"], entry, "h", where, low=0.0, low_open=True,
                                          what=" W/(m²·K)")
                values["ambient"] = self.number(spec["ambient"], entry, "ambient", where,
                                                low=ABSOLUTE_ZERO_C, low_open=True, what=" °C")
            out.append(Boundary(name=name, index=i, selector=selector, kind=kind,
                                line=self.index.find(*where), **values))
        return out

    def selector(self, on: Any, shapes: dict[str, Shape], groups: dict[str, Group], entry: str,
                 where: tuple[str, int]) -> Selector:
        line = self.index.find(*where, "on")
        if isinstance(on, dict):
            if set(on) != {"box"}:
                raise self.fail(entry, "on: a table selector is { box = [x0, y0, x1, y1] }", line)
            box = on["box"]
            if not isinstance(box, list) or len(box) != 4:
                raise self.fail(entry, "on: box needs [x0, y0, x1, y1]", line)
            x0, y0, x1, y1 = (self.number(v, entry, "on.box", where) for v in box)
            if not (x1 > x0 and y1 > y0):
                raise self.fail(entry, f"on: box needs x0 < x1 and y0 < y1, got "
                                f"{[x0, y0, x1, y1]}", line)
            return Selector("box", box=(x0, y0, x1, y1))
        if not isinstance(on, str) or not on:
            raise self.fail(entry, f"on: expected a selector string or {{ box = [...] }}, "
                            f"got {on!r}", line)
        if on == "exterior":
            return Selector("exterior")
        if on in shapes or on in groups:
            return Selector("shape", shape=on)
        base, _, side = on.rpartition(".")
        if (base in shapes or base in groups) and side in SIDES:
            members = ([shapes[m] for m in groups[base].members] if base in groups
                       and groups[base].kind == "repeat" else [shapes.get(base)])
            for m in members:
                if m is not None and m.kind != "rect":
                    raise self.fail(entry, f"on: {on!r}: side selectors need a rect shape, "
                                    f"{m.name!r} is a {m.kind}", line)
            return Selector("side", shape=base, side=side)
        known = ", ".join(sorted([*shapes, *groups]))
        raise self.fail(entry, f"on: {on!r} names no shape (shapes: {known}; sides: "
                        f"SHAPE.{'/'.join(SIDES)}; or exterior, or {{ box = [...] }})", line)

    def read_interfaces(self, raw: list[dict[str, Any]], shapes: dict[str, Shape],
                        groups: dict[str, Group]) -> list[Interface]:
        out: list[Interface] = []
        seen: set[str] = set()
        for i, spec in enumerate(raw):
            name, entry, where = self.named_entry(spec, "interface", i, seen)
            pair = spec.get("between")
            line = self.index.find(*where, "between")
            if not (isinstance(pair, list) and len(pair) == 2
                    and all(isinstance(v, str) for v in pair)):
                raise self.fail(entry, "between: expected two shape or group names", line)
            members = []
            for v in pair:
                if v in groups:
                    members.append(set(groups[v].members))
                elif v in shapes:
                    members.append({v})
                else:
                    raise self.fail(entry, f"between: no shape or group {v!r}", line)
                if any(shapes[m].void for m in members[-1]):
                    raise self.fail(entry, f"between: {v!r} is void", line)
            if members[0] & members[1]:
                raise self.fail(entry, "between: needs two different shapes (or groups with "
                                "no shape in common)", line)
            if "resistance" not in spec:
                raise self.fail(entry, "needs resistance (m²·K/W)", self.index.find(*where))
            r = self.number(spec["resistance"], entry, "resistance", where, low=0.0,
                            low_open=True, what=" m²·K/W")
            out.append(Interface(name, i, pair[0], pair[1], r, self.index.find(*where)))
        return out

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
                                       low_open=True, what=" K")
            out.append(Probe(name, x, y, self.index.find(*where), accuracy))
        return out

    def read_mesh(self, raw: Any) -> MeshSettings:
        raw = self.table(raw, "[mesh]", "mesh", ("", 0))
        self.check_keys(raw, "mesh", "[mesh]", ("mesh", 0))
        size = None
        if "size" in raw:
            size = self.number(raw["size"], "[mesh]", "size", ("mesh", 0), low=0.0,
                               low_open=True)
        angle = self.number(raw.get("min_angle", 30.0), "[mesh]", "min_angle", ("mesh", 0),
                            low=0.0, high=MAX_MIN_ANGLE, what=" degrees")
        accuracy = None
        if "accuracy" in raw:
            accuracy = self.number(raw["accuracy"], "[mesh]", "accuracy", ("mesh", 0), low=0.0,
                                   low_open=True, what=" K")
        budget = self.number(raw.get("max_nodes", 200_000), "[mesh]", "max_nodes", ("mesh", 0),
                             low=100)
        return MeshSettings(size=size, min_angle=angle, accuracy=accuracy,
                            max_nodes=int(budget))


def _rect_points(x: float, y: float, w: float, h: float) -> tuple[tuple[float, float], ...]:
    return ((x, y), (x + w, y), (x + w, y + h), (x, y + h))


BOUNDARY_KEYS = {"temperature": "temperature", "heat_flux": "heat_flux", "h": "convection"}
"""Model key that selects each boundary kind."""
