"""Time response: the TR-BDF2 march (:func:`march`, its steady start
:func:`steady_start`) and what it reports (:class:`History`)."""

from .history import History
from .march import march, steady_start

__all__ = ["History", "march", "steady_start"]
