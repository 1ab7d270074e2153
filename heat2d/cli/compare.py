"""``heat2d compare A B``: its options, and comparing two runs with the printed table, the
written files and the exit status."""

from __future__ import annotations

import argparse

from .common import EXIT_OK


def add_compare_arguments(parser: argparse.ArgumentParser) -> None:
    """Add the arguments of ``heat2d compare`` to its subparser.

    Parameters
    ----------
    parser
        The ``compare`` subparser.
    """
    from ..fem.solver import METHODS

    parser.add_argument("a", metavar="A",
                        help="the first run: a result folder of heat2d run, or a model file "
                             "(TOML, solved here with the error estimate)")
    parser.add_argument("b", metavar="B", help="the second run, the same way")
    parser.add_argument("--out", metavar="DIR", default="compare-results",
                        help="folder for compare.json, compare.txt and compare.png "
                             "(default: compare-results)")
    parser.add_argument("--method", choices=sorted(METHODS), default="auto",
                        help="linear solver for model files (default: auto)")
    parser.add_argument("--quiet", action="store_true", help="print nothing on success")
    parser.add_argument("--debug", action="store_true", help="show tracebacks of failures")
    parser.set_defaults(refine=1.0)     # the command line checks it for every command


def run_compare_command(args: argparse.Namespace) -> int:
    """Load or solve both runs, compare them, print the table and write the files.

    Parameters
    ----------
    args
        The parsed options of :func:`add_compare_arguments`.

    Returns
    -------
    int
        EXIT_OK; bad input raises ModelError (exit 2, nothing written).
    """
    from ..compare import compare_sides, format_comparison, load_side, write_comparison
    from ..transient.run import run_transient

    a = load_side(args.a, label="A", method=args.method, transient=run_transient)
    b = load_side(args.b, label="B", method=args.method, transient=run_transient)
    doc = compare_sides(a, b)
    files = write_comparison(a, b, doc, args.out)
    if not args.quiet:
        print(format_comparison(doc))
        print("\nwrote " + ", ".join(str(f) for f in files))
    return EXIT_OK
