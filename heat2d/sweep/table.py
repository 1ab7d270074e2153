"""The sweep table: its columns, one row per variant, the ``sweep.csv`` text and
:func:`read_csv`, and the ``sweep.png`` plot (:func:`plot_sweep`).

Precision in ``sweep.csv``. The rows in memory (and in each variant's ``inputs.json``)
keep every digit; the CSV writes each number to the digits it can carry:

- temperatures (``max_temperature_c``, ``probe:NAME``, °C) and margins (``margin_k:NAME``,
  K) to 0.001 K: a fixed step, since what matters is kelvin, not a fraction of the
  value; the discretization error of a temperature (its ``--estimate``) is rarely below
  a few millikelvin and the material data behind it far coarser, so a finer digit would
  only show round-off;
- heat flows (``heat_out_w:NAME``, W) to 6 significant digits: they span microwatts to
  kilowatts, so the step follows the size; 6 digits keep small exits and the energy
  balance between exits readable;
- error estimates (``max_temperature_error_k``, K) to 2 significant digits: an estimate
  of an error is itself known to a factor, not to 1 %;
- solve times (``solve_time_s``) to 0.01 s;
- the varied params as the value used, in the shortest text that reads back to the
  same number (``0.1``, ``1e-05``, ``10``): a ``--set`` of that text rebuilds the variant;
- any other number to 6 significant digits.

A cell never reads ``-0.000``; :func:`read_csv` reads every number back as a float.
"""

from __future__ import annotations

import ast
import csv
import re
import textwrap
from collections.abc import Mapping
from pathlib import Path
from typing import TYPE_CHECKING, Any

from .grid import _show, _Variant

if TYPE_CHECKING:
    from ..model import Model
    from .core import SweepResult

CSV_NAME = "sweep.csv"
PLOT_NAME = "sweep.png"

FIXED_COLUMNS = ("max_temperature_c", "max_temperature_error_k", "hot_spot_shape")
"""``max_temperature_error_k`` only when the error estimate is asked for."""
TAIL_COLUMNS = ("solve_time_s", "status", "error")
COLUMN_GROUPS = (("probe:", "probes"), ("heat_out_w:", "boundaries"), ("margin_k:", "limits"),
                 ("peak_c:", "transient peaks"), ("periodic_peak_c:", "transient periodic"),
                 ("zth_k_per_w:", "transient zth"), ("conductor_max_rise_k:", "conductors"),
                 ("conductor_loss_w:", "conductors"))
"""Per-name columns: prefix and the summary section they come from (the transient ones
only for a model with [transient])."""
TEXT_COLUMNS = ("variant", "hot_spot_shape", "status", "error")


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


def _shortest(value: float) -> str:
    """The shortest text that reads back to ``value`` (``10`` rather than ``10.0``)."""
    text = repr(float(value))
    return text[:-2] if text.endswith(".0") else text


def _significant(value: float, digits: int) -> str:
    """``value`` rounded to ``digits`` significant digits, in its shortest text."""
    return _shortest(float(f"{value:.{digits}g}") + 0.0)         # + 0.0: no "-0"


def _fixed(value: float, decimals: int) -> str:
    text = f"{value:.{decimals}f}"
    return text[1:] if text.startswith("-") and not text.strip("-0.") else text


def cell_text(column: str, value: Any, *, varied: tuple[str, ...] | list[str] = ()) -> str:
    """How ``sweep.csv`` writes ``value`` in ``column`` (the rule in the module's
    docstring): empty for None, text as it is, numbers to the digits they carry."""
    if value is None:
        return ""
    if isinstance(value, bool) or not isinstance(value, int | float):
        return str(value)
    if column in varied:
        return _shortest(value)
    if column in ("max_temperature_c", "solve_time_s") or column.startswith(
            ("probe:", "margin_k:")):
        return _fixed(value, 2 if column == "solve_time_s" else 3)
    if column == "max_temperature_error_k":
        return _significant(value, 2)
    return _significant(value, 6)            # heat_out_w:NAME, and any other number


