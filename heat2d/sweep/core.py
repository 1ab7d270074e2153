"""Parameter sweeps: solve one model for every combination (or zipped lists) of param values.

:func:`sweep` is the library function; :func:`add_sweep_arguments` and
:func:`run_sweep_command` are the ``heat2d sweep`` command on top of it.

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

import argparse
import csv
import dataclasses
import hashlib
import itertools
import json
import math
import os
import re
import shutil
import sys
import tempfile
import textwrap
import threading
import time
import traceback
from collections.abc import Callable, Mapping, Sequence
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any, NamedTuple

from ..errors import Heat2dError, ModelError
from ..model import Model
from ..model.expr import ExpressionError, evaluate
from ..version import __version__

CSV_NAME = "sweep.csv"
PLOT_NAME = "sweep.png"
INPUTS_NAME = "inputs.json"
"""Written beside each variant's outputs: the input hash, the values and the table row."""
VARIANT_FORMATS = ("vtu", "json", "txt")
"""Outputs written for each variant (``png`` is added on request: it takes seconds)."""
DEFAULT_CONNECT_TIMEOUT_S = 10.0
WORKER_CHECK_S = 5.0
"""While waiting for a cluster's results, check this often that the workers are still there."""
MAX_FOLDER_NAME = 120
zip_ = zip
"""The builtin, for functions whose ``zip`` option shadows it."""

FIXED_COLUMNS = ("max_temperature_c", "max_temperature_error_k", "hot_spot_shape")
"""``max_temperature_error_k`` only when the error estimate is asked for."""
TAIL_COLUMNS = ("solve_time_s", "status", "error")
COLUMN_GROUPS = (("probe:", "probes"), ("heat_out_w:", "boundaries"), ("margin_k:", "limits"))
"""Per-name columns: prefix and the summary section they come from."""


