"""The checked model as frozen dataclasses, and the constants they share.

:class:`Model` and its parts (:class:`Material`, :class:`Shape`, :class:`Selector`,
:class:`Boundary`, :class:`Group`, :class:`Interface`, :class:`Probe`,
:class:`MeshSettings`), the length units, sides and physical limits. Nothing here reads
text: the reader builds these objects and registers its checker with
:func:`use_checker`, so that :meth:`Model.edited` and the ``with_*`` methods check an
edited copy of the data exactly as a file is checked, without this module importing the
reader.
"""

from __future__ import annotations

import copy
from collections.abc import Callable, Mapping, Sequence
from dataclasses import dataclass, field
from pathlib import Path
from typing import TYPE_CHECKING, Any

import numpy as np

from ..errors import ModelError

if TYPE_CHECKING:
    from .timeline import Schedule, TransientSettings

LENGTH_UNITS: dict[str, float] = {"m": 1.0, "mm": 1e-3, "um": 1e-6}
"""Metres per model length unit."""
SIDES = ("left", "right", "top", "bottom")
MAX_MIN_ANGLE = 34.0
"""Largest minimum angle (degrees) for which the mesher is known to terminate."""
ABSOLUTE_ZERO_C = -273.15

BOUNDARY_KEYS = {"temperature": "temperature", "heat_flux": "heat_flux", "h": "convection"}
"""Model key that selects each boundary kind."""

Table = tuple[tuple[float, float], ...]
"""A property against temperature: ((°C, value), ...), temperatures increasing."""

RESISTIVITY_FLOOR = 1e-3
"""ρ(T) is held at or above this fraction of ρ_ref (a linear law never reaches 0)."""


def _table_at(const: float, table: Table | None, temperature: np.ndarray
              ) -> tuple[np.ndarray, np.ndarray]:
    """Value and slope of a constant or a piecewise-linear table (held beyond its ends)."""
    temperature = np.asarray(temperature, dtype=float)
    if table is None:
        return np.full_like(temperature, const), np.zeros_like(temperature)
    t, v = np.array(table).T
    slope = np.diff(v) / np.diff(t)
    seg = np.clip(np.searchsorted(t, temperature) - 1, 0, len(t) - 2)
    inside = (temperature >= t[0]) & (temperature <= t[-1])
    return np.interp(temperature, t, v), np.where(inside, slope[seg], 0.0)


