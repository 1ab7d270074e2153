"""``heat2d report``: the self-contained HTML page of a run or sweep folder; and the
``run --report`` step that writes ``report.html`` into the result folder."""

from __future__ import annotations

import argparse
from pathlib import Path

from .common import EXIT_OK


def add_report_arguments(parser: argparse.ArgumentParser) -> None:
    """The arguments of ``heat2d report``."""
    parser.add_argument("folder", help="a result folder of 'heat2d run' or 'heat2d sweep' "
                                       "(a sweep folder holds sweep.csv)")
    parser.add_argument("--out", metavar="FILE.html",
                        help="the report file (default: FOLDER/report.html)")
    parser.add_argument("--compare", metavar="DIR",
                        help="append the comparison in DIR (compare.json and compare.png, "
                             "from 'heat2d compare A B --out DIR')")
    parser.add_argument("--model", metavar="FILE", dest="model_file",
                        help="the model file, when the path recorded in the results no "
                             "longer leads to it (for its digest and materials)")
    parser.add_argument("--quiet", action="store_true", help="print nothing on success")
    parser.add_argument("--debug", action="store_true", help="show tracebacks of failures")
    parser.set_defaults(refine=1.0)


def run_report_command(args: argparse.Namespace) -> int:
    """Write the report of ``args.folder``; prints where it went."""
    from ..report import REPORT_NAME, ReportError, report_folder, write_report

    folder = Path(args.folder)
    if not folder.is_dir():
        raise ReportError("no such folder", file=str(folder))
    text = report_folder(folder, compare=args.compare, model_file=args.model_file)
    out = write_report(text, Path(args.out) if args.out else folder / REPORT_NAME)
    if not args.quiet:
        print(f"wrote {out}")
    return EXIT_OK


def report_into(folder: Path) -> Path:
    """``run --report``: the report of the result just written, into its folder."""
    from ..report import REPORT_NAME, run_report, write_report

    return write_report(run_report(folder), folder / REPORT_NAME)