def _csv_text(columns: list[str], rows: list[dict[str, Any]], *,
              varied: tuple[str, ...] | list[str] = ()) -> str:
    import io

    buf = io.StringIO()
    writer = csv.writer(buf, lineterminator="\n")
    writer.writerow(columns)
    for r in rows:
        writer.writerow([cell_text(c, r.get(c), varied=varied) for c in columns])
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
            elif key in TEXT_COLUMNS:
                row[key] = text
            else:
                try:
                    row[key] = float(text)
                except ValueError:
                    row[key] = text
        out.append(row)
    return out


# ---------------------------------------------------------------------------
# Units of the params, from the keys they feed

_KEY_UNITS = {
    **dict.fromkeys(("x", "y", "width", "height", "r", "dx", "dy", "drill", "plating",
                     "pitch", "mesh_size", "thickness", "size", "depth", "at", "polygon",
                     "box"), "length"),
    "power": "W", "power_density": "W/m³", "heat_flux": "W/m²", "h": "W/(m²·K)",
    **dict.fromkeys(("max_temperature", "temperature", "ambient", "surroundings"), "°C"),
    "resistance": "m²·K/W", "accuracy": "K",
    **dict.fromkeys(("k", "kx", "ky"), "W/(m·K)"),
    **dict.fromkeys(("emissivity", "coverage", "count", "per_decade", "foster_terms"), ""),
    "density": "kg/m³", "specific_heat": "J/(kg·K)", "current": "A", "resistivity": "Ω·m",
    "resistivity_reference": "°C", "temperature_coefficient": "1/K",
    **dict.fromkeys(("end", "first", "every", "period", "delay", "snapshots"), "s"),
}
"""The unit of each model key that takes a number (docs/model-format.md); ``""`` is a
pure number. A conductivity table's rows are ``[°C, W/(m·K)]``."""


def _key_unit(path: tuple, length: str) -> str | None:
    keys = [p for p in path if isinstance(p, str)]
    if not keys or keys[0] in ("params", "mesh") and len(keys) == 1:
        return None
    unit = _KEY_UNITS.get(keys[-1])
    if keys[-1] == "width" and any(k.endswith("_pulse") for k in keys):
        unit = "s"                                       # a pulse's width is a time
    table = next((k for k in keys if k.endswith(("_table", "_steps"))), None)
    if table and path and isinstance(path[-1], int):     # [s, value] rows of a schedule
        unit = "s" if path[-1] == 0 else _KEY_UNITS.get(
            {"power": "power", "current": "current"}.get(table.split("_")[0], table[:-6]))
    if keys[-1] in ("k", "kx", "ky") and path and isinstance(path[-1], int):
        unit = "°C" if path[-1] == 0 else unit           # a k(T) table row
    return length if unit == "length" else unit


def _terms(node: ast.AST) -> list[str]:
    """Param names that stand alone as a term of a sum (times or over a plain number, or
    inside ``min``/``max``/``abs``): by dimensional homogeneity each has the sum's unit."""
    if isinstance(node, ast.Name):
        return [node.id]
    if isinstance(node, ast.UnaryOp):
        return _terms(node.operand)
    if isinstance(node, ast.BinOp):
        if isinstance(node.op, ast.Add | ast.Sub):
            return _terms(node.left) + _terms(node.right)
        if isinstance(node.op, ast.Mult | ast.Div) and isinstance(node.right, ast.Constant):
            return _terms(node.left)
        if isinstance(node.op, ast.Mult) and isinstance(node.left, ast.Constant):
            return _terms(node.right)
    if (isinstance(node, ast.Call) and isinstance(node.func, ast.Name)
            and node.func.id in ("min", "max", "abs")):
        return [n for a in node.args for n in _terms(a)]
    return []


