"""Stage 1: model text -> :class:`Model`.

Reads the TOML model format (docs/model-format.md), evaluates parameters and
expressions, checks every key, type, reference and physical range, and hands
on a frozen :class:`Model` in the file's own length unit.
"""

from __future__ import annotations

import math
import re
import tomllib
from collections.abc import Mapping
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from .errors import ModelError
from .expr import CONSTANTS, FUNCTIONS, ExpressionError, evaluate

LENGTH_UNITS: dict[str, float] = {"m": 1.0, "mm": 1e-3, "um": 1e-6}
"""Metres per model length unit."""
SIDES = ("left", "right", "top", "bottom")
MAX_MIN_ANGLE = 34.0
"""Largest minimum angle (degrees) for which the mesher is known to terminate."""
ABSOLUTE_ZERO_C = -273.15


@dataclass(frozen=True)
class Material:
    """A conductor: ``kx``, ``ky`` in W/(m·K) along the model axes."""

    name: str
    kx: float
    ky: float
    note: str = ""

    @property
    def isotropic(self) -> bool:
        return self.kx == self.ky


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
    line: int | None = None


@dataclass(frozen=True)
class Probe:
    """A named point where the temperature is reported."""

    name: str
    x: float
    y: float
    line: int | None = None


@dataclass(frozen=True)
class MeshSettings:
    """Target edge length (model units; None = automatic) and minimum angle (degrees)."""

    size: float | None = None
    min_angle: float = 30.0


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
    lines: Mapping[str, int] = field(default_factory=dict, compare=False, repr=False)

    @property
    def unit_m(self) -> float:
        """Metres per length unit."""
        return LENGTH_UNITS[self.length_unit]

    @property
    def depth_m(self) -> float:
        """Depth normal to the section, in metres."""
        return self.depth * self.unit_m

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
    reader = _Reader(source, _LineIndex(text))
    return reader.read(data, dict(params or {}))


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
    "": {"model", "params", "materials", "shape", "boundary", "mesh", "probe"},
    "model": {"length_unit", "depth", "title"},
    "material": {"k", "kx", "ky", "note"},
    "shape": {"name", "material", "void", "rect", "polygon", "circle", "power",
              "power_density", "mesh_size"},
    "boundary": {"name", "on", "temperature", "heat_flux", "h", "ambient"},
    "mesh": {"size", "min_angle"},
    "probe": {"name", "at"},
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
    def read(self, data: dict[str, Any], overrides: dict[str, float | str]) -> Model:
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
        params = self.read_params(data.get("params", {}), overrides)
        default_depth = 1.0 / LENGTH_UNITS[unit]
        depth = self.number(model.get("depth", default_depth), "[model]", "depth",
                            ("model", 0), low=0.0, low_open=True)
        materials = self.read_materials(data.get("materials", {}))
        shapes = self.read_shapes(self.array_of_tables(data, "shape"), materials)
        boundaries = self.read_boundaries(self.array_of_tables(data, "boundary"), shapes)
        probes = self.read_probes(self.array_of_tables(data, "probe"))
        mesh = self.read_mesh(data.get("mesh", {}))
        return Model(source=self.source, length_unit=unit, depth=depth, params=params,
                     materials=tuple(materials.values()), shapes=tuple(shapes),
                     boundaries=tuple(boundaries), probes=tuple(probes), mesh=mesh,
                     title=title)

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
                kx = ky = self.number(spec["k"], entry, "k", where, low=0.0, low_open=True,
                                      what=" W/(m·K)")
            elif "kx" in spec and "ky" in spec:
                kx = self.number(spec["kx"], entry, "kx", where, low=0.0, low_open=True,
                                 what=" W/(m·K)")
                ky = self.number(spec["ky"], entry, "ky", where, low=0.0, low_open=True,
                                 what=" W/(m·K)")
            else:
                raise self.fail(entry, "needs a conductivity: k, or both kx and ky",
                                self.index.find(*where))
            note = spec.get("note", "")
            if not isinstance(note, str):
                raise self.fail(entry, "note: expected a string", self.index.find(*where, "note"))
            out[name] = Material(name, kx, ky, note)
        return out

    def read_shapes(self, raw: list[dict[str, Any]], materials: dict[str, Material]
                    ) -> list[Shape]:
        shapes: list[Shape] = []
        seen: dict[str, int] = {}
        for i, spec in enumerate(raw):
            where = ("shape", i)
            name = spec.get("name")
            entry = f"shape \"{name}\"" if isinstance(name, str) else f"shape #{i + 1}"
            self.check_keys(spec, "shape", entry, where)
            name = self.string(name, entry, "name", where)
            if name in seen:
                raise self.fail(entry, f"name already used by shape #{seen[name] + 1}",
                                self.index.find(*where, "name"))
            if name == "exterior" or any(name.endswith("." + s) for s in SIDES):
                raise self.fail(entry, "name clashes with a selector word",
                                self.index.find(*where, "name"))
            seen[name] = i
            void = spec.get("void", False)
            if not isinstance(void, bool):
                raise self.fail(entry, "void: expected true or false",
                                self.index.find(*where, "void"))
            material = spec.get("material")
            if void and material is not None:
                raise self.fail(entry, "a void shape takes no material",
                                self.index.find(*where, "material"))
            if not void:
                if material is None:
                    raise self.fail(entry, "needs a material (or void = true)",
                                    self.index.find(*where))
                material = self.string(material, entry, "material", where)
                if material not in materials:
                    known = ", ".join(sorted(materials)) or "none defined"
                    raise self.fail(entry, f"material: unknown material {material!r} "
                                    f"(known: {known})", self.index.find(*where, "material"))
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
                h = self.number(r["height"], entry, "rect.height", where, low=0.0,
                                low_open=True)
                points = ((x, y), (x + w, y), (x + w, y + h), (x, y + h))
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
            power = power_density = None
            if "power" in spec and "power_density" in spec:
                raise self.fail(entry, "give power or power_density, not both",
                                self.index.find(*where, "power"))
            if (void and ("power" in spec or "power_density" in spec)):
                raise self.fail(entry, "a void shape cannot dissipate power",
                                self.index.find(*where, "power"))
            if "power" in spec:
                power = self.number(spec["power"], entry, "power", where, low=0.0, what=" W")
            if "power_density" in spec:
                power_density = self.number(spec["power_density"], entry, "power_density",
                                            where, low=0.0, what=" W/m³")
            mesh_size = None
            if "mesh_size" in spec:
                mesh_size = self.number(spec["mesh_size"], entry, "mesh_size", where, low=0.0,
                                        low_open=True)
            shapes.append(Shape(name=name, index=i, kind=kind, material=material, void=void,
                                points=points, circle=circle, power=power,
                                power_density=power_density, mesh_size=mesh_size,
                                line=self.index.find(*where)))
        if not shapes:
            raise self.fail("[[shape]]", "the model has no shapes", None)
        if all(s.void for s in shapes):
            raise self.fail("[[shape]]", "every shape is void: nothing to solve", None)
        return shapes

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

    def read_boundaries(self, raw: list[dict[str, Any]], shapes: list[Shape]) -> list[Boundary]:
        by_name = {s.name: s for s in shapes}
        out: list[Boundary] = []
        seen: set[str] = set()
        for i, spec in enumerate(raw):
            where = ("boundary", i)
            name = spec.get("name")
            entry = f"boundary \"{name}\"" if isinstance(name, str) else f"boundary #{i + 1}"
            self.check_keys(spec, "boundary", entry, where)
            name = self.string(name, entry, "name", where)
            if name in seen:
                raise self.fail(entry, "name already used by another boundary",
                                self.index.find(*where, "name"))
            seen.add(name)
            if "on" not in spec:
                raise self.fail(entry, "needs on = a selector", self.index.find(*where))
            selector = self.selector(spec["on"], by_name, entry, where)
            given = [k for k in ("temperature", "heat_flux", "h") if k in spec]
            if "ambient" in spec and "h" not in spec:
                raise self.fail(entry, "ambient needs h (convection)",
                                self.index.find(*where, "ambient"))
            if len(given) != 1:
                raise self.fail(entry, "give exactly one of temperature, heat_flux, or h with "
                                "ambient" + (f" (found {', '.join(given)})" if given else ""),
                                self.index.find(*where))
            kind = BOUNDARY_KEYS[given[0]]
            values: dict[str, float] = {}
            if kind == "temperature":
                values["temperature"] = self.number(spec["temperature"], entry, "temperature",
                                                    where, low=ABSOLUTE_ZERO_C, low_open=True,
                                                    what=" °C")
            elif kind == "heat_flux":
                values["heat_flux"] = self.number(spec["heat_flux"], entry, "heat_flux", where)
            else:
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

    def selector(self, on: Any, shapes: dict[str, Shape], entry: str,
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
        if on in shapes:
            return Selector("shape", shape=on)
        base, _, side = on.rpartition(".")
        if base in shapes and side in SIDES:
            if shapes[base].kind != "rect":
                raise self.fail(entry, f"on: {on!r}: side selectors need a rect shape, "
                                f"{base!r} is a {shapes[base].kind}", line)
            return Selector("side", shape=base, side=side)
        known = ", ".join(sorted(shapes))
        raise self.fail(entry, f"on: {on!r} names no shape (shapes: {known}; sides: "
                        f"SHAPE.{'/'.join(SIDES)}; or exterior, or {{ box = [...] }})", line)

    def read_probes(self, raw: list[dict[str, Any]]) -> list[Probe]:
        out: list[Probe] = []
        seen: set[str] = set()
        for i, spec in enumerate(raw):
            where = ("probe", i)
            name = spec.get("name")
            entry = f"probe \"{name}\"" if isinstance(name, str) else f"probe #{i + 1}"
            self.check_keys(spec, "probe", entry, where)
            name = self.string(name, entry, "name", where)
            if name in seen:
                raise self.fail(entry, "name already used by another probe",
                                self.index.find(*where, "name"))
            seen.add(name)
            if "at" not in spec:
                raise self.fail(entry, "needs at = [x, y]", self.index.find(*where))
            x, y = self.point(spec["at"], entry, "at", where)
            out.append(Probe(name, x, y, self.index.find(*where)))
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
        return MeshSettings(size=size, min_angle=angle)


BOUNDARY_KEYS = {"temperature": "temperature", "heat_flux": "heat_flux", "h": "convection"}
"""Model key that selects each boundary kind."""
