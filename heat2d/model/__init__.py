"""Model text -> :class:`Model`: the schema (frozen dataclasses), its reader and the safe
expression evaluator."""

from .reader import *  # noqa: F401,F403  (replaced by explicit exports below)
from .reader import (  # noqa: F401
    ABSOLUTE_ZERO_C,
    BOUNDARY_KEYS,
    MAX_MIN_ANGLE,
    SIDES,
    Boundary,
    Group,
    Interface,
    Material,
    MeshSettings,
    Model,
    Probe,
    Selector,
    Shape,
    from_dict,
    load,
    parse,
)
