"""Model text -> :class:`Model`: the schema (frozen dataclasses, :mod:`.schema`), its
reader (:mod:`.reader`, with :mod:`.lines`, :mod:`.base`, :mod:`.parts` and
:mod:`.boundaries`) and the safe expression evaluator (:mod:`.expr`). Exported here:
the entry points and the schema names the rest of heat2d uses."""

from .reader import from_dict, load, parse
from .schema import Boundary, Model, Shape

__all__ = ["Boundary", "Model", "Shape", "from_dict", "load", "parse"]