def param_units(model: Model) -> dict[str, str]:
    """The unit of each param that can be told from the keys it feeds: a param given
    as a key's value (``power = "p_die"`` -> W), or as a term of a sum there
    (``x = "x_pkg - 2*via_pitch"`` -> the model's length unit), also through other
    params (``h = "h_air"``, ``h_air = "h_conv + h_rad"``). A param whose uses disagree,
    or that only enters products and functions, gets none."""
    length = {"um": "µm"}.get(model.length_unit, model.length_unit)
    names = {n for n, _ in model.params}
    found: dict[str, set[str]] = {}
    inside: dict[str, list[str]] = {}               # param -> the params in its sum

    def visit(value: Any, path: tuple) -> None:
        if isinstance(value, Mapping):
            for key, item in value.items():
                visit(item, (*path, key))
        elif isinstance(value, list):
            for k, item in enumerate(value):
                visit(item, (*path, k))
        elif isinstance(value, str):
            try:
                terms = [t for t in _terms(ast.parse(value, mode="eval").body) if t in names]
            except (SyntaxError, ValueError, RecursionError):
                return
            if len(path) == 2 and path[0] == "params":
                inside[path[1]] = terms
                return
            unit = _key_unit(path, length)
            for t in terms if unit is not None else ():
                found.setdefault(t, set()).add(unit)

    visit({k: v for k, v in model.data.items() if k != "params"}, ())
    visit({"params": model.data.get("params", {})}, ())
    for _ in range(len(names)):                      # through params, to a fixed point
        grew = False
        for outer, terms in inside.items():
            if len(found.get(outer, ())) == 1:
                for t in terms:
                    if not found.get(t, set()) >= found[outer]:
                        found.setdefault(t, set()).update(found[outer])
                        grew = True
        if not grew:
            break
    return {n: next(iter(u)) for n, u in found.items() if len(u) == 1}


def axis_label(name: str, unit: str | None) -> str:
    """``name, unit`` (``p_die, W``); the name alone for a pure number or no unit."""
    return f"{name}, {unit}" if unit else name


# ---------------------------------------------------------------------------
# sweep.png


def _limit_lines(result: SweepResult, ok: list[dict[str, Any]]
                 ) -> list[tuple[str, list[float], bool]]:
    """The limits to draw: ``(label, limit per ok row, is the hot spot's own)``.

    A limited shape that holds the hot spot in some row is drawn (there the plotted
    figure is that shape's max); when none does, only the lowest limit, against which
    the hot spot is a bound from above. Shapes with equal limits share one line.
    """
    names = [c[len("margin_k:"):] for c in result.columns if c.startswith("margin_k:")]
    per_row: dict[str, list[float | None]] = {}
    for n in names:
        base = re.sub(r"\[\d+\]$", "", n)            # a repeated shape's copy
        per_row[n] = [result.limits.get(r["variant"], {}).get(base) for r in ok]
    per_row = {n: v for n, v in per_row.items() if v and None not in v}
    if not per_row:
        return []
    hot = {r.get("hot_spot_shape") for r in ok}
    own = [n for n in per_row if n in hot]
    chosen = own or [min(per_row, key=lambda n: min(per_row[n]))]
    groups: dict[tuple, list[str]] = {}
    for n in chosen:
        groups.setdefault(tuple(per_row[n]), []).append(n)
    out = []
    for values, members in groups.items():
        shown = ", ".join(members[:3]) + (" …" if len(members) > 3 else "")
        label = f"{shown} limit" if own else f"{shown} limit (lowest; hot spot elsewhere)"
        out.append((label, list(values), bool(own)))
    return out


