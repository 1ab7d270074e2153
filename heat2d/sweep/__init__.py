"""Parameter studies: the variant grid, the runners (here, local processes, a Dask
cluster), the digest store and the sweep table and plot."""

from .core import *  # noqa: F401,F403
from .core import (  # noqa: F401
    VARIANT_FORMATS,
    ClusterError,
    SweepProgress,
    SweepResult,
    add_sweep_arguments,
    input_digest,
    parse_values,
    parse_vary,
    plot_sweep,
    read_csv,
    run_sweep_command,
    sweep,
)
