"""The report of one run: a self-contained HTML page from a result folder
(``summary.json`` and the PNG maps) or from a :class:`~heat2d.post.results.Result` in
memory, optionally with a comparison (``compare.json``) appended."""

from __future__ import annotations

import json
import os
import secrets
import tempfile
from pathlib import Path
from typing import Any

from ..errors import ModelError
from ..version import __version__
from . import tables
from .compare_section import compare_section
from .html import definitions, document, esc, figure_cell, image, num, para, section, table, tag
from .model_facts import ModelFacts, find_model_file, model_facts

REPORT_NAME = "report.html"
"""The report's file name inside a result folder (``heat2d run --report``)."""


class ReportError(ModelError):
    """A folder that holds no run or sweep result, or a report that cannot be written
    (bad input to the command line: exit status 2)."""


def caution_box(text: str) -> str:
    """The caution every result carries, boxed."""
    return tag("div", tag("strong", "Caution. ") + esc(text), class_="caution")


def _identity(summary: dict[str, Any], facts: ModelFacts) -> str:
    m = summary["model"]
    pairs = [("model file", facts.path),
             ("SHA-256 of the model file", facts.digest or "- (" + facts.problem + ")"),
             ("solved by", f"heat2d {summary['heat2d_version']}"),
             ("report made by", f"heat2d {__version__}"),
             ("geometry", f"length unit {m['length_unit']}, "
              + ("axisymmetric (full revolution)" if m.get("axisymmetric")
                 else f"depth {num(m['depth'])} {m['length_unit']} "
                      f"(powers and heat flows are for this depth)"))]
    if facts.size is not None:
        pairs.insert(2, ("model file size", f"{facts.size} bytes"))
    return definitions(pairs)


def _params_table(summary: dict[str, Any], per_row: int = 4) -> str:
    """The run's params, ``per_row`` name-value pairs to a row (the list is long)."""
    items = list((summary["model"].get("params") or {}).items())
    if not items:
        return ""
    rows = []
    for i in range(0, len(items), per_row):
        chunk = items[i:i + per_row] + [("", "")] * (per_row - len(items[i:i + per_row]))
        rows.append([c for k, v in chunk for c in (k, figure_cell(num(v, ".6g")))])
    return tag("h3", "Parameters of this run") + table(["param", "value"] * per_row, rows)


def _materials(facts: ModelFacts) -> str:
    if not facts.materials:
        return para(facts.problem or "No material.", cls="muted")
    rows = []
    for m in facts.materials:
        tables_ = dict(m.tables)
        if tables_.get("kx") is not None and tables_.get("kx") == tables_.get("ky"):
            tables_ = {"k": tables_["kx"]}          # isotropic k(T): one table
        varies = "; ".join(f"{axis}(T): " + ", ".join(f"{k:g} at {t:g} °C" for t, k in pts)
                           for axis, pts in tables_.items())
        rows.append([m.name, figure_cell(num(m.kx)), figure_cell(num(m.ky)),
                     varies or "constant", m.note or "(no source given in the model)",
                     ", ".join(m.shapes)])
    return (table(["material", "kx (W/(m·K))", "ky (W/(m·K))", "k with temperature",
                   "values and source (the model's note)", "used by"], rows)
            + para("kx along the model's x axis, ky along y; for a k(T) table the "
                   "columns give k at 25 °C and the table lists its points.", cls="note"))


def _images(images: list[tuple[str, bytes]], title: str) -> str:
    if not images:
        return para("No temperature map in the folder (the run wrote no PNG).", cls="muted")
    out = ""
    for i, (name, data) in enumerate(images):
        what = "Temperature map" if i == 0 else "Further view"
        out += image(data, alt=f"{what}: {title}", caption=f"{what} ({name})")
    return out