def plot_sweep(result: SweepResult, path: str | Path | None = None, *, fig=None):
    """Hot-spot temperature against the first varied param, one line per combination of
    the other params' values (one line for zipped lists). Failed variants are left out.

    Axis labels carry units: °C for the temperature, and for a param the unit of the
    model keys it feeds (:func:`param_units`, held in ``result.units``), else its name
    alone. Temperature limits (``max_temperature``) are drawn as dashed lines named
    after their shape (see :func:`_limit_lines`); points where any shape exceeds its
    limit (a negative ``margin_k``) are ringed.
    """
    from matplotlib import colormaps
    from matplotlib.figure import Figure

    fig = fig or Figure(figsize=(7.5, 4.8), layout="constrained")
    ax = fig.add_subplot()
    x_name = result.varied[0]
    others = result.varied[1:]
    units = getattr(result, "units", {}) or {}
    ok = [r for r in result.rows if r["status"] == "ok"
          and isinstance(r.get(x_name), int | float)]
    lines: dict[tuple, list[dict[str, Any]]] = {}
    for r in ok:
        lines.setdefault(() if result.zipped else tuple(r.get(n) for n in others), []).append(r)

    def show(n: str, v: Any, *, unit: bool = True) -> str:
        u = units.get(n) if unit else None
        return _show(v) if not u else f"{_show(v)}{'' if u.startswith('°') else ' '}{u}"

    def colour(k: int):
        return colormaps["viridis"](0.85 * k / (len(lines) - 1) if len(lines) > 1 else 0.3)

    for k, (key, members) in enumerate(lines.items()):
        members.sort(key=lambda r: r[x_name])
        label = (None if not key else show(others[0], key[0], unit=False) if len(key) == 1 else
                 ", ".join(f"{n} = {show(n, v)}" for n, v in zip(others, key, strict=True)))
        ax.plot([r[x_name] for r in members], [r["max_temperature_c"] for r in members],
                marker="o", label=label, gid="series",
                color=colour(k))
    limit_colour = colormaps["magma"](0.55)
    temps = [r["max_temperature_c"] for r in ok]
    span = (max(temps) - min(temps)) if temps else 0.0
    for label, values, _ in _limit_lines(result, ok):
        if len(set(values)) == 1:
            limit = values[0]
            ax.axhline(limit, color=limit_colour, linestyle="--", linewidth=1.2, gid="limit")
            # The name at the end of the line where the data keep clear of it.
            near = [min(abs(r["max_temperature_c"] - limit) for r in ok if r[x_name] == end)
                    for end in (min(r[x_name] for r in ok), max(r[x_name] for r in ok))]
            left = near[0] >= 0.15 * span or near[0] >= near[1]
            ax.annotate(f"{label} {limit:g} °C", (0.0 if left else 1.0, limit),
                        xycoords=("axes fraction", "data"), xytext=(4 if left else -4, 3),
                        textcoords="offset points", ha="left" if left else "right",
                        va="bottom", fontsize=8, color=limit_colour, gid="limit-label")
        else:       # the limit follows a param: one dashed line per series, in its colour
            limit_of = {id(r): v for r, v in zip(ok, values, strict=True)}
            for k, members in enumerate(lines.values()):
                ax.plot([r[x_name] for r in members], [limit_of[id(r)] for r in members],
                        color=limit_colour if len(lines) == 1 else colour(k), linestyle="--",
                        linewidth=1.2, gid="limit", label=None if k else label if len(lines) == 1
                        else f"{label} (each line's own)")
    over = [r for r in ok if any(isinstance(v, int | float) and v < 0 for c, v in r.items()
                                 if c.startswith("margin_k:"))]
    if over:
        ax.plot([r[x_name] for r in over], [r["max_temperature_c"] for r in over],
                linestyle="none", marker="o", markersize=12, markerfacecolor="none",
                markeredgewidth=1.5, color=limit_colour, gid="exceeded",
                label="a limit exceeded")
    x_unit = units.get(x_name)
    ax.set_xlabel(axis_label(x_name, x_unit) + (f" (paired with {', '.join(others)})"
                                                if result.zipped and others else ""))
    ax.set_ylabel("hot-spot temperature, °C")
    hot = {r.get("hot_spot_shape") for r in ok}
    where = f" (in {next(iter(hot))})" if len(hot) == 1 else ""
    ax.set_title("\n".join([*textwrap.wrap(result.title, 80),
                            f"hot spot{where} against {x_name}"]), fontsize=10)
    ax.grid(True, alpha=0.3)
    if len(lines) > 1 or over:
        title = ", ".join(axis_label(n, units.get(n)) for n in others) if len(lines) > 1 else None
        ax.legend(fontsize=8, title=title, title_fontsize=8)
    if not ok:
        ax.text(0.5, 0.5, "no variant succeeded", ha="center", va="center",
                transform=ax.transAxes)
    failed = len(result.rows) - len(ok)
    if failed:
        fig.text(0.01, 0.005, f"{failed} failed variant(s) not shown", fontsize=8)
    if path is not None:
        fig.savefig(path, dpi=110)
    return fig
