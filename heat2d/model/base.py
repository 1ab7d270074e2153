"""The reader's base: the keys each table allows, and the checks every section shares.

:class:`BaseReader` turns a bad key, number, string, table, point or entry name into a
:class:`~heat2d.errors.ModelError` naming the file, the entry and where known the line;
numbers may be expressions over the model's parameters. The section readers
(:mod:`.parts`, :mod:`.boundaries`, :mod:`.reader`) build on it.
"""

from __future__ import annotations

import math
from typing import Any

from ..errors import ModelError
from . import ranges
from .expr import ExpressionError, evaluate
from .lines import LineIndex
from .schema import ABSOLUTE_ZERO_C

_CURRENT = {"current", "current_pulse", "current_table", "current_steps"}
_SCHEDULED = {"power_pulse", "power_table", "power_steps", *_CURRENT}
_ALLOWED = {
    "": {"model", "params", "materials", "shape", "stack", "boundary", "interface", "mesh",
         "probe", "cut", "transient"},
    "model": {"length_unit", "depth", "title", "axisymmetric"},
    "material": {"k", "kx", "ky", "note", "density", "specific_heat", "resistivity",
                 "resistivity_reference", "temperature_coefficient"},
    "shape": {"name", "material", "void", "rect", "polygon", "circle", "power",
              "power_density", "mesh_size", "max_temperature", "vias", "repeat",
              *_SCHEDULED},
    "stack": {"name", "x", "y", "width", "layers", "mesh_size", *_CURRENT},
    "layer": {"name", "thickness", "material", "coverage", "fill", "power", "power_density",
              "mesh_size", "max_temperature", *_SCHEDULED},
    "vias": {"drill", "plating", "pitch", "metal", "fill"},
    "repeat": {"count", "dx", "dy"},
    "interface": {"name", "between", "resistance"},
    "boundary": {"name", "on", "temperature", "heat_flux", "h", "ambient", "emissivity",
                 "surroundings", "temperature_table", "ambient_table", "h_table"},
    "transient": {"end", "first", "per_decade", "every", "initial", "tolerance", "snapshots",
                  "zth", "foster_terms", "duties"},
    "mesh": {"size", "min_angle", "accuracy", "max_nodes", "node_limit"},
    "probe": {"name", "at", "accuracy"},
    "cut": {"name", "through"},
}


