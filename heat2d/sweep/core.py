"""Parameter sweeps: solve one model for every combination (or zipped lists) of param values.

:func:`sweep` is the library function (the ``heat2d sweep`` command is
:mod:`heat2d.cli.sweep`); this module holds it, :class:`SweepResult` and
:class:`SweepProgress`. The grid is laid out in :mod:`.grid`, run by :mod:`.runners`,
stored by :mod:`.store` and tabled and plotted by :mod:`.table`.

Variants that differ only in values (materials, powers, boundary values, limits) are
run one after another on the same worker, so each reuses the geometry, mesh, sparsity
pattern and assembly index arrays of the one before, and the factorization when the
matrix is unchanged (:func:`heat2d.pipeline.run` with ``reuse=``). The run order groups
variants by geometry, then by matrix; the table keeps the order of the grid.

Each variant's outputs go into its own folder with an ``inputs.json`` holding a hash of
the resolved model; a later sweep into the same folder skips variants whose hash
matches and reads their row back.
"""

from __future__ import annotations

from collections.abc import Callable, Mapping, Sequence
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any, NamedTuple

from ..errors import Heat2dError, ModelError
from ..model import Model
from .grid import _check_vary, _folder_names, _grid, _run_order, _Variant
from .runners import (
    DEFAULT_CONNECT_TIMEOUT_S,
    _connect,
    _run_here,
    _run_in_processes,
    _run_on_cluster,
    _Task,
    _worker_forget,
)
from .store import (
    VARIANT_FORMATS,
    _clear_stale,
    _replace_text,
    _store,
    _stored_row,
    adopt_legacy,
    input_digest,
)
from .table import CSV_NAME, PLOT_NAME, _columns, _csv_text, _row, param_units, plot_sweep

zip_ = zip
"""The builtin, for functions whose ``zip`` option shadows it."""


class SweepProgress(NamedTuple):
    """Told to the ``progress`` callback after each variant, skipped ones included."""

    done: int
    total: int
    failed: int
    skipped: int
    row: dict[str, Any]
    was_skipped: bool


@dataclass
class SweepResult:
    """The table of a sweep: one row per variant, in the order of the grid.

    Attributes
    ----------
    rows
        One dict per variant, keyed by ``columns``; ``None`` where a figure is missing.
    columns
        ``variant``, the varied params, ``max_temperature_c``, ``hot_spot_shape``, then
        ``probe:NAME`` (°C), ``heat_out_w:BOUNDARY`` (W), ``margin_k:SHAPE`` (limit minus
        the shape's max, K), ``solve_time_s``, ``status`` (``ok`` or ``failed``), ``error``.
    varied
        The varied param names, in the order given.
    skipped
        Names of the variants whose stored results were still valid and read back.
    out
        The output folder, or None when nothing was written.
    tracebacks
        Tracebacks of variants that failed inside heat2d, by variant name.
    units
        The unit of each param that can be told from the keys it feeds
        (:func:`heat2d.sweep.table.param_units`); the plot labels its axes with them.
    limits
        Each variant's temperature limits (``max_temperature``, °C) by shape, from its
        model; the plot draws them.
    """

    rows: list[dict[str, Any]]
    columns: list[str]
    varied: list[str]
    skipped: list[str] = field(default_factory=list)
    out: Path | None = None
    title: str = ""
    zipped: bool = False
    tracebacks: dict[str, str] = field(default_factory=dict)
    units: dict[str, str] = field(default_factory=dict)
    limits: dict[str, dict[str, float]] = field(default_factory=dict)

    @property
    def failed(self) -> list[dict[str, Any]]:
        """The rows of the variants that failed."""
        return [r for r in self.rows if r["status"] != "ok"]

    def column(self, name: str) -> list[Any]:
        """One column, top to bottom."""
        return [r.get(name) for r in self.rows]

    def write_csv(self, path: str | Path) -> Path:
        """Write the table as CSV: each number to the digits it carries (temperatures and
        margins to 0.001 K, heat flows to 6 significant digits, errors to 2, times to
        0.01 s, params as given; see :mod:`heat2d.sweep.table`), empty cells for missing."""
        path = Path(path)
        _replace_text(path, _csv_text(self.columns, self.rows, varied=self.varied))
        return path

    def plot(self, path: str | Path | None = None, *, fig=None):
        """Hot spot against the first varied param, one line per value of the others.

        Returns the matplotlib figure; saves it to ``path`` if given.
        """
        return plot_sweep(self, path, fig=fig)

    def __repr__(self) -> str:
        return (f"SweepResult({len(self.rows)} variants over {', '.join(self.varied)}: "
                f"{len(self.rows) - len(self.failed)} ok, {len(self.failed)} failed, "
                f"{len(self.skipped)} skipped)")


