"""The ``heat2d`` command: a thin layer over the library that prints and picks exit codes.

Exit status: 0 success, 1 internal or solver failure, 2 bad input (nothing written),
3 a temperature limit exceeded under ``run --strict`` (outputs are written).
"""

from __future__ import annotations

import argparse
import os
import signal
import sys
import traceback
from collections.abc import Callable, Sequence

from ..errors import Heat2dError, ModelError
from ..version import __version__
from .common import (
    EXIT_BAD_INPUT,
    EXIT_FAILURE,
    EXIT_INTERRUPTED,
    EXIT_LIMIT,
    EXIT_OK,
    EXIT_TERMINATED,
    Terminated,
    UsageError,
    interrupted,
    on_sigterm,
    received,
    restore_sigterm,
)
from .run import cmd_check, cmd_run


def cmd_verify(args: argparse.Namespace) -> int:
    from .verify import run_verify_command

    return run_verify_command(args)


def cmd_sweep(args: argparse.Namespace) -> int:
    from .sweep import run_sweep_command

    return run_sweep_command(args)


def cmd_compare(args: argparse.Namespace) -> int:
    from .compare import run_compare_command

    return run_compare_command(args)


def cmd_report(args: argparse.Namespace) -> int:
    from .report import run_report_command

    return run_report_command(args)


def _sweep_arguments(p: argparse.ArgumentParser) -> None:
    from .sweep import add_sweep_arguments

    add_sweep_arguments(p)


COMMANDS: dict[str, tuple[Callable[[argparse.Namespace], int], str]] = {
    "run": (cmd_run, "solve a model and write VTU, summary.json, summary.txt and a PNG map"),
    "check": (cmd_check, "validate and mesh a model without solving; list shapes and boundaries"),
    "verify": (cmd_verify, "run the bundled verification cases against published solutions; "
                           "write verify.json and verify.png"),
    "sweep": (cmd_sweep, "solve every combination of parameter values; write sweep.csv and "
                         "sweep.png"),
    "compare": (cmd_compare, "compare two runs (result folders or models): changes with "
                             "their error bars; write compare.json, compare.txt and "
                             "compare.png"),
    "report": (cmd_report, "write one self-contained HTML report (report.html) of a run or "
                           "sweep folder, for design reviews; prints cleanly to PDF"),
}


def build_parser() -> argparse.ArgumentParser:
    from ..fem.solver import METHODS

    parser = argparse.ArgumentParser(
        prog="heat2d", description="Steady 2-D heat conduction for circuit-board cross-sections.")
    parser.add_argument("--version", action="version", version=f"heat2d {__version__}")
    sub = parser.add_subparsers(dest="command", required=True, metavar="COMMAND")
    for name, (_, help_text) in COMMANDS.items():
        p = sub.add_parser(name, help=help_text, description=help_text)
        if name == "verify":
            from .verify import add_verify_arguments

            add_verify_arguments(p)
            continue
        if name == "compare":
            from .compare import add_compare_arguments

            add_compare_arguments(p)
            continue
        if name == "report":
            from .report import add_report_arguments

            add_report_arguments(p)
            continue
        p.add_argument("model", help="model file (TOML)")
        p.add_argument("--set", action="append", default=[], metavar="NAME=VALUE",
                       help="override a parameter of [params] (repeatable)")
        p.add_argument("--refine", type=float, default=1.0, metavar="FACTOR",
                       help="divide every target mesh size by FACTOR (mesh-convergence checks)")
        p.add_argument("--debug", action="store_true", help="show tracebacks of failures")
        p.add_argument("--node-limit", type=int, metavar="N",
                       help="most nodes a mesh may have (default: [mesh] node_limit, "
                            "5000000); checked on an estimate before meshing")
        if name == "sweep":
            _sweep_arguments(p)
        if name == "run":
            p.add_argument("--out", metavar="DIR",
                           help="output folder (default: MODELSTEM-results)")
            p.add_argument("--method", choices=sorted(METHODS), default="auto",
                           help="linear solver (default: auto)")
            p.add_argument("--quiet", action="store_true", help="print nothing on success")
            p.add_argument("--show-mesh", action="store_true",
                           help="draw the mesh on the PNG temperature map")
            p.add_argument("--no-estimate", action="store_true",
                           help="skip the discretization error estimate (an extra solve on the "
                           "refined mesh)")
            p.add_argument("--report", action="store_true",
                           help="also write report.html, a self-contained HTML report, into "
                                "the output folder")
            p.add_argument("--strict", action="store_true",
                           help="exit with status 3 when a shape exceeds its max_temperature")
    return parser


def main(argv: Sequence[str] | None = None) -> int:
    """Run the command line; returns the exit status.

    Ctrl-C exits 130 and SIGTERM 143, each with one line on stderr saying what became of
    the outputs; the SIGTERM handler is set only while this runs.
    """
    previous = on_sigterm()
    try:
        status = _dispatch(argv)
        late = received()
        if late is None:
            return status
        # The interrupt's exception was swallowed on its way (in a finalizer, say) and the
        # command ran to its end: its outputs are complete.
        late.heat2d_outputs = ("the command had finished; its outputs are complete"
                               if status in (EXIT_OK, EXIT_LIMIT) else "no output written")
        raise late
    except (KeyboardInterrupt, Terminated) as exc:
        line, status = interrupted(exc)
        print(line, file=sys.stderr, flush=True)
        return status
    finally:
        restore_sigterm(previous)


def _dispatch(argv: Sequence[str] | None) -> int:
    """Parse the arguments and run the command (the body of :func:`main`)."""
    parser = build_parser()
    args = parser.parse_args(argv)
    if args.refine <= 0:
        print("error: --refine: must be > 0", file=sys.stderr)
        return EXIT_BAD_INPUT
    try:
        return COMMANDS[args.command][0](args)
    except UsageError as exc:
        print(f"error: {exc}", file=sys.stderr)
        return EXIT_BAD_INPUT
    except ModelError as exc:
        if args.debug:
            traceback.print_exc()
        print(f"error: {exc.message()}", file=sys.stderr)
        return EXIT_BAD_INPUT
    except Heat2dError as exc:
        late = received()
        if late is not None:     # e.g. the mesher's failure caused by an interrupt
            raise late from exc
        if args.debug:
            traceback.print_exc()
        print(f"error: {exc.message()}", file=sys.stderr)
        return EXIT_FAILURE
    except Exception as exc:  # report, never dump a traceback unless asked
        late = received()
        if late is not None:     # an interrupt that Python wrapped in another exception
            raise late from exc
        if args.debug:
            traceback.print_exc()
        print(f"internal error: {type(exc).__name__}: {exc} (run with --debug for details)",
              file=sys.stderr)
        return EXIT_FAILURE


def console() -> None:
    """Entry point of the ``heat2d`` console script (and of ``python -m heat2d``)."""
    status = main()
    # The command has ended and its outputs are complete: an interrupt during the
    # interpreter's shutdown still gets its one line and status, not a bare signal death.
    finished = "the command had finished; its outputs are complete"
    for signum, code, word in ((signal.SIGTERM, EXIT_TERMINATED, "terminated"),
                               (signal.SIGINT, EXIT_INTERRUPTED, "interrupted")):
        if signum == signal.SIGINT and signal.getsignal(signum) is not \
                signal.default_int_handler:
            continue                      # ignored by the parent: leave it so
        signal.signal(signum, lambda *_, c=code, w=word: _late_exit(c, f"{w}: {finished}"))
    sys.exit(status)


def _late_exit(status: int, line: str) -> None:
    print(line, file=sys.stderr, flush=True)
    os._exit(status)
