"""Verification against published closed-form solutions, run on the user's installation.

The cases are data: ``cases.toml`` (the table: per case a model file of ``models/``,
its source, and per check the figure read from the run's summary, the reference value,
its tolerance and the tolerance's basis), read by :mod:`.table`; :mod:`.run` solves them
and makes the check records; :mod:`.report` prints and writes them; the formulas behind
the reference values are in :mod:`.closed_forms`, and the manufactured-solution study in
:mod:`.manufactured`. ``heat2d verify`` (heat2d/cli/verify.py) is the command.
"""

from .closed_forms import (
    composite_wall_flux,
    cylinder_heat_rate,
    fin_convective_tip,
    kirchhoff_slab,
    plate_series,
    radiating_face,
    rod_generation,
    slab_generation,
)
from .report import format_table, plot_convergence, write_outputs
from .run import CASES, Record, verify
from .table import (
    Book,
    Case,
    Check,
    Table,
    TableError,
    Tolerance,
    load_model,
    model_file,
    read_table,
)

__all__ = [
    "CASES", "Book", "Case", "Check", "Record", "Table", "TableError", "Tolerance",
    "composite_wall_flux", "cylinder_heat_rate", "fin_convective_tip", "format_table",
    "kirchhoff_slab", "load_model", "model_file", "plot_convergence", "plate_series",
    "radiating_face", "read_table", "rod_generation", "slab_generation", "verify",
    "write_outputs",
]