class ClusterError(Heat2dError):
    """The Dask cluster cannot be reached or used (no scheduler, no workers, no heat2d there)."""


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
    """

    rows: list[dict[str, Any]]
    columns: list[str]
    varied: list[str]
    skipped: list[str] = field(default_factory=list)
    out: Path | None = None
    title: str = ""
    zipped: bool = False
    tracebacks: dict[str, str] = field(default_factory=dict)

    @property
    def failed(self) -> list[dict[str, Any]]:
        """The rows of the variants that failed."""
        return [r for r in self.rows if r["status"] != "ok"]

    def column(self, name: str) -> list[Any]:
        """One column, top to bottom."""
        return [r.get(name) for r in self.rows]

    def write_csv(self, path: str | Path) -> Path:
        """Write the table as CSV (numbers in full precision, empty cells for missing)."""
        path = Path(path)
        _replace_text(path, _csv_text(self.columns, self.rows))
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


# ---------------------------------------------------------------------------
# Reading --vary


def parse_values(text: str, *, name: str = "value") -> list[float | str]:
    """Values from ``V1,V2,...``; an item ``start:stop:count`` is ``count`` evenly spaced
    values from start to stop, both included.

    Items that are not numbers are kept as expressions (checked by :func:`sweep`).

    Raises
    ------
    ModelError
        Empty list, empty item or a malformed range.
    """
    entry = f"--vary {name}"
    if not text.strip():
        raise ModelError("empty value list: give V1,V2,... or start:stop:count", entry=entry)
    out: list[float | str] = []
    for item in _split_top_level(text):
        item = item.strip()
        if not item:
            raise ModelError(f"empty value in {text!r}", entry=entry)
        if ":" in item:
            out += _range(item, entry)
        else:
            out.append(_number_or_expression(item))
    return out


def _split_top_level(text: str) -> list[str]:
    """Split at commas outside parentheses (``min(a, b)`` stays whole)."""
    parts, depth, start = [], 0, 0
    for i, ch in enumerate(text):
        depth += (ch == "(") - (ch == ")")
        if ch == "," and depth == 0:
            parts.append(text[start:i])
            start = i + 1
    parts.append(text[start:])
    return parts


def _range(item: str, entry: str) -> list[float]:
    parts = item.split(":")
    problem = "expected start:stop:count"
    if len(parts) == 3:
        try:
            start, stop = float(parts[0]), float(parts[1])
            count = float(parts[2])
        except ValueError:
            pass
        else:
            if not (math.isfinite(start) and math.isfinite(stop)):
                problem = "start and stop must be finite numbers"
            elif count != int(count) or count < 1:
                problem = f"count must be a whole number >= 1, got {parts[2].strip()}"
            else:
                n = int(count)
                if n == 1:
                    return [start]
                # Evenly spaced, rounded to 12 significant digits so that 0.1 steps stay
                # 0.1 steps (the CSV shows the value a `--set` would use).
                return [float(f"{start + (stop - start) * k / (n - 1):.12g}") for k in range(n)]
    raise ModelError(f"malformed range {item!r}: {problem}", entry=entry)


def _number_or_expression(item: str) -> float | str:
    try:
        value = float(item)
    except ValueError:
        return item
    return value if math.isfinite(value) else item


def parse_vary(items: Sequence[str]) -> dict[str, list[float | str]]:
    """``["NAME=V1,V2", "NAME2=start:stop:count", ...]`` -> ``{NAME: [values], ...}``.

    Raises
    ------
    ModelError
        Missing ``=``, a name given twice, an empty list or a malformed range.
    """
    out: dict[str, list[float | str]] = {}
    for item in items:
        name, sep, values = item.partition("=")
        name = name.strip()
        if not sep or not name:
            raise ModelError(f"expected NAME=V1,V2,... or NAME=start:stop:count, got {item!r}",
                             entry="--vary")
        if name in out:
            raise ModelError("given twice; list all its values in one --vary",
                             entry=f"--vary {name}")
        out[name] = parse_values(values, name=name)
    return out


def _check_vary(model: Model, vary: Mapping[str, Any], paired: bool
                ) -> dict[str, list[float | str]]:
    """The value lists, checked against the model's params before anything runs."""
    if not vary:
        raise ModelError("nothing to vary: give at least one NAME=V1,V2,...", entry="--vary")
    known = [n for n, _ in model.params]
    names = dict(model.params)
    out: dict[str, list[float | str]] = {}
    for name, values in vary.items():
        entry = f"--vary {name}"
        if name not in names:
            raise ModelError(f"no such parameter in [params] to vary (known: "
                             f"{', '.join(known) or 'none'})", file=model.source, entry=entry)
        if isinstance(values, str):
            values = parse_values(values, name=name)
        elif isinstance(values, int | float):
            values = [values]
        values = list(values)
        if not values:
            raise ModelError("empty value list", entry=entry)
        for v in values:
            if isinstance(v, bool) or not isinstance(v, int | float | str):
                raise ModelError(f"expected numbers or expressions, got {v!r}", entry=entry)
            if isinstance(v, str):
                try:
                    evaluate(v, names)
                except ExpressionError as exc:
                    raise ModelError(str(exc), entry=entry) from None
            elif not math.isfinite(v):
                raise ModelError(f"must be finite, got {v}", entry=entry)
        out[name] = [float(v) if isinstance(v, int | float) else v for v in values]
    if paired:
        lengths = {len(v) for v in out.values()}
        if len(lengths) > 1:
            counts = ", ".join(f"{n}: {len(v)}" for n, v in out.items())
            raise ModelError(f"--zip needs lists of one length ({counts})", entry="--vary")
    return out


# ---------------------------------------------------------------------------
# Variants


@dataclass
class _Variant:
    index: int
    name: str
    values: dict[str, float | str]
    model: Model | None = None
    error: str | None = None
    digest: str = ""


def _grid(vary: dict[str, list[float | str]], paired: bool) -> list[dict[str, float | str]]:
    names = list(vary)
    if paired:
        count = len(next(iter(vary.values())))
        return [{n: vary[n][k] for n in names} for k in range(count)]
    return [dict(zip(names, combo, strict=True))
            for combo in itertools.product(*(vary[n] for n in names))]