class BaseReader:
    """Checks values for one model source; ``names`` holds the parameters read so far."""

    def __init__(self, source: str, index: LineIndex) -> None:
        self.source = source
        self.index = index
        self.names: dict[str, float] = {}
        self.unit = "m"
        self.unit_m = 1.0

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
               low_open: bool = False, what: str = "",
               within: tuple[float, float] | None = None, unit: str | None = None) -> float:
        """A number or expression, checked against ``low``/``high`` (sign and hard limits,
        reported as ``must be > 0``) and then the plausible range ``within`` (stated in
        ``unit``, by default ``what``)."""
        line = self.index.find(where[0], where[1], key.split("[")[0].split(".")[0])
        if isinstance(value, bool) or not isinstance(value, int | float | str):
            raise self.fail(entry, f"{key}: expected a number or an expression string, "
                            f"got {type(value).__name__} {brief(value)}", line)
        if isinstance(value, str):
            try:
                value = evaluate(value, self.names)
            except ExpressionError as exc:
                raise self.fail(entry, f"{key}: {exc}", line) from None
        if isinstance(value, int) and abs(value) > ranges.MAX_INTEGER:
            raise self.fail(entry, f"{key}: must be a number of magnitude at most "
                            f"{ranges.MAX_INTEGER:g}, got an integer of {len(str(abs(value)))} "
                            "digits", line)
        value = float(value)
        if not math.isfinite(value):
            raise self.fail(entry, f"{key}: must be a finite number, got {value}", line)
        if low is not None and (value <= low if low_open else value < low):
            rel = ">" if low_open else ">="
            raise self.fail(entry, f"{key}: must be {rel} {low:g}{what}, got {value:g}", line)
        if high is not None and value > high:
            raise self.fail(entry, f"{key}: must be <= {high:g}{what}, got {value:g}", line)
        if within is not None and not within[0] <= value <= within[1]:
            raise self.fail(entry, f"{key}: must be between {within[0]:g} and {within[1]:g}"
                            f"{what if unit is None else unit}, got {value:g}", line)
        return value

    def size(self, value: Any, entry: str, key: str, where: tuple[str, int], *,
             bounds_m: tuple[float, float] = ranges.SIZE_M) -> float:
        """A positive length in the model unit, within ``bounds_m`` (metres) converted."""
        low, high = (b / self.unit_m for b in bounds_m)
        return self.number(value, entry, key, where, low=0.0, low_open=True,
                           within=(float(f"{low:.6g}"), float(f"{high:.6g}")),
                           unit=f" {self.unit}")

    def coordinate(self, value: Any, entry: str, key: str, where: tuple[str, int]) -> float:
        """A coordinate or offset in the model unit, at most COORDINATE_M from the origin."""
        bound = float(f"{ranges.COORDINATE_M / self.unit_m:.6g}")
        return self.number(value, entry, key, where, within=(-bound, bound),
                           unit=f" {self.unit}")

    def table(self, value: Any, entry: str, key: str, where: tuple[str, int]) -> dict[str, Any]:
        if not isinstance(value, dict):
            raise self.fail(entry, f"{key}: expected a table, got {type(value).__name__}",
                            self.index.find(where[0], where[1], key))
        return value

    def string(self, value: Any, entry: str, key: str, where: tuple[str, int]) -> str:
        if not isinstance(value, str) or not value.strip():
            raise self.fail(entry, f"{key}: expected a non-empty string, got {brief(value)}",
                            self.index.find(where[0], where[1], key))
        if key == "name" and len(value.strip()) > ranges.MAX_NAME:
            raise self.fail(entry[:60] + "...", f"name: at most {ranges.MAX_NAME} characters, "
                            f"got {len(value.strip())}", self.index.find(where[0], where[1], key))
        return value.strip()

    def temperature_table(self, value: Any, entry: str, key: str, where: tuple[str, int], *,
                          within: tuple[float, float], unit: str, quantity: str = "value"
                          ) -> tuple[float, tuple[tuple[float, float], ...] | None]:
        """A positive number, or a table [[°C, value], ...] increasing in temperature:
        (the number or the table's value at 25 °C, the table or None)."""
        if not isinstance(value, list):
            return self.number(value, entry, key, where, low=0.0, low_open=True,
                               within=within, what=f" {unit}"), None
        line = self.index.find(*where, key)
        if len(value) < 2:
            raise self.fail(entry, f"{key}: a table needs at least two [°C, {unit}] points",
                            line)
        if len(value) > ranges.MAX_TABLE_ROWS:
            raise self.fail(entry, f"{key}: at most {ranges.MAX_TABLE_ROWS} rows, got "
                            f"{len(value)}", line)
        rows: list[tuple[float, float]] = []
        for j, row in enumerate(value):
            if not isinstance(row, list) or len(row) != 2:
                raise self.fail(entry, f"{key}[{j}]: expected [°C, {unit}], got {brief(row)}",
                                line)
            t = self.number(row[0], entry, f"{key}[{j}] temperature", where,
                            low=ABSOLUTE_ZERO_C, low_open=True, high=ranges.TEMPERATURE_C,
                            what=" °C")
            v = self.number(row[1], entry, f"{key}[{j}] {quantity}", where, low=0.0,
                            low_open=True, within=within, what=f" {unit}")
            if rows and t <= rows[-1][0]:
                raise self.fail(entry, f"{key}: table temperatures must increase, got "
                                f"{rows[-1][0]:g} then {t:g} °C", line)
            rows.append((t, v))
        ts = [r[0] for r in rows]
        vs = [r[1] for r in rows]
        at25 = vs[0] if 25.0 <= ts[0] else vs[-1] if 25.0 >= ts[-1] else next(
            vs[j - 1] + (vs[j] - vs[j - 1]) * (25.0 - ts[j - 1]) / (ts[j] - ts[j - 1])
            for j in range(1, len(ts)) if ts[j] >= 25.0)
        return float(at25), tuple(rows)

    def array_of_tables(self, data: dict[str, Any], key: str) -> list[dict[str, Any]]:
        value = data.get(key, [])
        if not isinstance(value, list) or not all(isinstance(v, dict) for v in value):
            raise self.fail(f"[[{key}]]", f"write each {key} as a [[{key}]] table",
                            self.index.find(key))
        return value

    def point(self, p: Any, entry: str, key: str, where: tuple[str, int]) -> tuple[float, float]:
        if not isinstance(p, list) or len(p) != 2:
            raise self.fail(entry, f"{key}: expected [x, y], got {brief(p)}",
                            self.index.find(*where, key.split("[")[0]))
        return (self.coordinate(p[0], entry, key, where),
                self.coordinate(p[1], entry, key, where))

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


def brief(value: Any) -> str:
    """A value as quoted in messages, at most one short line."""
    text = repr(value)
    return text if len(text) <= 60 else text[:45] + " ... " + text[-10:]
