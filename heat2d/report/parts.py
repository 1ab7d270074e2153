"""Pieces every run report shares, steady or transient: the error type, the caution box,
the identity list, the params table, the materials table and the embedded maps."""

from __future__ import annotations

from typing import Any

from ..errors import ModelError
from ..version import __version__
from .html import definitions, esc, figure_cell, image, num, para, table, tag
from .model_facts import ModelFacts


class ReportError(ModelError):
    """A folder that holds no run or sweep result, or a report that cannot be written
    (bad input to the command line: exit status 2)."""


def caution_box(text: str) -> str:
    """The caution every result carries, boxed."""
    return tag("div", tag("strong", "Caution. ") + esc(text), class_="caution")


def identity(summary: dict[str, Any], facts: ModelFacts,
             extra: list[tuple[str, str]] = ()) -> str:
    """Model file, its digest and size, the versions, the geometry, then ``extra``."""
    m = summary["model"]
    pairs = [("model file", facts.path),
             ("SHA-256 of the model file", facts.digest or "- (" + facts.problem + ")"),
             ("solved by", f"heat2d {summary['heat2d_version']}"),
             ("report made by", f"heat2d {__version__}"),
             ("geometry", f"length unit {m['length_unit']}, "
              + ("axisymmetric (full revolution)" if m.get("axisymmetric")
                 else f"depth {num(m['depth'])} {m['length_unit']} "
                      f"(powers and heat flows are for this depth)")), *extra]
    if facts.size is not None:
        pairs.insert(2, ("model file size", f"{facts.size} bytes"))
    return definitions(pairs)


def params_table(summary: dict[str, Any], per_row: int = 4) -> str:
    """The run's params, ``per_row`` name-value pairs to a row (the list is long)."""
    items = list((summary["model"].get("params") or {}).items())
    if not items:
        return ""
    rows = []
    for i in range(0, len(items), per_row):
        chunk = items[i:i + per_row] + [("", "")] * (per_row - len(items[i:i + per_row]))
        rows.append([c for k, v in chunk for c in (k, figure_cell(num(v, ".6g")))])
    return tag("h3", "Parameters of this run") + table(["param", "value"] * per_row, rows)


def _capacity(value: float | None, varies: bool) -> str:
    return "table of T" if varies else num(value)


def materials_table(facts: ModelFacts, *, capacity: bool = False) -> str:
    """Each material: k along x and y, k(T), its note and the shapes made of it; with
    ``capacity`` also its density and specific heat (a transient run needs them)."""
    if not facts.materials:
        return para(facts.problem or "No material.", cls="muted")
    rows = []
    for m in facts.materials:
        tables_ = dict(m.tables)
        if tables_.get("kx") is not None and tables_.get("kx") == tables_.get("ky"):
            tables_ = {"k": tables_["kx"]}          # isotropic k(T): one table
        varies = "; ".join(f"{axis}(T): " + ", ".join(f"{k:g} at {t:g} °C" for t, k in pts)
                           for axis, pts in tables_.items())
        row = [m.name, figure_cell(num(m.kx)), figure_cell(num(m.ky)), varies or "constant"]
        if capacity:
            row += [figure_cell(_capacity(m.density, m.density_varies)),
                    figure_cell(_capacity(m.specific_heat, m.specific_heat_varies))]
        rows.append(row + [m.note or "(no source given in the model)", ", ".join(m.shapes)])
    heads = ["material", "kx (W/(m·K))", "ky (W/(m·K))", "k with temperature"]
    if capacity:
        heads += ["density (kg/m³)", "specific heat (J/(kg·K))"]
    return (table([*heads, "values and source (the model's note)", "used by"], rows)
            + para("kx along the model's x axis, ky along y; for a k(T) table the "
                   "columns give k at 25 °C and the table lists its points.", cls="note"))


def map_images(images: list[tuple[str, bytes]], title: str, *, what: str = "Temperature map",
               caption: str = "") -> str:
    """The temperature map first, then any further views, each embedded."""
    if not images:
        return para("No temperature map in the folder (the run wrote no PNG).", cls="muted")
    out = ""
    for i, (name, data) in enumerate(images):
        kind = what if i == 0 else "Further view"
        text = f"{kind} ({name})" + (f": {caption}" if i == 0 and caption else "")
        out += image(data, alt=f"{kind}: {title}", caption=text)
    return out
