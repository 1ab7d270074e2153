"""The report of a sweep: a self-contained HTML page from a sweep folder (``sweep.csv``,
``sweep.png`` and the variants' folders)."""

from __future__ import annotations

import json
from pathlib import Path
from typing import Any

from ..sweep.table import CSV_NAME, PLOT_NAME, read_csv
from ..version import __version__
from .html import definitions, document, esc, figure_cell, image, num, para, section, table, tag
from .model_facts import find_model_file, model_facts
from .run_report import ReportError, caution_box

CAUTION = ("Estimates only: a 2-D section of an idealised model. Confirm against "
           "measurements and component ratings; product-safety standards, local codes and "
           "qualified engineering review take precedence over these results.")
"""Shown when no variant's summary is at hand to carry its own caution."""


def is_sweep_folder(folder: str | Path) -> bool:
    """Whether the folder holds a sweep's table."""
    return (Path(folder) / CSV_NAME).is_file()


def _first_summary(folder: Path) -> dict[str, Any] | None:
    for path in sorted(folder.glob("*/summary.json")):
        try:
            return json.loads(path.read_text(encoding="utf-8"))
        except (OSError, ValueError):
            continue
    return None


_GROUPS = (("probe:", "Probes (°C)", ".2f"), ("heat_out_w:", "Heat out per boundary (W)",
                                               ".4g"))
"""Per-name column groups shown as tables of their own: prefix, heading, number format."""
_MAIN = {"max_temperature_c": "max (°C)", "hot_spot_shape": "hot spot in",
         "solve_time_s": "solve (s)", "status": "status", "error": "error"}


def _cell(column: str, value: Any, row: dict[str, Any], spec: str = ".4g") -> Any:
    if column == "max_temperature_c" and isinstance(value, float):
        err = row.get("max_temperature_error_k")
        return figure_cell(f"{value:.2f}" + (f" ± {err:.2g}" if err else ""))
    if column.startswith("margin_k:") and isinstance(value, float):
        return figure_cell(f"{value:.2f}")
    if isinstance(value, float):
        return figure_cell(num(value, spec))
    return num(value)


def sweep_table(rows: list[dict[str, Any]]) -> str:
    """The sweep table, split so each part fits a page: the varied params with the hot
    spot (its ± in one cell), the margins and the status; then the probes and the heat out
    per boundary, one row per variant each. Failed variants are highlighted."""
    if not rows:
        return para("The sweep table is empty.", cls="muted")
    columns = list(rows[0])
    end = next((i for i, c in enumerate(columns) if c in _MAIN or ":" in c
                or c == "max_temperature_error_k"), len(columns))
    varied = columns[1:end]
    main = [*varied, *(c for c in columns if c in _MAIN and c != "error"
                       or c.startswith("margin_k:"))]
    if any(r.get("error") for r in rows):
        main.append("error")
    bad = [i for i, r in enumerate(rows) if r.get("status") not in (None, "ok")]
    out = table(["variant", *(_MAIN.get(c) or ("margin (K) " + c[9:] if c.startswith(
        "margin_k:") else c) for c in main)],
        [[r.get("variant"), *(_cell(c, r.get(c), r) for c in main)] for r in rows],
        bad_rows=bad)
    for prefix, heading, spec in _GROUPS:
        group = [c for c in columns if c.startswith(prefix)]
        if group:
            out += tag("h3", esc(heading)) + tag("div", table(
                ["variant", *(c[len(prefix):] for c in group)],
                [[r.get("variant"), *(_cell(c, r.get(c), r, spec) for c in group)]
                 for r in rows], bad_rows=bad), class_="wide")
    return out


def sweep_report(folder: str | Path, *, model_file: str | Path | None = None) -> str:
    """The report page of a sweep folder (from ``heat2d sweep``).

    Parameters
    ----------
    folder
        Holds ``sweep.csv``, ``sweep.png`` and one folder per variant.
    model_file
        The model file when the recorded path no longer leads to it.
    """
    folder = Path(folder)
    if not is_sweep_folder(folder):
        raise ReportError(f"not a sweep folder (no {CSV_NAME})", file=str(folder))
    rows = read_csv(folder / CSV_NAME)
    summary = _first_summary(folder)
    title = (summary or {}).get("model", {}).get("title") or folder.name
    ident = [("sweep folder", str(folder)), ("variants", str(len(rows))),
             ("failed", str(sum(r.get("status") not in (None, "ok") for r in rows))),
             ("report made by", f"heat2d {__version__}")]
    description = ""
    if summary is not None:
        facts = model_facts(summary, find_model_file(summary, folder=folder,
                                                     model_file=model_file))
        ident[1:1] = [("model file", facts.path),
                      ("SHA-256 of the model file", facts.digest or "- (" + facts.problem
                       + ")"), ("solved by", f"heat2d {summary['heat2d_version']}")]
        description = facts.description
    caution = (summary or {}).get("caution") or CAUTION
    first = definitions(ident) + caution_box(caution)
    plots = "".join(image(p.read_bytes(), alt=f"sweep plot {p.name}",
                          caption=f"Sweep plot ({p.name})")
                    for p in sorted(folder.glob("*.png"), key=lambda p: p.name != PLOT_NAME))
    first += plots or para("No sweep plot in the folder.", cls="muted")
    rest = tag("h3", "Description (from the model file)") + tag(
        "pre", esc(description), class_="description") if description else ""
    body = (tag("header", tag("h1", esc(title)) + para("heat2d sweep report", cls="muted"))
            + tag("section", first, id="plot")
            + section("Sweep table", sweep_table(rows) + para(
                "Each row is one variant; its full results are in its folder of the same "
                "name. Heat out is for the model's depth.", cls="note"), anchor="table")
            + (section("The model", rest, anchor="model") if rest else "")
            + tag("footer", caution_box(caution)))
    return document(f"{title} · heat2d sweep report", body)
