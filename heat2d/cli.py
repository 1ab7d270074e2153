"""The ``heat2d`` command: a thin layer over the library that prints and picks exit codes.

Exit status: 0 success, 1 internal or solver failure, 2 bad input (nothing written),
3 a temperature limit exceeded under ``run --strict`` (outputs are written).
"""

from __future__ import annotations

import argparse
import sys
import threading
import time
import traceback
from collections.abc import Callable, Sequence
from pathlib import Path

from . import __version__
from .errors import Heat2dError, ModelError

EXIT_OK, EXIT_FAILURE, EXIT_BAD_INPUT, EXIT_LIMIT = 0, 1, 2, 3
SLOW_STAGE_S = 1.0
"""Stages that take longer than this are announced on the terminal."""


class UsageError(Exception):
    """A command-line argument is malformed."""


def _parse_sets(items: Sequence[str]) -> dict[str, str]:
    out = {}
    for item in items:
        name, sep, value = item.partition("=")
        if not sep or not name.strip() or not value.strip():
            raise UsageError(f"--set: expected NAME=VALUE, got {item!r}")
        out[name.strip()] = value.strip()
    return out


class _Announcer:
    """Prints a stage's name once it has run for SLOW_STAGE_S, and its time when it ends."""

    def __init__(self, stream) -> None:
        self.stream = stream
        self.timer: threading.Timer | None = None
        self.started = 0.0
        self.shown = False

    def __call__(self, stage: str, event: str) -> None:
        if event == "start":
            self.started, self.shown = time.perf_counter(), False
            self.timer = threading.Timer(SLOW_STAGE_S, self._show, args=(stage,))
            self.timer.daemon = True
            self.timer.start()
        else:
            if self.timer:
                self.timer.cancel()
            if self.shown and event == "end":
                print(f"  {stage} done in {time.perf_counter() - self.started:.1f} s",
                      file=self.stream, flush=True)

    def _show(self, stage: str) -> None:
        self.shown = True
        print(f"  {stage} ...", file=self.stream, flush=True)


def cmd_run(args: argparse.Namespace) -> int:
    from .model import load
    from .pipeline import run
    from .writers import format_summary, write

    model = load(args.model, params=_parse_sets(args.set))
    progress = None if args.quiet else _Announcer(sys.stderr)
    result = run(model, method=args.method, refine=args.refine, progress=progress,
                 estimate=not args.no_estimate)
    out = Path(args.out) if args.out else Path(f"{model.stem}-results")
    if progress:
        progress("writing", "start")
    try:
        files = write(result, out, show_mesh=args.show_mesh)
    finally:
        if progress:
            progress("writing", "end")
    if not args.quiet:
        print(format_summary(result.summary))
        print("\nwrote " + ", ".join(str(f) for f in files))
    exceeded = [n for n, lim in result.summary["limits"].items() if lim["exceeded"]]
    if exceeded and args.strict:
        print(f"limit exceeded: {', '.join(exceeded)}", file=sys.stderr)
        return EXIT_LIMIT
    return EXIT_OK


def cmd_check(args: argparse.Namespace) -> int:
    from .adapt import check_budget
    from .geometry import build_geometry
    from .mesh import build_mesh
    from .model import load

    model = load(args.model, params=_parse_sets(args.set))
    geometry = build_geometry(model, refine=args.refine)
    mesh = build_mesh(geometry)
    check_budget(mesh)
    unit = model.length_unit
    areas = geometry.visible_area
    claimed = geometry.claimed_length()
    print(f"{model.source}: model is valid" + (f" ({model.title})" if model.title else ""))
    print(f"length unit {unit}, " + ("axisymmetric (full revolution)" if model.axisymmetric
                                      else f"depth {model.depth:g} {unit}"))
    print(f"\n{'shape':<20} {'material':<14} {'visible area ' + unit + '²':>18} {'power':>12}")
    for s, a in zip(model.shapes, areas, strict=True):
        power = (f"{s.power:g} W" if s.power is not None else
                 f"{s.power_density:g} W/m³" if s.power_density is not None else "")
        print(f"{s.name:<20} {'(void)' if s.void else s.material:<14} {a:>18.6g} {power:>12}")
    print(f"\n{'boundary':<20} {'kind':<21} {'on':<24} {'length ' + unit:>12}")
    for bc in model.boundaries:
        print(f"{bc.name:<20} {bc.label:<21} {str(bc.selector):<24} "
              f"{claimed[bc.index]:>12.6g}")
    print(f"{'(insulated)':<20} {'':<21} {'':<24} {geometry.insulated_length():>12.6g}")
    if model.interfaces:
        print(f"\n{'interface':<20} {'between':<30} {'R″ m²K/W':>10}")
        for itf in model.interfaces:
            print(f"{itf.name:<20} {itf.a + ' / ' + itf.b:<30} {itf.resistance:>10.3g}")
    print(f"\n{'material':<20} {'kx':>9} {'ky':>9}  W/(m·K) at 25 °C; note")
    for m in model.materials:
        varies = " (varies with T)" if m.varies else ""
        print(f"{m.name:<20} {m.kx:>9.4g} {m.ky:>9.4g}  {m.note}{varies}")
    print(f"\nmesh: {len(mesh.points)} nodes, {len(mesh.triangles)} triangles, smallest angle "
          f"{mesh.min_angle():.1f}°, target size {geometry.size:g} {unit}")
    for w in geometry.warnings:
        print(f"warning: {w}")
    return EXIT_OK


def cmd_verify(args: argparse.Namespace) -> int:
    from .verify import run_verify_command

    return run_verify_command(args)


def cmd_sweep(args: argparse.Namespace) -> int:
    from .sweep import run_sweep_command

    return run_sweep_command(args)


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
}


def build_parser() -> argparse.ArgumentParser:
    from .solver import METHODS

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
        p.add_argument("model", help="model file (TOML)")
        p.add_argument("--set", action="append", default=[], metavar="NAME=VALUE",
                       help="override a parameter of [params] (repeatable)")
        p.add_argument("--refine", type=float, default=1.0, metavar="FACTOR",
                       help="divide every target mesh size by FACTOR (mesh-convergence checks)")
        p.add_argument("--debug", action="store_true", help="show tracebacks of failures")
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
            p.add_argument("--strict", action="store_true",
                           help="exit with status 3 when a shape exceeds its max_temperature")
    return parser


def main(argv: Sequence[str] | None = None) -> int:
    """Run the command line; returns the exit status."""
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
        if args.debug:
            traceback.print_exc()
        print(f"error: {exc.message()}", file=sys.stderr)
        return EXIT_FAILURE
    except Exception as exc:  # report, never dump a traceback unless asked
        if args.debug:
            traceback.print_exc()
        print(f"internal error: {type(exc).__name__}: {exc} (run with --debug for details)",
              file=sys.stderr)
        return EXIT_FAILURE


def console() -> None:
    """Entry point of the ``heat2d`` console script."""
    sys.exit(main())