def sweep(model: Model, vary: Mapping[str, Sequence[float | str] | str], *,
          zip: bool = False, jobs: int = 1, cluster=None, out: str | Path | None = None,
          refine: float = 1.0, method: str = "auto", estimate: bool = False,
          png: bool = False, force: bool = False,
          progress: Callable[[SweepProgress], None] | None = None,
          connect_timeout: float = DEFAULT_CONNECT_TIMEOUT_S) -> SweepResult:
    """Solve ``model`` for every combination of the given param values.

    Parameters
    ----------
    model
        The base model (from :func:`heat2d.load`, with any fixed overrides applied).
    vary
        Param name -> values (numbers or expressions), or a string as on the command
        line (``"1,2,5"``, ``"0.5:2:4"``). Names must be params of the model.
    zip
        Pair the lists element by element (all of one length) instead of the full grid.
    jobs
        Local worker processes. Each gets a contiguous run of variants so that reuse
        of mesh and factorization still happens within it.
    cluster
        A Dask scheduler address (``"tcp://host:8786"``) or a ``distributed.Client``:
        run the variants on that cluster's workers instead. Needs the optional
        dependency ``distributed`` here and heat2d (same version) on the workers; the
        outputs come back to this machine, no shared folder is needed.
    out
        Folder for ``sweep.csv``, ``sweep.png`` and one subfolder per variant; None
        writes nothing and only returns the table.
    refine, method
        As for :func:`heat2d.solve`.
    estimate
        Estimate each variant's discretization error as ``heat2d run`` does (extra
        solves on other meshes, which are not reused across variants); adds the column
        ``max_temperature_error_k``. Off by default: check the mesh on one variant with
        ``heat2d run`` and sweep without it.
    png
        Also write each variant's temperature map (a few seconds each).
    force
        Run every variant even where stored results are still valid.
    progress
        Called with a :class:`SweepProgress` after each variant.
    connect_timeout
        Seconds to wait for the cluster's scheduler and a first worker.

    Returns
    -------
    SweepResult
        The table; variants that failed have ``status == "failed"`` and their error.

    Raises
    ------
    ModelError
        Before anything runs: an unknown param, an empty list, a malformed range or
        expression, ``zip`` lists of different lengths, ``jobs < 1``.
    ClusterError
        Before anything runs: the cluster cannot be reached, has no workers, or its
        workers cannot run this heat2d.
    """
    paired = zip
    vary = _check_vary(model, vary, paired)
    if not isinstance(jobs, int) or jobs < 1:
        raise ModelError(f"must be a whole number >= 1, got {jobs!r}", entry="--jobs")
    if cluster is not None and jobs != 1:
        raise ModelError("give either jobs (local processes) or a cluster, not both",
                         entry="--jobs")
    formats = (*VARIANT_FORMATS, "png") if png else VARIANT_FORMATS
    grid = _grid(vary, paired)
    variants = [_Variant(k, name, values)
                for k, (name, values) in enumerate(zip_(_folder_names(grid), grid))]
    client, own_client = (_connect(cluster, connect_timeout) if cluster is not None
                          else (None, False))
    try:
        return _sweep(model, vary, variants, paired=paired, client=client, jobs=jobs,
                      out=Path(out) if out is not None else None, refine=refine,
                      method=method, estimate=estimate, formats=formats, force=force,
                      progress=progress)
    finally:
        if client is not None:
            try:
                client.run(_worker_forget)
            except Exception:  # the cluster may be gone by now; nothing left to free
                pass
            if own_client:
                client.close()


