"""The comparison of two runs in a report, read from a compare folder (``compare.json``
and ``compare.png`` written by ``heat2d compare A B --out DIR``)."""

from __future__ import annotations

import json
from pathlib import Path
from typing import Any

from ..errors import ModelError
from .compare_transient import transient_compare_section
from .generic import cell_text, label
from .html import definitions, esc, image, para, section, table, tag

COMPARE_JSON = "compare.json"
COMPARE_PNG = "compare.png"

_TABLES = (("shapes", "Shapes: maximum temperature (°C)", "shape", ".2f"),
           ("shape_means", "Shapes: mean temperature (°C)", "shape", ".2f"),
           ("probes", "Probes (°C)", "probe", ".2f"),
           ("boundaries", "Boundaries: heat out (W)", "boundary", ".4g"),
           ("resistances", "Thermal resistance (K/W)", "figure", ".4g"))
"""The tables of changes: key in compare.json, heading, first column, number format."""


def read_compare(folder: str | Path) -> dict[str, Any]:
    """``compare.json`` of a compare folder, with ``compare.png``'s bytes under
    ``"_png"`` when present (:class:`~heat2d.errors.ModelError` if the file is missing)."""
    folder = Path(folder)
    try:
        data = json.loads((folder / COMPARE_JSON).read_text(encoding="utf-8"))
    except (OSError, ValueError) as exc:
        raise ModelError(f"not a compare folder (no readable {COMPARE_JSON}): {exc}",
                         file=str(folder)) from None
    png = folder / COMPARE_PNG
    if png.is_file():
        data["_png"] = png.read_bytes()
    return data


def _side(data: dict[str, Any], key: str) -> str:
    side = data.get(key) or {}
    return " · ".join(str(side[k]) for k in ("title", "model", "folder") if side.get(k))


def _figures_table(entries: dict[str, Any], first: str, spec: str) -> str:
    """One row per name: A, B, Δ ± combined error and whether Δ exceeds it."""
    keys: list[str] = []
    for e in entries.values():
        keys += [k for k in e if k not in keys]
    value_keys = [k for k in keys if k != "significant" and "error" not in k
                  and not k.startswith("delta")]
    delta = next((k for k in keys if k.startswith("delta")), None)
    error = next((k for k in keys if k.startswith("error")), None)
    rows, bad = [], []
    for i, (name, e) in enumerate(entries.items()):
        if e.get("significant"):
            bad.append(i)
        row = [name, *(cell_text(e.get(k), spec=spec) for k in value_keys)]
        if delta:
            row.append(cell_text(e.get(delta), e.get(error), spec=spec))
        if "significant" in keys:
            row.append("yes: larger than the error bars" if e.get("significant")
                       else "no error bars" if e.get("significant") is None
                       else "no: within the error bars")
        rows.append(row)
    heads = [first, *(label(k).replace("a ", "A ").replace("b ", "B ") if len(k) > 1
                      else k.upper() for k in value_keys)]
    if delta:
        heads.append("Δ (B − A) ± combined error")
    if "significant" in keys:
        heads.append("change real?")
    return table(heads, rows, bad_rows=bad, mark="changed")


def _flatten(entries: dict[str, Any]) -> dict[str, Any]:
    """``{source: {target: entry}}`` (the °C/W changes) to ``{"source → target": entry}``."""
    out: dict[str, Any] = {}
    for name, e in entries.items():
        if isinstance(e, dict) and e and all(isinstance(v, dict) for v in e.values()):
            out.update({f"{name} → {inner}": v for inner, v in e.items()})
        else:
            out[name] = e
    return out


def _hot_spot(hs: dict[str, Any]) -> str:
    def where(side: Any) -> str:
        if not isinstance(side, dict):
            return "-"
        t = cell_text(side.get("temperature"), side.get("temperature_error"), spec=".2f")
        return (f"{getattr(t, 'text', t)} °C"
                f" in \"{side.get('shape')}\" at ({side.get('x'):.4g}, {side.get('y'):.4g})")

    pairs = [("hot spot of A", where(hs.get("a"))), ("hot spot of B", where(hs.get("b")))]
    if isinstance(hs.get("delta"), int | float):
        pairs.append(("Δ (B − A)", cell_text(hs["delta"], hs.get("error"), spec=".2f").text + " K"))
    return tag("h3", "Hot spot") + definitions(pairs)


def compare_section(data: dict[str, Any]) -> str:
    """The comparison section: which runs, the verdict in words, the tables of Δ with
    their combined ± and the difference (or side by side) map (two transient runs:
    :func:`~heat2d.report.compare_transient.transient_compare_section`)."""
    if data.get("mode") == "transient":
        return transient_compare_section(data)
    out = definitions([("A", _side(data, "a")), ("B", _side(data, "b")),
                       ("geometry", "the same: the map shows B − A" if data.get(
                           "same_geometry") else "different: the maps are side by side")])
    verdict = data.get("verdict")
    if verdict:
        lines = [ln for ln in str(verdict).splitlines() if ln.strip()]
        out += tag("div", tag("strong", "Verdict. ") + esc(lines[0]) + (tag("ul", "".join(
            tag("li", esc(ln)) for ln in lines[1:])) if len(lines) > 1 else ""),
            class_="caution")
    if isinstance(data.get("hot_spot"), dict):
        out += _hot_spot(data["hot_spot"])
    for key, heading, first, spec in _TABLES:
        entries = data.get(key)
        if isinstance(entries, dict) and entries:
            entries = _flatten(entries)
            if all(isinstance(v, dict) for v in entries.values()):
                out += tag("h3", esc(heading)) + _figures_table(entries, first, spec)
    for key, side in (("only_in_a", "A"), ("only_in_b", "B")):
        if data.get(key):
            out += para(f"Only in {side}: " + ", ".join(str(n) for n in data[key]) + ".")
    out += para("A change is called real when its size exceeds the combined error "
                "estimate of both runs; rows so marked are in bold.", cls="note")
    if data.get("caution"):
        out += para(str(data["caution"]), cls="note")
    if data.get("_png"):
        out += image(data["_png"], alt="comparison map",
                     caption="Difference map (B − A)" if data.get("same_geometry")
                     else "The two maps side by side")
    return section("Comparison with another run", out, anchor="compare")