def summary_report(summary: dict[str, Any], *, images: list[tuple[str, bytes]] = (),
                   facts: ModelFacts | None = None,
                   compare: dict[str, Any] | None = None) -> str:
    """The report page of a run from its summary, its PNG images (name and bytes, the
    temperature map first), what is known of its model file and an optional comparison
    (from :func:`~heat2d.report.compare_section.read_compare`)."""
    facts = facts or model_facts(summary, find_model_file(summary))
    title = summary["model"].get("title") or Path(summary["model"]["file"]).stem
    top = tag("header", tag("h1", esc(title))
              + para(f"heat2d run report · model {summary['model']['file']}", cls="muted"))
    first = (_identity(summary, facts) + tables.headline(summary)
             + caution_box(summary["caution"]) + _images(list(images), title))
    body = [top + tag("section", first, id="overview"),
            section("Temperatures", tag("h3", "Shapes") + tables.shapes_table(summary)
                    + tag("h3", "Limits and margins") + tables.limits_table(summary)
                    + tag("h3", "Probes") + tables.probes_table(summary), anchor="temperatures"),
            section("Heat paths", tag("h3", "Boundaries") + tables.boundaries_table(summary)
                    + tag("h3", "Interfaces") + tables.interfaces_table(summary)
                    + tag("h3", "Thermal resistance: the °C/W matrix")
                    + tables.resistance_tables(summary), anchor="heat")]
    if summary.get("package"):
        body.append(section("Package figures", tables.package_tables(summary), page=False,
                            anchor="package"))
    if summary.get("cuts"):
        body.append(section("Heat across cut lines", tables.cuts_table(summary), page=False,
                            anchor="cuts"))
    model_part = ""
    if facts.description:
        model_part += tag("h3", "Description (from the model file)") + tag(
            "pre", esc(facts.description), class_="description")
    model_part += tag("h3", "Materials") + _materials(facts) + _params_table(summary)
    body.append(section("The model", model_part, anchor="model"))
    extra = tables.further(summary)
    body.append(section("Mesh, solver and error estimate", tables.numerics(summary)
                        + tag("h3", "Warnings") + tables.warnings_list(summary)
                        + (tag("h3", "Further figures") + extra if extra else ""),
                        anchor="numerics"))
    if compare is not None:
        body.append(compare_section(compare))
    body.append(tag("footer", caution_box(summary["caution"]) + para(
        f"Written by heat2d {__version__} from {summary['model']['file']}"
        + (f" (SHA-256 {facts.digest})" if facts.digest else "") + ".", cls="note")))
    return document(f"{title} · heat2d report", "".join(body))


def folder_images(folder: Path) -> list[tuple[str, bytes]]:
    """The PNGs of a result folder, the temperature map (named after the model) first."""
    pngs = sorted(folder.glob("*.png"), key=lambda p: (p.name.count("-") + p.name.count("_"),
                                                       p.name))
    return [(p.name, p.read_bytes()) for p in pngs]


def read_summary(folder: str | Path) -> dict[str, Any]:
    """The ``summary.json`` of a result folder (:class:`ReportError` if missing)."""
    path = Path(folder) / "summary.json"
    try:
        return json.loads(path.read_text(encoding="utf-8"))
    except (OSError, ValueError) as exc:
        raise ReportError(f"not a result folder (no readable summary.json): {exc}",
                          file=str(folder)) from None


def run_report(folder: str | Path, *, compare: dict[str, Any] | None = None,
               model_file: str | Path | None = None) -> str:
    """The report page of a result folder (from ``heat2d run``).

    Parameters
    ----------
    folder
        Holds ``summary.json`` and the PNG map(s).
    compare
        A comparison to append (:func:`~heat2d.report.compare_section.read_compare`).
    model_file
        The model file when the recorded path no longer leads to it.
    """
    folder = Path(folder)
    summary = read_summary(folder)
    facts = model_facts(summary, find_model_file(summary, folder=folder,
                                                 model_file=model_file))
    return summary_report(summary, images=folder_images(folder), facts=facts,
                          compare=compare)


def result_report(result, *, compare: dict[str, Any] | None = None,
                  show_mesh: bool = False) -> str:
    """The report page of a :class:`~heat2d.post.results.Result` in memory (its map drawn
    here)."""
    from ..post.writers import write_png

    with tempfile.TemporaryDirectory() as scratch:
        png = Path(scratch) / f"{result.model.stem}.png"
        write_png(result, png, show_mesh=show_mesh)
        images = [(png.name, png.read_bytes())]
    summary = json.loads(json.dumps(result.summary, allow_nan=False))
    return summary_report(summary, images=images,
                          facts=model_facts(summary, find_model_file(summary)),
                          compare=compare)


def write_report(text: str, path: str | Path) -> Path:
    """Write the page to ``path`` atomically: a scratch file beside it (``.NAME.new-PID-
    HEX``), then one rename, so ``path`` is the old page or the new one, never part."""
    path = Path(path)
    scratch = path.with_name(f".{path.name}.new-{os.getpid()}-{secrets.token_hex(4)}")
    try:
        scratch.write_text(text, encoding="utf-8")
        os.replace(scratch, path)
    except OSError as exc:
        scratch.unlink(missing_ok=True)
        raise ReportError(f"cannot write the report: {exc}", file=str(path)) from None
    except BaseException:
        scratch.unlink(missing_ok=True)
        raise
    return path
