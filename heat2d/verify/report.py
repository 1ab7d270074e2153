"""The report of ``heat2d verify``: the printed table, ``verify.json`` and ``verify.png``
(the manufactured solution's errors against mesh size on log axes, with the expected
slopes). Nothing here prints; the command line does (heat2d/cli/verify.py).
"""

from __future__ import annotations

import json
import math
from pathlib import Path
from typing import Any

from ..version import __version__
from .manufactured import slope
from .table import read_table

Record = dict[str, Any]


def _num(value: float | None, spec: str) -> str:
    return "-" if value is None else format(value, spec)


def short_source(source: str) -> str:
    """'Incropera §4.2 Eq. 4.19' for the table; the records keep the full reference."""
    for book in read_table().books.values():
        if source.startswith(book.title):
            return book.short + source[len(book.title):].replace(",", "")
    return source


def format_table(records: list[Record]) -> str:
    """The records as a fixed-width table, one line per check, a count of passes and the
    key to the short source names.

    Parameters
    ----------
    records
        Check records of :func:`heat2d.verify.verify`.

    Returns
    -------
    str
        The table: a header, a rule, one row per check, a blank line, the count (with
        the failed cases) and the key, without a final newline.
    """
    head = (f"{'case':<16} {'check':<24} {'source':<32} {'reference':>13} {'computed':>13} "
            f"{'error':>9} {'tolerance':>9} {'unit':<8} pass")
    lines = [head, "-" * len(head)]
    for r in records:
        short = short_source(r["source"])
        lines.append(
            f"{r['case'][:16]:<16} {r['check'][:24]:<24} {short[:32]:<32} "
            f"{_num(r['reference'], '.7g'):>13} {_num(r['computed'], '.7g'):>13} "
            f"{_num(r['error'], '.2e'):>9} {_num(r['tolerance'], '.2e'):>9} "
            f"{r['unit'][:8]:<8} {'yes' if r['passed'] else 'NO'}")
    passed = sum(r["passed"] for r in records)
    failed = sorted({r["case"] for r in records if not r["passed"]})
    key = "; ".join(f"{b.short} = {b.legend}" for b in read_table().books.values())
    lines += ["", f"{passed} of {len(records)} checks passed"
              + ("" if passed == len(records) else f"; FAILED: {', '.join(failed)}"), key]
    return "\n".join(lines)


def plot_convergence(records: list[Record], path: str | Path | None = None):
    """Errors of the manufactured solution against mesh size on log axes, with lines of
    the expected slopes (2 in L2, 1 in the energy norm).

    Parameters
    ----------
    records
        Check records; the first with a ``convergence`` series is plotted (a note says
        so when there is none).
    path
        Where to save the figure (PNG); not saved if None.

    Returns
    -------
    matplotlib.figure.Figure
        The figure.
    """
    import numpy as np
    from matplotlib.figure import Figure

    fig = Figure(figsize=(6.4, 4.8), layout="constrained")
    ax = fig.subplots()
    series = next((r["convergence"] for r in records if "convergence" in r), None)
    if series is None:
        ax.text(0.5, 0.5, "no convergence study was run", ha="center", va="center",
                transform=ax.transAxes)
        ax.set_axis_off()
    else:
        h = np.array(series["h"])
        for key, label, expected, marker in (("l2", "L2 error, K·m", 2, "o"),
                                             ("energy", "energy-norm error, √(W·K/m)", 1,
                                              "s")):
            e = np.array(series[key])
            line, = ax.loglog(h, e, marker=marker, label=f"{label}, observed slope "
                              f"{slope(list(h), list(e)):.2f}")
            # the expected slope, drawn parallel just below the finest point
            ax.loglog(h, 0.5 * e[-1] * (h / h[-1]) ** expected, "--",
                      color=line.get_color(), alpha=0.6, label=f"expected slope {expected}")
        ax.set_xlabel("mesh size h = √(mean triangle area), m")
        ax.set_ylabel("error")
        ax.grid(True, which="both", alpha=0.3)
        ax.legend(fontsize="small")
    ax.set_title("heat2d verify: manufactured solution (Roache 2002)")
    if path is not None:
        fig.savefig(path, dpi=120)
    return fig


def write_outputs(records: list[Record], out_dir: str | Path, *,
                  seconds: float | None = None) -> list[Path]:
    """Write ``verify.json`` and ``verify.png`` into ``out_dir``, both or neither.

    Parameters
    ----------
    records
        Check records of :func:`heat2d.verify.verify`.
    out_dir
        The folder, created if missing.
    seconds
        The run's total time, stored in verify.json.

    Returns
    -------
    list of Path
        The two files written.

    Raises
    ------
    Heat2dError
        The folder cannot be created or a file cannot be written (nothing is left).
    """
    from ..post.writers import write_folder

    names = ("verify.json", "verify.png")
    document = {"heat2d_version": __version__, "passed": all(r["passed"] for r in records),
                "checks": len(records), "failed": sum(not r["passed"] for r in records),
                "seconds": seconds, "records": [_finite(r) for r in records]}

    def fill(folder: Path) -> tuple[str, ...]:
        (folder / names[0]).write_text(json.dumps(document, indent=2, allow_nan=False) + "\n",
                                       encoding="utf-8")
        plot_convergence(records, folder / names[1])
        return names

    # The folder is swapped in whole, as a run's is (absent, the old pair or the new one).
    return write_folder(out_dir, fill, is_output=lambda name: name in names)


def _finite(record: Record) -> Record:
    """The record with NaN or infinite numbers as None (JSON has no NaN)."""
    return {k: (None if isinstance(v, float) and not math.isfinite(v) else v)
            for k, v in record.items()}
