"""Reading what happens at edges: ``[[boundary]]`` entries, their selectors, and
``[[interface]]`` contact resistances.

:class:`BoundaryReader` checks each boundary's kind and values and resolves its ``on``
selector (a shape, a group, a rect side, the exterior or a box) against the shapes and
groups already read; interfaces name two shapes or groups with no shape in common.
"""

from __future__ import annotations

from typing import Any

from . import ranges
from .base import brief
from .schema import (
    ABSOLUTE_ZERO_C,
    BOUNDARY_KEYS,
    SIDES,
    Boundary,
    Group,
    Interface,
    Selector,
    Shape,
)
from .timeline import Schedule, TimelineReader


class BoundaryReader(TimelineReader):
    """The boundary and interface sections."""

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
                    low=ABSOLUTE_ZERO_C, low_open=True, high=ranges.TEMPERATURE_C, what=" °C")
            if kind == "temperature":
                values["temperature"] = self.number(spec["temperature"], entry, "temperature",
                                                    where, low=ABSOLUTE_ZERO_C, low_open=True,
                                                    high=ranges.TEMPERATURE_C, what=" °C")
            elif kind == "heat_flux":
                values["heat_flux"] = self.number(
                    spec["heat_flux"], entry, "heat_flux", where,
                    within=(-ranges.HEAT_FLUX, ranges.HEAT_FLUX), what=" W/m²")
            elif kind == "convection":
                if "ambient" not in spec:
                    raise self.fail(entry, "convection needs ambient (°C) beside h",
                                    self.index.find(*where, "h"))
                values["h"] = self.number(spec["h"], entry, "h", where, low=0.0, low_open=True,
                                          within=ranges.FILM_COEFFICIENT, what=" W/(m²·K)")
                values["ambient"] = self.number(spec["ambient"], entry, "ambient", where,
                                                low=ABSOLUTE_ZERO_C, low_open=True,
                                                high=ranges.TEMPERATURE_C, what=" °C")
            out.append(Boundary(name=name, index=i, selector=selector, kind=kind,
                                line=self.index.find(*where),
                                schedules=self.boundary_schedules(spec, entry, where),
                                **values))
        return out

    def boundary_schedules(self, spec: dict[str, Any], entry: str, where: tuple[str, int]
                           ) -> tuple[tuple[str, Schedule], ...]:
        """temperature_table, ambient_table, h_table: [[s, value], ...] piecewise linear,
        each beside its base key (which keeps the kind and the steady value)."""
        out = []
        for key, low, high, unit, within in (
                ("temperature", ABSOLUTE_ZERO_C, ranges.TEMPERATURE_C, "°C", None),
                ("ambient", ABSOLUTE_ZERO_C, ranges.TEMPERATURE_C, "°C", None),
                ("h", 0.0, ranges.FILM_COEFFICIENT[1], "W/(m²·K)", ranges.FILM_COEFFICIENT)):
            table = f"{key}_table"
            if table not in spec:
                continue
            self.needs_transient(entry, table, where)
            if key not in spec:
                raise self.fail(entry, f"{table} needs {key} (it selects the kind and is "
                                "the steady value)", self.index.find(*where, table))
            rows = self.time_table(spec[table], entry, table, where, unit=unit, low=low,
                                   high=high, low_open=True)
            if within is not None:
                for j, (_, v) in enumerate(rows):
                    if not within[0] <= v <= within[1]:
                        raise self.fail(entry, f"{table}[{j}] value: must be between "
                                        f"{within[0]:g} and {within[1]:g} {unit}, got {v:g}",
                                        self.index.find(*where, table))
            out.append((key, Schedule("linear", rows)))
        return tuple(out)

    def selector(self, on: Any, shapes: dict[str, Shape], groups: dict[str, Group], entry: str,
                 where: tuple[str, int]) -> Selector:
        line = self.index.find(*where, "on")
        if isinstance(on, dict):
            if set(on) != {"box"}:
                raise self.fail(entry, "on: a table selector is { box = [x0, y0, x1, y1] }", line)
            box = on["box"]
            if not isinstance(box, list) or len(box) != 4:
                raise self.fail(entry, "on: box needs [x0, y0, x1, y1]", line)
            x0, y0, x1, y1 = (self.coordinate(v, entry, "on.box", where) for v in box)
            if not (x1 > x0 and y1 > y0):
                raise self.fail(entry, f"on: box needs x0 < x1 and y0 < y1, got "
                                f"{[x0, y0, x1, y1]}", line)
            return Selector("box", box=(x0, y0, x1, y1))
        if not isinstance(on, str) or not on:
            raise self.fail(entry, f"on: expected a selector string or {{ box = [...] }}, "
                            f"got {brief(on)}", line)
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
                            low_open=True, within=ranges.RESISTANCE, what=" m²·K/W")
            out.append(Interface(name, i, pair[0], pair[1], r, self.index.find(*where)))
        return out