def _show(value: float | str) -> str:
    return format(value, ".10g") if isinstance(value, float) else str(value)


def _folder_names(grid: list[dict[str, float | str]]) -> list[str]:
    """``NAME=VALUE,NAME=VALUE`` per variant, made safe for file systems and unique."""
    names, used = [], set()
    for k, values in enumerate(grid):
        name = ",".join(f"{n}={_show(v)}" for n, v in values.items())
        name = re.sub(r"[^A-Za-z0-9._=+,-]", "_", name)
        if len(name) > MAX_FOLDER_NAME:
            name = f"variant{k + 1:04d}"
        base, copy = name, 2
        while name in used:
            name, copy = f"{base}~{copy}", copy + 1
        used.add(name)
        names.append(name)
    return names


def _canonical(value: Any) -> Any:
    """The model's content as nested tuples, floats exact; no file name or line numbers."""
    if dataclasses.is_dataclass(value) and not isinstance(value, type):
        return (type(value).__name__,) + tuple(
            (f.name, _canonical(getattr(value, f.name))) for f in dataclasses.fields(value)
            if f.compare and f.name not in ("source", "line"))
    if isinstance(value, tuple | list):
        return tuple(_canonical(v) for v in value)
    if isinstance(value, float):
        return value.hex()
    return value


def input_digest(model: Model, *, refine: float = 1.0, method: str = "auto",
                 formats: Sequence[str] = VARIANT_FORMATS, estimate: bool = False) -> str:
    """A hash of everything a variant's outputs depend on: the resolved model content,
    the run options and the heat2d version. Comments, layout and the file's path do not
    count; any value, name or order that reaches the model does."""
    content = repr((_canonical(model), float(refine).hex(), method, tuple(formats),
                    bool(estimate), __version__))
    return hashlib.sha256(content.encode("utf-8")).hexdigest()


def _matrix_key(model: Model) -> tuple:
    """What the conduction matrix depends on beyond the mesh (not powers, ambients or
    fixed temperatures): variants with equal keys share one factorization."""
    return (model.materials, tuple(s.material for s in model.shapes),
            tuple((b.kind, b.h, b.emissivity, b.surroundings) for b in model.boundaries),
            tuple(i.resistance for i in model.interfaces))


def _run_order(variants: list[_Variant], refine: float) -> list[_Variant]:
    """Variants grouped by geometry, then by matrix, each group in grid order."""
    from ..pipeline import geometry_key

    groups: dict[Any, dict[Any, list[_Variant]]] = {}
    for v in variants:
        groups.setdefault(geometry_key(v.model, refine), {}).setdefault(
            _matrix_key(v.model), []).append(v)
    return [v for g in groups.values() for sub in g.values() for v in sub]


def _chunks(items: list, count: int) -> list[list]:
    """``count`` contiguous chunks of near-equal length (none empty)."""
    count = max(1, min(count, len(items)))
    size, extra = divmod(len(items), count)
    out, start = [], 0
    for k in range(count):
        end = start + size + (k < extra)
        out.append(items[start:end])
        start = end
    return out


# ---------------------------------------------------------------------------
# Running one variant (in this process, a local worker process or a Dask worker)


@dataclass(frozen=True)
class _Task:
    index: int
    model: Model
    refine: float
    method: str
    formats: tuple[str, ...]
    estimate: bool
    folder: str | None          # write the outputs here (same file system)
    ship: bool                  # return the output files as bytes instead


class _Reuse:
    """The last result of one worker thread, offered to the next variant as ``reuse``."""

    def __init__(self) -> None:
        self.last = None


_WORKER_STATE: dict[int, _Reuse] = {}
"""Per worker thread (keyed by thread id) in worker processes and Dask workers."""