@dataclass(frozen=True)
class Material:
    """A conductor: ``kx``, ``ky`` in W/(m·K) along the model axes.

    A temperature-dependent axis has a table (piecewise linear in °C, held constant
    beyond its ends); ``kx``/``ky`` then hold its value at 25 °C. For transient runs
    ``density`` (kg/m³) and ``specific_heat`` (J/(kg·K)), each a number or a table (the
    number then its value at 25 °C); for current, the electrical ``resistivity`` (Ω·m) at
    ``resistivity_reference`` (°C) and its ``temperature_coefficient`` (1/K).
    """

    name: str
    kx: float
    ky: float
    note: str = ""
    kx_table: Table | None = None
    ky_table: Table | None = None
    density: float | None = None
    specific_heat: float | None = None
    density_table: Table | None = None
    specific_heat_table: Table | None = None
    resistivity: float | None = None
    resistivity_reference: float = 20.0
    temperature_coefficient: float = 0.0
    lacks_capacity: str | None = None
    """For a mixed material without ρc: the constituent material that lacks it."""

    @property
    def has_capacity(self) -> bool:
        """True when density and specific heat are both known."""
        return self.density is not None and self.specific_heat is not None

    @property
    def varies_capacity(self) -> bool:
        """True when ρc depends on temperature."""
        return self.density_table is not None or self.specific_heat_table is not None

    @property
    def conducts(self) -> bool:
        """True when the material has an electrical resistivity (can carry current)."""
        return self.resistivity is not None

    def capacity_at(self, temperature: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """ρc (J/(m³·K)) and d(ρc)/dT at temperatures T (°C); tables piecewise linear,
        held constant beyond their ends (as :meth:`k_at`)."""
        if not self.has_capacity:
            raise ValueError(f"material {self.name!r} has no density and specific_heat")
        rho, drho = _table_at(float(self.density), self.density_table, temperature)
        c, dc = _table_at(float(self.specific_heat), self.specific_heat_table, temperature)
        return rho * c, drho * c + rho * dc

    def resistivity_at(self, temperature: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """ρ(T) (Ω·m) and dρ/dT: ρ = ρ_ref (1 + α (T − T_ref)), floored at
        :data:`RESISTIVITY_FLOOR`·ρ_ref (the slope is 0 where floored)."""
        if self.resistivity is None:
            raise ValueError(f"material {self.name!r} has no resistivity")
        temperature = np.asarray(temperature, dtype=float)
        ref, alpha = self.resistivity, self.temperature_coefficient
        linear = ref * (1 + alpha * (temperature - self.resistivity_reference))
        floor = RESISTIVITY_FLOOR * ref
        return (np.maximum(linear, floor),
                np.where(linear > floor, ref * alpha, 0.0) + 0.0 * temperature)

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
        kx, dkx = _table_at(self.kx, self.kx_table, temperature)
        ky, dky = _table_at(self.ky, self.ky_table, temperature)
        return kx, ky, dkx, dky


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
    schedule: Schedule | None = None
    """Power (W) against time in a transient model; ``power`` is then the value before
    t = 0 and between pulses."""
    current: float | None = None
    """Current (A) through the shape along the depth (None: not a conductor alone)."""
    current_schedule: Schedule | None = None
    """Current (A) against time in a transient model."""

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
    schedules: tuple[tuple[str, Schedule], ...] = ()
    """Values against time in a transient model: ("temperature" | "ambient" | "h",
    piecewise-linear schedule); the base key keeps the steady value."""

    def schedule(self, key: str) -> Schedule | None:
        """The schedule of ``key`` (temperature, ambient or h), or None."""
        return dict(self.schedules).get(key)

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
    current: float | None = None
    """Current (A) through all members with resistivity together, along the depth."""
    current_schedule: Schedule | None = None


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
class Cut:
    """A named cut line through the body: a polyline of ``points`` (model units), open
    (from outline to outline) or closed (last point equal to the first). The heat
    reported for it crosses from the side left of the line, walking from the first point
    to the last (inside a closed line), to the other side."""

    name: str
    index: int
    points: tuple[tuple[float, float], ...]
    line: int | None = None

    @property
    def closed(self) -> bool:
        return len(self.points) > 3 and self.points[0] == self.points[-1]


@dataclass(frozen=True)
class MeshSettings:
    """Target edge length (model units; None = automatic), minimum angle (degrees), for
    adaptive refinement the accuracy wanted on the max temperature (K) and the node
    budget, and the node limit: the most nodes any mesh may have (checked on an estimate
    before meshing)."""

    size: float | None = None
    min_angle: float = 30.0
    accuracy: float | None = None
    max_nodes: int = 200_000
    node_limit: int = 5_000_000


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
    cuts: tuple[Cut, ...] = ()
    transient: TransientSettings | None = None
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
        return _checked(data, source=self.source, params=self.overrides, paint_order=order)

    def with_params(self, **values: float | str) -> Model:
        """The model with parameters of ``[params]`` set (numbers or expressions)."""
        unknown = sorted(set(values) - {name for name, _ in self.params})
        if unknown:
            raise ModelError(f"no such parameter in [params] to set (known: "
                             f"{', '.join(n for n, _ in self.params) or 'none'})",
                             file=self.source, entry=f"param \"{unknown[0]}\"")
        merged = {**self.overrides, **values}
        return _checked(copy.deepcopy(dict(self.data)), source=self.source, params=merged,
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

    @property
    def is_transient(self) -> bool:
        """True when the model has a [transient] section."""
        return self.transient is not None

    @property
    def conductors(self) -> tuple[tuple[str, tuple[Shape, ...], float], ...]:
        """(name, member shapes carrying current, current A) of each shape or group that
        takes a current; a group's members are those whose material has resistivity."""
        out = []
        for sh in self.shapes:
            if sh.current is not None:
                out.append((sh.name, (sh,), sh.current))
        for g in self.groups:
            if g.current is not None:
                members = tuple(s for s in self.members(g.name)
                                if not s.void and self.material(str(s.material)).conducts)
                out.append((g.name, members, g.current))
        return tuple(out)

    @property
    def has_current(self) -> bool:
        """True when any conductor carries a current (Joule heating)."""
        return bool(self.conductors)

    @property
    def used_materials(self) -> tuple[Material, ...]:
        """The materials of non-void shapes, once each, in file order."""
        names = {s.material for s in self.shapes if not s.void}
        return tuple(m for m in self.materials if m.name in names)

    @property
    def transient_nonlinear(self) -> bool:
        """True when a transient march needs Newton's method: :attr:`nonlinear`, a used
        material's ρc depends on temperature, or a current flows through a material whose
        resistivity depends on temperature."""
        if self.nonlinear or any(m.varies_capacity for m in self.used_materials):
            return True
        return any(self.material(str(s.material)).temperature_coefficient != 0
                   for _, members, _ in self.conductors for s in members)

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


Checker = Callable[..., "Model"]
"""Checks model data and builds a :class:`Model`: ``check(data, *, source, params,
paint_order)``, as :func:`heat2d.model.from_dict`."""

_checker: Checker | None = None


def use_checker(check: Checker) -> None:
    """Set the function that :meth:`Model.edited` and the ``with_*`` methods check edited
    model data with (the reader registers its ``from_dict`` when it is imported)."""
    global _checker
    _checker = check


def _checked(data: Mapping[str, Any], *, source: str, params: Mapping[str, float | str],
             paint_order: Sequence[tuple[str, int]]) -> Model:
    if _checker is None:                                # only if the reader was never imported
        raise RuntimeError("heat2d.model.reader is not loaded: no model checker")
    return _checker(data, source=source, params=params, paint_order=paint_order)
