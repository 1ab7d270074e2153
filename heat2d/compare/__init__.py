"""``heat2d compare``: two runs (result folders or models) figure by figure, with the
combined error bars, a verdict in plain words, and a difference map.

:func:`compare` returns the ``compare.json`` document; :func:`load_side` and
:func:`compare_sides` split it into reading and comparing; :func:`format_comparison` is
the text, :func:`plot_compare` the map and :func:`write_comparison` writes all three.
Two transient runs are compared by :func:`compare_transient` (peaks, hottest moment,
impedance, periodic peaks); a transient run against a steady one is refused.
"""

from .core import compare, compare_sides, same_mesh
from .files import write_comparison
from .plot import plot_compare
from .sides import Side, load_side
from .text import format_comparison
from .transient import compare_transient

__all__ = ["Side", "compare", "compare_sides", "compare_transient", "format_comparison",
           "load_side", "plot_compare", "same_mesh", "write_comparison"]