def _metrics(summary: dict[str, Any]) -> dict[str, Any]:
    """The table figures of one solved variant."""
    row: dict[str, Any] = {"max_temperature_c": summary["temperature"]["max"]}
    if "max_error" in summary["temperature"]:
        row["max_temperature_error_k"] = summary["temperature"]["max_error"]
    row["hot_spot_shape"] = summary["hot_spot"]["shape"]
    for name, t in summary["probes"].items():
        row[f"probe:{name}"] = t
    for name, b in summary["boundaries"].items():
        row[f"heat_out_w:{name}"] = b["heat_out_w"]
    for name, lim in summary["limits"].items():
        row[f"margin_k:{name}"] = lim["margin"]
    return row


def _compute(task: _Task, state: _Reuse) -> tuple[dict[str, Any], Any]:
    """Solve one variant; failures become an outcome, never an exception."""
    start = time.perf_counter()
    try:
        result = _solve(task, state)
    except Heat2dError as exc:
        return {"index": task.index, "status": "failed", "error": exc.message(),
                "traceback": traceback.format_exc()}, None
    except Exception as exc:  # recorded for this variant; the others go on
        return {"index": task.index, "status": "failed",
                "error": f"internal error: {type(exc).__name__}: {exc}",
                "traceback": traceback.format_exc()}, None
    outcome = {"index": task.index, "status": "ok", "error": "", "traceback": None,
               "fields": {**_metrics(result.summary),
                          "solve_time_s": time.perf_counter() - start}}
    return outcome, result


def _solve(task: _Task, state: _Reuse):
    """:func:`heat2d.pipeline.run` with the worker's last result as ``reuse``.

    An adaptive model is never given ``reuse``: its mesh follows its own solution.
    """
    from ..pipeline import run

    adaptive = task.model.adaptive
    result = run(task.model, refine=task.refine, method=task.method,
                 reuse=None if adaptive else state.last, estimate=task.estimate)
    state.last = None if adaptive else result
    return result


def _save(task: _Task, outcome: dict[str, Any], result) -> dict[str, Any]:
    """Write (or pack, for a remote worker) the variant's outputs into the outcome."""
    from ..post.writers import write

    try:
        if task.ship:
            with tempfile.TemporaryDirectory(prefix="heat2d-variant-") as tmp:
                files = write(result, tmp, formats=task.formats)
                outcome["files"] = {f.name: f.read_bytes() for f in files}
        elif task.folder is not None:
            outcome["files"] = [f.name for f in write(result, task.folder,
                                                      formats=task.formats)]
    except Heat2dError as exc:
        outcome.update(status="failed", error=exc.message(), traceback=traceback.format_exc())
        outcome.pop("fields", None)
    return outcome


def _worker_run(task: _Task) -> dict[str, Any]:
    """One variant on a worker (process pool or Dask), reusing that thread's last result."""
    state = _WORKER_STATE.setdefault(threading.get_ident(), _Reuse())
    outcome, result = _compute(task, state)
    return _save(task, outcome, result) if result is not None else outcome


def _worker_forget() -> None:
    """Drop the results a worker keeps for reuse (run on every Dask worker at the end)."""
    _WORKER_STATE.clear()


def _worker_version() -> str:
    return __version__


# ---------------------------------------------------------------------------
# The sweep


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

    total = len(variants)
    rows: list[dict[str, Any] | None] = [None] * total
    result = SweepResult(rows=[], columns=[], varied=list(vary), out=out,
                         title=model.title or model.stem, zipped=paired)
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


def _row(v: _Variant, outcome: dict[str, Any]) -> dict[str, Any]:
    params = dict(v.model.params) if v.model is not None else {}
    row: dict[str, Any] = {"variant": v.name}
    for name, given in v.values.items():
        row[name] = params.get(name, given)
    row.update(outcome.get("fields", {}))
    row["status"] = outcome["status"]
    row["error"] = outcome.get("error") or ""
    return row


