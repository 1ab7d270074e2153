"""The sweep table: its columns, one row per variant, the ``sweep.csv`` text and
:func:`read_csv`, and the ``sweep.png`` plot (:func:`plot_sweep`)."""

from __future__ import annotations

import csv
import textwrap
from pathlib import Path
from typing import TYPE_CHECKING, Any

from .grid import _show, _Variant

if TYPE_CHECKING:
    from .core import SweepResult

CSV_NAME = "sweep.csv"
PLOT_NAME = "sweep.png"

FIXED_COLUMNS = ("max_temperature_c", "max_temperature_error_k", "hot_spot_shape")
"""``max_temperature_error_k`` only when the error estimate is asked for."""
TAIL_COLUMNS = ("solve_time_s", "status", "error")
COLUMN_GROUPS = (("probe:", "probes"), ("heat_out_w:", "boundaries"), ("margin_k:", "limits"))
"""Per-name columns: prefix and the summary section they come from."""


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
                 ", ".join(f"{n} = {_show(v)}" for n, v in zip(others, key, strict=True)))
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
