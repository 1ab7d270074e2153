"""Model text -> :class:`Model`: the schema (frozen dataclasses, :mod:`.schema`), its
reader (:mod:`.reader`, with :mod:`.lines`, :mod:`.base`, :mod:`.parts`,
:mod:`.boundaries`, :mod:`.timeline` for the [transient] section and values against time,
:mod:`.electrical` for heat capacity, resistivity and currents) and the safe expression
evaluator (:mod:`.expr`). Exported here: the entry points and the schema names the rest
of heat2d uses."""

from .reader import from_dict, load, parse
from .schema import Boundary, Material, Model, Shape
from .timeline import Schedule, TransientSettings

__all__ = ["Boundary", "Material", "Model", "Schedule", "Shape", "TransientSettings",
           "from_dict", "load", "parse"]
