"""Parameter studies: the variant grid, the runners (here, local processes, a Dask
cluster), the digest store and the sweep table and plot.

:func:`sweep` and its :class:`SweepResult` and :class:`SweepProgress` are in
:mod:`.core`; reading ``--vary`` and the grid in :mod:`.grid`; the runners and
:class:`ClusterError` in :mod:`.runners`; the input digest and stored results in
:mod:`.store`; the CSV and the plot in :mod:`.table`. The ``heat2d sweep`` command is
:mod:`heat2d.cli.sweep`.
"""

from .core import SweepProgress, SweepResult, sweep
from .grid import parse_values, parse_vary
from .runners import DEFAULT_CONNECT_TIMEOUT_S, ClusterError
from .store import INPUTS_NAME, VARIANT_FORMATS, input_digest
from .table import CSV_NAME, PLOT_NAME, plot_sweep, read_csv

__all__ = [
    "CSV_NAME", "DEFAULT_CONNECT_TIMEOUT_S", "INPUTS_NAME", "PLOT_NAME", "VARIANT_FORMATS",
    "ClusterError", "SweepProgress", "SweepResult", "input_digest", "parse_values",
    "parse_vary", "plot_sweep", "read_csv", "sweep",
]
