"""Running the variants: here (one after the other), in local worker processes or on a
Dask cluster, and the worker functions that solve one variant and write (or ship back)
its outputs. Each worker thread keeps its last result to offer the next variant as
``reuse``."""

from __future__ import annotations

import os
import tempfile
import threading
import time
import traceback
from dataclasses import dataclass
from typing import Any

from ..errors import Heat2dError
from ..model import Model
from ..version import __version__

DEFAULT_CONNECT_TIMEOUT_S = 10.0
"""Seconds to wait for a cluster's scheduler and a first worker (``--cluster-timeout``)."""
WORKER_CHECK_S = 5.0
"""While waiting for a cluster's results, check this often that the workers are still there."""
STOP_WAIT_S = 5.0
"""After an interrupt, how long to wait for a terminated worker process before killing it."""


class ClusterError(Heat2dError):
    """The Dask cluster cannot be reached or used (no scheduler, no workers, no heat2d there)."""


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
    for name, c in summary.get("conductors", {}).items():
        row[f"conductor_max_rise_k:{name}"] = c["max_rise_k"]
        row[f"conductor_loss_w:{name}"] = c["loss_w"]
    transient = summary.get("transient")
    if transient:
        # Powered shapes: the peak over the run, the periodic peak of a pulse train, and
        # the thermal impedance at each decade of time.
        for name, z in transient["zth"].items():
            row[f"peak_c:{name}"] = transient["peaks"][name]["max"]
            for t, value in z["at"].items():
                row[f"zth_k_per_w:{name}@{t}s"] = value
        for name, p in transient["periodic"].items():
            row[f"periodic_peak_c:{name}"] = p["peak"]
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

    if task.model.is_transient:
        from ..transient.run import run_transient

        state.last = None
        return run_transient(task.model, refine=task.refine, method=task.method)
    adaptive = task.model.adaptive
    result = run(task.model, refine=task.refine, method=task.method,
                 reuse=None if adaptive else state.last, estimate=task.estimate)
    state.last = None if adaptive else result
    return result


def _save(task: _Task, outcome: dict[str, Any], result) -> dict[str, Any]:
    """Write (or pack, for a remote worker) the variant's outputs into the outcome."""
    from ..post.writers import write

    if getattr(result, "history", None) is not None:    # a transient run: all its files
        def write(result, folder, formats=None):          # noqa: F811
            return result.save(folder)
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
# The runners: here, in local processes, on a Dask cluster


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
    pools = [ProcessPoolExecutor(max_workers=1, mp_context=context, initializer=_worker_start)
             for _ in chunks]
    finished = False
    try:
        futures = {pool.submit(_worker_run, t): t
                   for pool, chunk in zip(pools, chunks, strict=False) for t in chunk}
        for fut in as_completed(futures):
            finish(_outcome(fut, futures[fut]))
        finished = True
    finally:
        if finished:
            for pool in pools:
                pool.shutdown(wait=True, cancel_futures=True)
        else:                       # Ctrl-C, SIGTERM or a failure here: stop the workers
            _stop_workers(pools)


def _worker_start() -> None:
    """Start each worker process in its own process group, so a Ctrl-C at the terminal
    reaches only the sweep, which then stops its workers (no signal handler is set)."""
    if hasattr(os, "setpgrp"):
        os.setpgrp()


def _stop_workers(pools: list) -> None:
    """Cancel the variants not started and end the worker processes now.

    ``shutdown(cancel_futures=True)`` alone lets a running variant finish (minutes on a
    large model), so the processes are terminated: a variant cut short has written
    nothing (writes are all or nothing) and is solved again by the next sweep.
    """
    processes = []
    for pool in pools:
        # The executor's worker processes: a private attribute of concurrent.futures,
        # the only handle on them before Python 3.14's terminate_workers().
        processes += list((getattr(pool, "_processes", None) or {}).values())
        pool.shutdown(wait=False, cancel_futures=True)
    for proc in processes:
        if proc.is_alive():
            proc.terminate()
    for proc in processes:
        proc.join(timeout=STOP_WAIT_S)
        if proc.is_alive():
            proc.kill()
            proc.join(timeout=STOP_WAIT_S)


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
    for addr, chunk in zip(slots, _chunks(tasks, len(slots)), strict=False):
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
