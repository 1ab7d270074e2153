"""``heat2d verify``: its options, and running the bundled cases with the printed table,
the written files and the exit status."""

from __future__ import annotations

import argparse
import sys
import time

from .common import EXIT_FAILURE, EXIT_OK


def add_verify_arguments(parser: argparse.ArgumentParser) -> None:
    """Add the options of ``heat2d verify`` to its subparser.

    Parameters
    ----------
    parser
        The ``verify`` subparser.
    """
    from ..verify import CASES

    parser.add_argument("--out", metavar="DIR", default="verify-results",
                        help="folder for verify.json and verify.png (default: verify-results)")
    parser.add_argument("--case", action="append", choices=sorted(CASES), metavar="NAME",
                        help="run only this case (repeatable; default: all of "
                             f"{', '.join(CASES)})")
    parser.add_argument("--quiet", action="store_true",
                        help="print only failures and the final count")
    parser.add_argument("--debug", action="store_true",
                        help="stop at a case that raises and show its traceback")
    parser.set_defaults(refine=1.0)     # the command line checks it for every command


def quiet_table(table: str) -> str:
    """The failed rows of a printed table (with its header) and the count line."""
    lines = table.splitlines()
    failed = [line for line in lines[2:-3] if line.endswith(" NO")]
    return "\n".join((lines[:2] + failed + [""] if failed else []) + [lines[-2]])


def run_verify_command(args: argparse.Namespace) -> int:
    """Run the cases, print the table, write verify.json and verify.png.

    Parameters
    ----------
    args
        The parsed options of :func:`add_verify_arguments`.

    Returns
    -------
    int
        EXIT_OK if every check passed, else EXIT_FAILURE.
    """
    from ..verify import format_table, verify, write_outputs

    start = time.perf_counter()
    records = verify(cases=args.case, raise_errors=args.debug)
    seconds = time.perf_counter() - start
    table = format_table(records)
    print(quiet_table(table) if args.quiet else table)
    files = write_outputs(records, args.out, seconds=seconds)
    if not args.quiet:
        print(f"\n{len(records)} checks in {seconds:.1f} s; wrote "
              + ", ".join(str(f) for f in files))
    ok = all(r["passed"] for r in records)
    if not ok:
        print("verification failed: see the rows marked NO", file=sys.stderr)
    return EXIT_OK if ok else EXIT_FAILURE
