"""``heat2d sweep``: its options, the progress bar and the command on top of
:func:`heat2d.sweep.sweep`."""

from __future__ import annotations

import argparse
import sys
import time
from pathlib import Path

from ..sweep import (
    CSV_NAME,
    DEFAULT_CONNECT_TIMEOUT_S,
    PLOT_NAME,
    ClusterError,
    SweepProgress,
    parse_vary,
    sweep,
)
from .common import EXIT_BAD_INPUT, EXIT_FAILURE, EXIT_OK, Terminated, parse_sets


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
    from ..model import load

    vary = parse_vary(args.vary)
    model = load(args.model, params=parse_sets(args.set), node_limit=args.node_limit)
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
    except (KeyboardInterrupt, Terminated) as exc:
        # The workers are stopped; each finished variant's folder is complete and its
        # inputs.json lets the same sweep run again skip it. sweep.csv is not rewritten.
        exc.heat2d_outputs = (f"workers stopped; the variants finished so far are kept in "
                              f"{out} (the same sweep run again solves only the rest)")
        raise
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