def _columns(varied: list[str], rows: list[dict[str, Any]]) -> list[str]:
    named: dict[str, list[str]] = {prefix: [] for prefix, _ in COLUMN_GROUPS}
    for r in rows:
        for key in r:
            for prefix in named:
                if key.startswith(prefix) and key not in named[prefix]:
                    named[prefix].append(key)
    fixed = [c for c in FIXED_COLUMNS if c != "max_temperature_error_k"
             or any(c in r for r in rows)]
    return ["variant", *varied, *fixed, *(c for cols in named.values() for c in cols),
            *TAIL_COLUMNS]


def _run_here(tasks: list[_Task], finish) -> None:
    """In this process, one variant after the other.

    (Writing a variant's files in a thread while the next one solves was tried: the
    two contend for the interpreter lock and the sweep got no faster.)
    """
    state = _Reuse()
    for task in tasks:
        outcome, result = _compute(task, state)
        finish(_save(task, outcome, result) if result is not None else outcome)


def _run_in_processes(tasks: list[_Task], jobs: int, finish) -> None:
    """One single-worker process per chunk, so each process takes its chunk in order."""
    import multiprocessing
    from concurrent.futures import ProcessPoolExecutor, as_completed

    context = multiprocessing.get_context("spawn")
    chunks = _chunks(tasks, jobs)
    pools = [ProcessPoolExecutor(max_workers=1, mp_context=context) for _ in chunks]
    try:
        futures = {pool.submit(_worker_run, t): t for pool, chunk in zip_(pools, chunks)
                   for t in chunk}
        for fut in as_completed(futures):
            finish(_outcome(fut, futures[fut]))
    finally:
        for pool in pools:
            pool.shutdown(wait=True, cancel_futures=True)


def _outcome(fut, task: _Task) -> dict[str, Any]:
    try:
        return fut.result()
    except Exception as exc:  # the worker died or could not run the task
        return {"index": task.index, "status": "failed",
                "error": f"worker failed: {type(exc).__name__}: {exc}",
                "traceback": traceback.format_exc()}


def _connect(cluster, timeout: float):
    """A client for ``cluster`` (address or Client), checked to have workers running this
    heat2d; returns (client, whether we opened it)."""
    try:
        from distributed import Client
    except ImportError:
        raise ClusterError("running on a cluster needs the optional dependency "
                           "'distributed': pip install \"heat2d[cluster]\"",
                           entry="--cluster") from None
    own = not isinstance(cluster, Client)
    where = str(cluster) if own else "the given client"
    client = None
    try:
        client = Client(cluster, timeout=timeout, set_as_default=False) if own else cluster
        client.wait_for_workers(1, timeout=timeout)
        versions = set(client.run(_worker_version).values())
    except Exception as exc:  # OSError, TimeoutError, ValueError from a bad address, ...
        if own and client is not None:
            client.close()
        reason = str(exc).splitlines()[0] if str(exc) else type(exc).__name__
        if isinstance(exc, ModuleNotFoundError | ImportError):
            reason = f"the workers cannot import heat2d ({reason})"
        raise ClusterError(f"cannot use the Dask cluster at {where}: {reason}",
                           entry="--cluster") from None
    if versions != {__version__}:
        if own:
            client.close()
        raise ClusterError(f"the workers run heat2d {', '.join(sorted(versions))}, this is "
                           f"{__version__}; install the same version there", entry="--cluster")
    return client, own


