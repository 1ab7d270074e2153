"""Tables for any nested figures of a summary (or a comparison), so keys the report does
not know by name still reach the page: a value and its error estimate share one cell
(``max`` with ``max_error``, ``heat_w`` with ``heat_error_w``, ``delta`` with ``error``).
"""

from __future__ import annotations

from collections.abc import Mapping
from typing import Any

from .html import esc, figure_cell, num, table, tag


def is_scalar(value: Any) -> bool:
    """A number, text, truth value or None (what fits in one cell)."""
    return value is None or isinstance(value, str | int | float | bool)


def _is_points(value: Any) -> bool:
    """A list of points (lists of scalars), as a cut line's ``through``."""
    return (isinstance(value, list | tuple) and bool(value)
            and all(isinstance(p, list | tuple) and all(is_scalar(c) for c in p)
                    for p in value))


def _is_flat(value: Any) -> bool:
    """What fits in one cell: a scalar, a list of scalars (comma-separated) or a list of
    points (joined by arrows)."""
    return is_scalar(value) or _is_points(value) or (
        isinstance(value, list | tuple) and all(is_scalar(v) for v in value))


def error_pairs(keys: list[str]) -> dict[str, str]:
    """``{value key: its error key}`` among ``keys``: ``NAME_error`` or ``..._error_UNIT``
    goes with the key without ``_error``; ``error...`` with ``delta...``."""
    pairs: dict[str, str] = {}
    for e in keys:
        if "error" not in e:
            continue
        for k in (e.replace("_error", ""), e.replace("error", "delta")):
            if k != e and k in keys and k not in pairs:
                pairs[k] = e
                break
    return pairs


def cell_text(value: Any, error: Any = None, *, spec: str = ".4g") -> Any:
    """One cell: a figure (with its ± when given) right-aligned, text as it is."""
    if _is_points(value):
        return " → ".join("(" + ", ".join(num(c) for c in p) + ")" for p in value)
    if isinstance(value, list | tuple):
        return ", ".join(num(v) for v in value)
    if isinstance(value, bool) or not isinstance(value, int | float):
        return num(value)
    text = num(value, spec)
    if isinstance(error, int | float) and not isinstance(error, bool):
        text += f" ± {error:.2g}"
    return figure_cell(text)


def label(key: str) -> str:
    """A column heading from a key: underscores to spaces, units kept readable."""
    words = key.replace("_", " ")
    for tail, unit in ((" k per w", " (K/W)"), (" w", " (W)"), (" k", " (K)"),
                       (" c", " (°C)"), (" deg", " (°)")):
        if words.endswith(tail):
            return words[: -len(tail)] + unit
    return words


def _rows_table(data: Mapping[str, Mapping[str, Any]], first: str) -> str:
    """Rows are the outer keys, columns the union of the inner keys (errors merged)."""
    keys: list[str] = []
    for inner in data.values():
        keys += [k for k in inner if k not in keys and _is_flat(inner[k])]
    pairs = error_pairs(keys)
    shown = [k for k in keys if k not in pairs.values()]
    rows = [[name, *(cell_text(inner.get(k), inner.get(pairs.get(k, ""))) for k in shown)]
            for name, inner in data.items()]
    return table([first, *(label(k) for k in shown)], rows)


def _pairs_table(data: Mapping[str, Any]) -> str:
    """A two-column table of flat values (errors merged)."""
    keys = [k for k in data if _is_flat(data[k])]
    pairs = error_pairs(keys)
    return table(["", "value"], [[label(k), cell_text(data[k], data.get(pairs.get(k, "")))]
                                 for k in keys if k not in pairs.values()])


def render(data: Any, *, first: str = "name", depth: int = 0) -> str:
    """HTML for any figures: flat values as a table of pairs, a mapping of flat mappings as
    one table (its keys down, the figures across), deeper mappings as headed parts."""
    if _is_flat(data):
        c = cell_text(data)
        return tag("p", esc(getattr(c, "text", c)))
    if isinstance(data, list | tuple):
        return "".join(render(v, first=first, depth=depth + 1) for v in data)
    if not isinstance(data, Mapping) or not data:
        return tag("p", "none", class_="muted")
    flat = {k: v for k, v in data.items() if _is_flat(v)}
    nested = {k: v for k, v in data.items() if not _is_flat(v)}
    out = _pairs_table(flat) if flat else ""
    if nested and all(isinstance(v, Mapping) and v and all(_is_flat(x) for x in v.values())
                      for v in nested.values()):
        return out + _rows_table(nested, first)
    for k, v in nested.items():
        heading = "h3" if depth == 0 else "h4"
        out += tag(heading, esc(k)) + render(v, first=first, depth=depth + 1)
    return out
