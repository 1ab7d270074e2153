"""Reading the painted parts: ``[[shape]]`` and ``[[stack]]`` entries.

:class:`ShapeReader` checks rect, polygon and circle shapes, expands repeats into named
copies, turns a plated-via field or a stack layer's copper coverage into an effective
material, and returns the shapes in painting order with their groups.
"""

from __future__ import annotations

import math
from dataclasses import replace
from typing import Any

from . import ranges
from .electrical import MaterialPropertyReader, mixed_material
from .schema import ABSOLUTE_ZERO_C, SIDES, Group, Material, Shape


class ShapeReader(MaterialPropertyReader):
    """The shape and stack sections; ``materials`` is set before they are read and grows
    by the effective materials of via fields and covered layers."""

    materials: dict[str, Material]

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
            if len(shapes) > ranges.MAX_SHAPES:
                raise self.fail(f"[[{table}]] #{i + 1}", f"the model has more than "
                                f"{ranges.MAX_SHAPES} shapes once repeats and stack layers "
                                "are expanded; merge shapes or use a via field instead of "
                                "many copies", self.index.find(table, i))
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
            out["power"] = self.number(spec["power"], entry, "power", where, low=0.0,
                                       high=ranges.POWER_W, what=" W")
        if "power_density" in spec:
            out["power_density"] = self.number(spec["power_density"], entry, "power_density",
                                               where, low=0.0, high=ranges.POWER_DENSITY,
                                               what=" W/m³")
        for key in ("mesh_size",):
            if key in spec:
                out[key] = self.size(spec[key], entry, key, where, bounds_m=ranges.MESH_SIZE_M)
        if "max_temperature" in spec:
            out["max_temperature"] = self.number(spec["max_temperature"], entry,
                                                 "max_temperature", where, low=ABSOLUTE_ZERO_C,
                                                 low_open=True, high=ranges.TEMPERATURE_C,
                                                 what=" °C")
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
            x = self.coordinate(r["x"], entry, "rect.x", where)
            y = self.coordinate(r["y"], entry, "rect.y", where)
            w = self.size(r["width"], entry, "rect.width", where)
            h = self.size(r["height"], entry, "rect.height", where)
            points = _rect_points(x, y, w, h)
        elif kind == "polygon":
            pts = spec["polygon"]
            if not isinstance(pts, list) or len(pts) < 3:
                raise self.fail(entry, "polygon: expected a list of at least 3 [x, y] points",
                                self.index.find(*where, "polygon"))
            if isinstance(pts, list) and len(pts) > ranges.MAX_POLYGON_POINTS:
                raise self.fail(entry, f"polygon: at most {ranges.MAX_POLYGON_POINTS} points, "
                                f"got {len(pts)}", self.index.find(*where, "polygon"))
            points = tuple(self.point(p, entry, f"polygon[{j}]", where)
                           for j, p in enumerate(pts))
        else:
            c = self.table(spec["circle"], entry, "circle", where)
            self.exact_keys(c, {"x", "y", "r"}, entry, "circle", where)
            circle = (self.coordinate(c["x"], entry, "circle.x", where),
                      self.coordinate(c["y"], entry, "circle.y", where),
                      self.size(c["r"], entry, "circle.r", where))
        if "vias" in spec:
            material = self.via_material(spec["vias"], name, material, entry, where)
        keys = self.power_keys(spec, entry, where)
        keys.update(self.time_keys(spec, entry, where, void=void, material=material,
                                   power=keys.get("power"), group="repeat" in spec))
        base = Shape(name=name, index=i, kind=kind, material=material, void=void,
                     points=points, circle=circle, line=self.index.find(*where), **keys)
        if "repeat" not in spec:
            return [base], None
        rep = self.table(spec["repeat"], entry, "repeat", where)
        self.check_keys(rep, "repeat", entry, where)
        if "count" not in rep:
            raise self.fail(entry, "repeat: needs count (and dx, dy)", self.index.find(*where))
        count = self.number(rep["count"], entry, "repeat.count", where, low=1,
                            high=ranges.REPEAT_COUNT, what=" copies")
        if count != int(count):
            raise self.fail(entry, f"repeat.count: must be a whole number, got {count:g}",
                            self.index.find(*where, "repeat"))
        dx = self.coordinate(rep.get("dx", 0.0), entry, "repeat.dx", where)
        dy = self.coordinate(rep.get("dy", 0.0), entry, "repeat.dy", where)
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
        group = Group(name, "repeat", tuple(c.name for c in copies), None, base.line)
        return copies, self.group_current(spec, entry, where, group, copies)

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
        drill = self.size(via["drill"], entry, "vias.drill", where)
        plating = self.size(via["plating"], entry, "vias.plating", where)
        pitch = self.size(via["pitch"], entry, "vias.pitch", where)
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
        fill_m = None
        if "fill" in via:
            fill = self.material_ref(via["fill"], entry, "fill", where)
            fill_m = self.constant(fill, entry, line)
            k_fill = fill_m.ky
            note = f", filled with {fill}"
        host_m = self.constant(host, entry, line)
        metal_m = self.constant(metal, entry, line)
        ky = f_cu * metal_m.ky + f_hole * k_fill + (1 - f_cu - f_hole) * host_m.ky
        name = f"{shape} (vias)"
        self.materials[name] = mixed_material(
            name, host_m.kx, ky, f"{host} with plated vias: drill {drill:g}, plating "
            f"{plating:g}, pitch {pitch:g}{note}; copper fraction {f_cu:.4f}",
            [(f_cu, metal_m), (f_hole, fill_m), (1 - f_cu - f_hole, host_m)], metal=metal_m)
        return name

    def constant(self, name: str | None, entry: str, line: int | None) -> Material:
        """A material that a mixing rule may use: its k must not depend on temperature."""
        m = self.materials[str(name)]
        if m.varies:
            raise self.fail(entry, f"material {name!r} has a temperature table; mixing rules "
                            "need constant conductivities", line)
        if m.varies_capacity and self.transient is not None:
            raise self.fail(entry, f"material {name!r} has a density or specific_heat table; "
                            "mixing rules need constant values", line)
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
        x = self.coordinate(spec["x"], entry, "x", where)
        y0 = self.coordinate(spec["y"], entry, "y", where)
        width = self.size(spec["width"], entry, "width", where)
        size = (self.size(spec["mesh_size"], entry, "mesh_size", where,
                          bounds_m=ranges.MESH_SIZE_M) if "mesh_size" in spec else None)
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
            t = self.size(layer.get("thickness"), lentry, "thickness", where)
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
                self.materials[effective] = mixed_material(
                    effective, phi * m.kx + (1 - phi) * f.kx, phi * m.ky + (1 - phi) * f.ky,
                    f"{phi:g} {material} in {fill} (parallel rule both ways)",
                    [(phi, m), (1 - phi, f)], metal=m)
                material = effective
            elif "fill" in layer:
                raise self.fail(lentry, "fill needs coverage", line)
            keys = self.power_keys(layer, lentry, where)
            keys.update(self.time_keys(layer, lentry, where, void=False, material=material,
                                       power=keys.get("power")))
            keys.setdefault("mesh_size", size)
            shapes.append(Shape(name=f"{name}.{lname}", index=0, kind="rect", material=material,
                                points=_rect_points(x, y, width, t), group=name,
                                line=self.index.find(*where), **keys))
            y += t
        group = Group(name, "stack", tuple(s.name for s in shapes), (x, y0, x + width, y),
                      self.index.find(*where))
        return shapes, self.group_current(spec, entry, where, group, shapes)

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


def _rect_points(x: float, y: float, w: float, h: float) -> tuple[tuple[float, float], ...]:
    return ((x, y), (x + w, y), (x + w, y + h), (x, y + h))