def _run_on_cluster(client, tasks: list[_Task], finish) -> None:
    """One chunk per worker thread; each variant is pinned to its chunk's worker.

    Pinned tasks would wait for ever for a worker that has left, so every few seconds
    the workers still there are checked; the variants of one that left are cancelled
    and recorded as failed (a re-run solves them again).
    """
    import queue

    slots = [addr for addr, info in client.scheduler_info()["workers"].items()
             for _ in range(max(1, int(info.get("nthreads", 1))))]
    done: queue.Queue = queue.Queue()
    pending: dict[str, tuple[Any, _Task, str]] = {}
    for addr, chunk in zip_(slots, _chunks(tasks, len(slots))):
        for t in chunk:
            fut = client.submit(_worker_run, t, workers=[addr], allow_other_workers=False,
                                pure=False, key=f"heat2d-variant-{t.index}-{os.urandom(6).hex()}")
            pending[fut.key] = (fut, t, addr)
            fut.add_done_callback(lambda f: done.put(f.key))
    futures = [f for f, _, _ in pending.values()]
    lost: set[str] = set()
    try:
        while pending:
            try:
                key = done.get(timeout=WORKER_CHECK_S)
            except queue.Empty:
                alive = set(client.scheduler_info()["workers"])
                gone = [k for k, (_, _, addr) in pending.items() if addr not in alive]
                lost.update(gone)
                client.cancel([pending[k][0] for k in gone])
                continue
            fut, task, addr = pending.pop(key)
            if key in lost:
                finish({"index": task.index, "status": "failed",
                        "error": f"worker failed: {addr} left the cluster"})
            else:
                finish(_outcome(fut, task))
            fut.release()
    finally:
        client.cancel(futures)


# ---------------------------------------------------------------------------
# Stored results: inputs.json beside each variant's outputs


def _stored_row(folder: Path, digest: str) -> dict[str, Any] | None:
    """The stored row if the folder holds complete results for these inputs."""
    try:
        stored = json.loads((folder / INPUTS_NAME).read_text(encoding="utf-8"))
    except (OSError, ValueError):
        return None
    if not isinstance(stored, dict) or stored.get("input_hash") != digest:
        return None
    files = stored.get("files", [])
    if not isinstance(stored.get("row"), dict) or not all((folder / f).is_file()
                                                          for f in files):
        return None
    return stored["row"]


def _clear_stale(folder: Path) -> None:
    """Before a variant runs again: remove its old inputs.json and the files it listed."""
    path = folder / INPUTS_NAME
    try:
        stored = json.loads(path.read_text(encoding="utf-8"))
    except (OSError, ValueError):
        return
    path.unlink(missing_ok=True)
    for name in stored.get("files", []) if isinstance(stored, dict) else []:
        if isinstance(name, str) and "/" not in name and "\\" not in name:
            (folder / name).unlink(missing_ok=True)


def _store(folder: Path, v: _Variant, outcome: dict[str, Any]) -> dict[str, Any]:
    """Put shipped files in place and write inputs.json; a failure fails the variant."""
    files = outcome.get("files", [])
    try:
        if isinstance(files, dict):
            _place(folder, files)
            files = list(files)
        row = _row(v, outcome)
        _replace_text(folder / INPUTS_NAME, json.dumps(
            {"heat2d_version": __version__, "input_hash": v.digest, "values": v.values,
             "files": files, "row": row}, indent=2, allow_nan=False) + "\n")
    except (OSError, ValueError) as exc:
        return {"index": v.index, "status": "failed", "error": f"cannot write outputs: {exc}"}
    return outcome


def _place(folder: Path, files: dict[str, bytes]) -> None:
    """Write files received from a worker, all or nothing (as :func:`writers.write`)."""
    folder.mkdir(parents=True, exist_ok=True)
    scratch = Path(tempfile.mkdtemp(prefix=".heat2d-partial-", dir=folder))
    try:
        for name, data in files.items():
            (scratch / name).write_bytes(data)
        for name in files:
            os.replace(scratch / name, folder / name)
    finally:
        shutil.rmtree(scratch, ignore_errors=True)


def _replace_text(path: Path, text: str) -> None:
    tmp = path.with_name(f".{path.name}.partial")
    tmp.write_text(text, encoding="utf-8", newline="")
    os.replace(tmp, path)


def _csv_text(columns: list[str], rows: list[dict[str, Any]]) -> str:
    import io

    buf = io.StringIO()
    writer = csv.writer(buf, lineterminator="\n")
    writer.writerow(columns)
    for r in rows:
        writer.writerow(["" if r.get(c) is None else r.get(c) for c in columns])
    return buf.getvalue()