def _sweep(model: Model, vary: dict[str, list], variants: list[_Variant], *, paired: bool,
           client, jobs: int, out: Path | None, refine: float, method: str, estimate: bool,
           formats: tuple[str, ...], force: bool, progress) -> SweepResult:
    for v in variants:
        try:
            v.model = model.with_params(**v.values)
        except ModelError as exc:
            v.error = exc.message()
            continue
        v.digest = input_digest(v.model, refine=refine, method=method, formats=formats,
                                estimate=estimate)
    if all(v.model is None for v in variants):
        # No value makes a valid model: bad input, refused before anything is written.
        raise ModelError(f"no variant is a valid model; the first, {variants[0].name}: "
                         f"{variants[0].error}", entry="--vary")

    total = len(variants)
    rows: list[dict[str, Any] | None] = [None] * total
    result = SweepResult(rows=[], columns=[], varied=list(vary), out=out,
                         title=model.title or model.stem, zipped=paired,
                         units={n: u for n, u in param_units(model).items() if n in vary},
                         limits={v.name: {s.name: s.max_temperature for s in v.model.shapes
                                          if s.max_temperature is not None}
                                 for v in variants if v.model is not None})
    counts = {"done": 0, "failed": 0}

    def record(v: _Variant, row: dict[str, Any], skipped: bool = False) -> None:
        rows[v.index] = row
        counts["done"] += 1
        counts["failed"] += row["status"] != "ok"
        if skipped:
            result.skipped.append(v.name)
        if progress is not None:
            progress(SweepProgress(counts["done"], total, counts["failed"],
                                   len(result.skipped), row, skipped))

    if out is not None:
        try:
            out.mkdir(parents=True, exist_ok=True)
        except OSError as exc:
            raise Heat2dError(f"cannot create output folder: {exc}", file=str(out)) from None

    todo: list[_Variant] = []
    for v in variants:
        if v.model is None:
            record(v, _row(v, {"index": v.index, "status": "failed", "error": v.error}))
            continue
        if out is not None:
            adopt_legacy(out, v)         # a folder named as earlier heat2d sweeps did
        stored = None if (out is None or force) else _stored_row(out / v.name, v.digest)
        if stored is not None:
            record(v, {**stored, "variant": v.name}, skipped=True)
            continue
        if out is not None:
            _clear_stale(out / v.name)
        todo.append(v)

    by_index = {v.index: v for v in todo}

    def finish(outcome: dict[str, Any]) -> None:
        v = by_index[outcome["index"]]
        if outcome["status"] == "ok" and out is not None:
            outcome = _store(out / v.name, v, outcome)
        if outcome.get("traceback") and outcome["status"] != "ok":
            result.tracebacks[v.name] = outcome["traceback"]
        record(v, _row(v, outcome))

    tasks = [_Task(v.index, v.model, refine, method, formats, estimate,
                   str(out / v.name) if out is not None else None,
                   ship=client is not None and out is not None)
             for v in _run_order(todo, refine)]
    if client is not None:
        _run_on_cluster(client, tasks, finish)
    elif jobs > 1 and len(tasks) > 1:
        _run_in_processes(tasks, jobs, finish)
    else:
        _run_here(tasks, finish)

    result.rows = [r for r in rows if r is not None]
    result.columns = _columns(result.varied, result.rows)
    result.rows = [{c: r.get(c) for c in result.columns} for r in result.rows]
    if out is not None:
        result.write_csv(out / CSV_NAME)
        plot_sweep(result, out / PLOT_NAME)
    return result
