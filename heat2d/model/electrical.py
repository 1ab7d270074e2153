"""Material properties beyond conductivity, and current-carrying conductors.

:class:`MaterialPropertyReader` reads a material's heat capacity (``density``,
``specific_heat``: numbers or [°C, value] tables) and its electrical resistivity
(``resistivity``, ``resistivity_reference``, ``temperature_coefficient``), and the
``current`` keys of shapes, layers, stacks and repeated shapes. :func:`mixed_material`
builds the effective material of a via field or a covered layer: heat capacity ρc mixed
by volume fraction, electrical conductance 1/ρ by area fraction (parallel along the
depth).
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import replace
from typing import Any

from . import ranges
from .schema import ABSOLUTE_ZERO_C, Group, Material, Shape
from .timeline import Schedule, TimelineReader

CURRENT_KEYS = ("current", "current_pulse", "current_table", "current_steps")
POWER_SCHEDULE_KEYS = ("power_pulse", "power_table", "power_steps")


def mixed_material(name: str, kx: float, ky: float, note: str,
                   parts: Sequence[tuple[float, Material | None]],
                   metal: Material | None = None) -> Material:
    """A material of the given conductivities made of volume fractions ``parts``
    ((f_i, material_i); None = empty space, no capacity and no current).

    Heat capacity (exact for a mixture): ρc = Σ f_i ρ_i c_i, density ρ = Σ f_i ρ_i and
    specific_heat = ρc / ρ; a constituent without capacity leaves the mix without it
    (``lacks_capacity`` names it). Resistivity, conductances in parallel along the depth:
    1/ρ_eff = Σ f_i / ρ_i over the constituents that have one; the temperature coefficient
    and reference are those of ``metal`` when it conducts (else of the constituent with
    the largest share of the conductance).
    """
    solid = [(f, m) for f, m in parts if m is not None and f > 0]
    lacking = next((m.name for _, m in solid if not m.has_capacity), None)
    if lacking is None:
        lacking = next((m.lacks_capacity for _, m in solid if m.lacks_capacity), None)
    density = specific_heat = None
    if lacking is None and solid:
        rho = sum(f * float(m.density) for f, m in solid)
        rho_c = sum(f * float(m.density) * float(m.specific_heat) for f, m in solid)
        density, specific_heat = rho, rho_c / rho
    shares = [(f / float(m.resistivity), m) for f, m in solid if m.resistivity is not None]
    keys: dict[str, Any] = {}
    if shares:
        conductance = sum(s for s, _ in shares)
        lead = metal if metal is not None and metal.conducts else max(shares,
                                                                      key=lambda x: x[0])[1]
        keys = {"resistivity": 1.0 / conductance,
                "resistivity_reference": lead.resistivity_reference,
                "temperature_coefficient": lead.temperature_coefficient}
    return Material(name, kx, ky, note, density=density, specific_heat=specific_heat,
                    lacks_capacity=lacking, **keys)


class MaterialPropertyReader(TimelineReader):
    """Heat capacity and resistivity of materials; currents of shapes and groups."""

    materials: dict[str, Material]

    def property_keys(self, spec: dict[str, Any], entry: str, where: tuple[str, int]
                      ) -> dict[str, Any]:
        """Material keys beside k: density, specific_heat, resistivity and its law."""
        out: dict[str, Any] = {}
        for key, within, unit in (("density", ranges.DENSITY, "kg/m³"),
                                  ("specific_heat", ranges.SPECIFIC_HEAT, "J/(kg·K)")):
            if key in spec:
                out[key], out[f"{key}_table"] = self.temperature_table(
                    spec[key], entry, key, where, within=within, unit=unit)
        if "resistivity" in spec:
            out["resistivity"] = self.number(spec["resistivity"], entry, "resistivity", where,
                                             low=0.0, low_open=True,
                                             within=ranges.RESISTIVITY, what=" Ω·m")
        for key in ("resistivity_reference", "temperature_coefficient"):
            if key in spec and "resistivity" not in spec:
                raise self.fail(entry, f"{key} needs resistivity",
                                self.index.find(*where, key))
        if "resistivity_reference" in spec:
            out["resistivity_reference"] = self.number(
                spec["resistivity_reference"], entry, "resistivity_reference", where,
                low=ABSOLUTE_ZERO_C, low_open=True, high=ranges.TEMPERATURE_C, what=" °C")
        if "temperature_coefficient" in spec:
            out["temperature_coefficient"] = self.number(
                spec["temperature_coefficient"], entry, "temperature_coefficient", where,
                within=ranges.TEMPERATURE_COEFFICIENT, what=" 1/K")
        return out

    def time_keys(self, spec: dict[str, Any], entry: str, where: tuple[str, int], *,
                  void: bool, material: str | None, power: float | None,
                  group: bool = False) -> dict[str, Any]:
        """Shape or layer keys: the power schedule and, unless ``group`` (a repeat,
        whose current belongs to all copies together), the current."""
        for key in (*POWER_SCHEDULE_KEYS, *CURRENT_KEYS):
            if void and key in spec:
                raise self.fail(entry, f"{key}: a void shape takes no {key}",
                                self.index.find(*where, key))
        out: dict[str, Any] = {}
        schedule = self.schedule(spec, entry, where, "power", base=power or 0.0, unit="W",
                                 high=ranges.POWER_W)
        if schedule is not None:
            if "power_density" in spec:
                raise self.fail(entry, "a power schedule gives the power in W: drop "
                                "power_density", self.index.find(*where, "power_density"))
            if schedule.kind != "pulse":
                if "power" in spec:
                    key = "power_table" if schedule.kind == "linear" else "power_steps"
                    raise self.fail(entry, f"{key} gives the power from t = 0 on (its first "
                                    "value holds before): drop power",
                                    self.index.find(*where, "power"))
                out["power"] = schedule.initial
            out["schedule"] = schedule
        if not group:
            out.update(self.current_keys(spec, entry, where, material))
        return out

    def current_keys(self, spec: dict[str, Any], entry: str, where: tuple[str, int],
                     material: str | None) -> dict[str, Any]:
        """``current`` (A) and its schedule: {current, current_schedule} or {}."""
        if not any(k in spec for k in CURRENT_KEYS):
            return {}
        current = None
        if "current" in spec:
            current = self.number(spec["current"], entry, "current", where,
                                  within=(-ranges.CURRENT_A, ranges.CURRENT_A), what=" A")
        schedule = self.schedule(spec, entry, where, "current", base=current or 0.0,
                                 unit="A", low=-ranges.CURRENT_A, high=ranges.CURRENT_A)
        if schedule is not None and schedule.kind != "pulse":
            if current is not None:
                key = "current_table" if schedule.kind == "linear" else "current_steps"
                raise self.fail(entry, f"{key} gives the current from t = 0 on: drop current",
                                self.index.find(*where, "current"))
            current = schedule.initial
        if material is not None and not self.materials[material].conducts:
            key = next(k for k in CURRENT_KEYS if k in spec)
            raise self.fail(entry, f"{key}: material {material!r} has no resistivity and "
                            "carries no current (give it resistivity = Ω·m)",
                            self.index.find(*where, key))
        return {"current": current if current is not None else 0.0,
                "current_schedule": schedule}

    def group_current(self, spec: dict[str, Any], entry: str, where: tuple[str, int],
                      group: Group, shapes: Sequence[Shape]) -> Group:
        """The group with its current (all members with resistivity together)."""
        keys = self.current_keys(spec, entry, where, None)
        if not keys:
            return group
        if not any(not s.void and self.materials[str(s.material)].conducts for s in shapes):
            key = next(k for k in CURRENT_KEYS if k in spec)
            raise self.fail(entry, f"{key}: none of the {group.kind}'s shapes has a material "
                            "with resistivity", self.index.find(*where, key))
        if any(s.current is not None for s in shapes):
            inner = next(s.name for s in shapes if s.current is not None)
            raise self.fail(entry, f"current: given for the {group.kind} and for its shape "
                            f"{inner!r}; give it once", self.index.find(*where, "current"))
        return replace(group, current=keys["current"],
                       current_schedule=keys["current_schedule"])

    def check_capacity(self, shapes: Sequence[Shape]) -> None:
        """In a transient model every material of a non-void shape needs ρ and c."""
        if self.transient is None:
            return
        for sh in shapes:
            if sh.void:
                continue
            m = self.materials[str(sh.material)]
            if m.has_capacity:
                continue
            name = m.lacks_capacity or m.name
            line = self.index.find(f"materials.{name}") or sh.line
            used = "" if name == sh.material else f" (mixed into {sh.material!r})"
            raise self.fail(f"material \"{name}\"", "a transient model needs density and "
                            f"specific_heat (used by shape {sh.name!r}{used})", line)


def schedule_at_zero(value: float | None, schedule: Schedule | None) -> float | None:
    """A boundary value at t = 0: its schedule's value there, else the steady value."""
    if schedule is not None:
        return float(schedule.at(0.0))
    return value