def read_csv(path: str | Path) -> list[dict[str, Any]]:
    """Read a ``sweep.csv`` back: numbers as floats, empty cells as None."""
    with open(path, newline="", encoding="utf-8") as f:
        rows = list(csv.DictReader(f))
    out = []
    for r in rows:
        row: dict[str, Any] = {}
        for key, text in r.items():
            if text == "":
                row[key] = None
            elif key in ("variant", "hot_spot_shape", "status", "error"):
                row[key] = text
            else:
                try:
                    row[key] = float(text)
                except ValueError:
                    row[key] = text
        out.append(row)
    return out


# ---------------------------------------------------------------------------
# sweep.png


def plot_sweep(result: SweepResult, path: str | Path | None = None, *, fig=None):
    """Hot-spot temperature against the first varied param, one line per combination of
    the other params' values (one line for zipped lists). Failed variants are left out.
    """
    from matplotlib.figure import Figure

    fig = fig or Figure(figsize=(7.5, 4.8), layout="constrained")
    ax = fig.add_subplot()
    x_name = result.varied[0]
    others = result.varied[1:]
    ok = [r for r in result.rows if r["status"] == "ok"
          and isinstance(r.get(x_name), int | float)]
    lines: dict[tuple, list[dict[str, Any]]] = {}
    for r in ok:
        lines.setdefault(() if result.zipped else tuple(r.get(n) for n in others), []).append(r)
    for key, members in lines.items():
        members.sort(key=lambda r: r[x_name])
        label = (None if not key else _show(key[0]) if len(key) == 1 else
                 ", ".join(f"{n} = {_show(v)}" for n, v in zip_(others, key, strict=True)))
        ax.plot([r[x_name] for r in members], [r["max_temperature_c"] for r in members],
                marker="o", label=label)
    ax.set_xlabel(x_name + (f" (paired with {', '.join(others)})"
                            if result.zipped and others else ""))
    ax.set_ylabel("hot-spot temperature, °C")
    ax.set_title("\n".join([*textwrap.wrap(result.title, 80), f"hot spot against {x_name}"]),
                 fontsize=10)
    ax.grid(True, alpha=0.3)
    if len(lines) > 1:
        ax.legend(fontsize=8, title=", ".join(others), title_fontsize=8)
    if not ok:
        ax.text(0.5, 0.5, "no variant succeeded", ha="center", va="center",
                transform=ax.transAxes)
    failed = len(result.rows) - len(ok)
    if failed:
        fig.text(0.01, 0.005, f"{failed} failed variant(s) not shown", fontsize=8)
    if path is not None:
        fig.savefig(path, dpi=110)
    return fig


# ---------------------------------------------------------------------------
# The command line: ``heat2d sweep``


def add_sweep_arguments(parser: argparse.ArgumentParser) -> None:
    """Add the options of ``heat2d sweep`` (``model``, ``--set``, ``--refine`` and
    ``--debug`` are added by the command line for every subcommand)."""
    from ..fem.solver import METHODS

    parser.add_argument("--vary", action="append", required=True,
                        metavar="NAME=V1,V2,...",
                        help="a param and its values; start:stop:count gives count evenly "
                             "spaced values (repeatable: the full grid is run)")
    parser.add_argument("--zip", action="store_true",
                        help="pair the --vary lists element by element instead of the grid")
    parser.add_argument("--jobs", type=int, default=1, metavar="N",
                        help="run variants in N local processes (default 1)")
    parser.add_argument("--cluster", metavar="ADDRESS",
                        help="run variants on an existing Dask cluster, e.g. "
                             "tcp://scheduler:8786 (needs heat2d[cluster])")
    parser.add_argument("--cluster-timeout", type=float, default=DEFAULT_CONNECT_TIMEOUT_S,
                        metavar="SECONDS",
                        help="how long to wait for the cluster (default %(default)g s)")
    parser.add_argument("--out", metavar="DIR",
                        help="output folder (default: MODELSTEM-sweep)")
    parser.add_argument("--method", choices=sorted(METHODS), default="auto",
                        help="linear solver (default: auto)")
    parser.add_argument("--estimate", action="store_true",
                        help="estimate each variant's discretization error, as heat2d run "
                             "does (extra solves per variant)")
    parser.add_argument("--png", action="store_true",
                        help="also write each variant's temperature map (seconds each)")
    parser.add_argument("--force", action="store_true",
                        help="run every variant again, even where stored results still hold")
    parser.add_argument("--quiet", action="store_true",
                        help="no progress bar; print only failures")


