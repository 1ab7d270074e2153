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

from ..version import __version__
from . import tables
from .compare_section import compare_section
from .html import document, esc, para, section, tag
from .model_facts import ModelFacts, find_model_file, model_facts
from .parts import ReportError, caution_box, identity, map_images, materials_table, params_table
from .transient_report import is_transient, transient_report

REPORT_NAME = "report.html"
"""The report's file name inside a result folder (``heat2d run --report``)."""


def summary_report(summary: dict[str, Any], *, images: list[tuple[str, bytes]] = (),
                   facts: ModelFacts | None = None,
                   compare: dict[str, Any] | None = None) -> str:
    """The report page of a run from its summary, its PNG images (name and bytes, the
    temperature map first), what is known of its model file and an optional comparison
    (from :func:`~heat2d.report.compare_section.read_compare`). A transient run's summary
    (``"mode": "transient"``) gets the page of
    :func:`~heat2d.report.transient_report.transient_report`."""
    facts = facts or model_facts(summary, find_model_file(summary))
    if is_transient(summary):
        return transient_report(summary, images=images, facts=facts, compare=compare)
    title = summary["model"].get("title") or Path(summary["model"]["file"]).stem
    top = tag("header", tag("h1", esc(title))
              + para(f"heat2d run report · model {summary['model']['file']}", cls="muted"))
    first = (identity(summary, facts) + tables.headline(summary)
             + caution_box(summary["caution"]) + map_images(list(images), title))
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
    model_part += tag("h3", "Materials") + materials_table(facts) + params_table(summary)
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
    here), or of a transient run's ``TransientResult`` (its files written to a scratch
    folder for the plots)."""
    from ..post.writers import write_png

    if getattr(result, "history", None) is not None:
        with tempfile.TemporaryDirectory() as scratch:
            folder = Path(scratch) / "run"
            result.save(folder, show_mesh=show_mesh)
            summary = read_summary(folder)
            return summary_report(summary, images=folder_images(folder),
                                  facts=model_facts(summary, find_model_file(summary)),
                                  compare=compare)

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