class ProgressBar:
    """Variants done, failed and the time left, on one line of a terminal (or one line per
    variant when the stream is not a terminal)."""

    WIDTH = 28

    def __init__(self, stream) -> None:
        self.stream = stream
        self.tty = hasattr(stream, "isatty") and stream.isatty()
        self.start = time.perf_counter()
        self.shown = False

    def __call__(self, p: SweepProgress) -> None:
        ran = p.done - p.skipped
        elapsed = time.perf_counter() - self.start
        if ran > 0 and p.done < p.total:
            left = f"{_clock(elapsed / ran * (p.total - p.done))} left"
        elif p.done == p.total:
            left = f"done in {_clock(elapsed)}"
        else:
            left = "--:-- left"
        fill = round(self.WIDTH * p.done / p.total)
        extra = "".join([f", {p.failed} failed" if p.failed else "",
                         f", {p.skipped} unchanged" if p.skipped else ""])
        line = (f"[{'#' * fill}{'.' * (self.WIDTH - fill)}] {p.done}/{p.total} variants"
                f"{extra}, {left}")
        if self.tty:
            print(f"\r{line}\x1b[K", end="", file=self.stream, flush=True)
        else:
            print(line, file=self.stream, flush=True)
        self.shown = True

    def close(self) -> None:
        if self.tty and self.shown:
            print(file=self.stream, flush=True)


def _clock(seconds: float) -> str:
    s = int(round(seconds))
    return f"{s // 3600}:{s // 60 % 60:02d}:{s % 60:02d}" if s >= 3600 else \
        f"{s // 60}:{s % 60:02d}"


def run_sweep_command(args: argparse.Namespace) -> int:
    """Run ``heat2d sweep``: 0 when every variant succeeded, 1 when some failed, 2 on bad
    input (nothing run or written)."""
    from ..cli.common import EXIT_BAD_INPUT, EXIT_FAILURE, EXIT_OK
    from ..cli.common import parse_sets as _parse_sets
    from ..model import load

    vary = parse_vary(args.vary)
    model = load(args.model, params=_parse_sets(args.set))
    out = Path(args.out) if args.out else Path(f"{model.stem}-sweep")
    bar = None if args.quiet else ProgressBar(sys.stderr)
    try:
        result = sweep(model, vary, zip=args.zip, jobs=args.jobs, cluster=args.cluster,
                       out=out, refine=args.refine, method=args.method,
                       estimate=args.estimate, png=args.png,
                       force=args.force, progress=bar, connect_timeout=args.cluster_timeout)
    except ClusterError as exc:
        print(f"error: {exc.message()}", file=sys.stderr)
        return EXIT_BAD_INPUT
    finally:
        if bar is not None:
            bar.close()
    for row in result.failed:
        print(f"failed: {row['variant']}: {row['error']}", file=sys.stderr)
        if args.debug and row["variant"] in result.tracebacks:
            print(result.tracebacks[row["variant"]], file=sys.stderr)
    if not args.quiet:
        ok = len(result.rows) - len(result.failed)
        print(f"{len(result.rows)} variants: {ok} ok, {len(result.failed)} failed"
              + (f", {len(result.skipped)} unchanged since the last run (not solved again)"
                 if result.skipped else ""))
        print(f"wrote {out / CSV_NAME}, {out / PLOT_NAME} and one folder per variant in {out}")
    return EXIT_FAILURE if result.failed else EXIT_OK
