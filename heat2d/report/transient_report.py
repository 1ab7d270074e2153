"""The report of a transient run (a summary with ``"mode": "transient"``): the model facts
as for a steady run, each shape's peak over the run, the limits, the hottest moment, the
thermal impedance with its networks, the periodic peaks, the energy over the run, and the
history, impedance and duty plots beside the map of the hottest moment."""

from __future__ import annotations

from pathlib import Path
from typing import Any

from ..version import __version__
from . import transient_tables as tt
from .compare_section import compare_section
from .html import document, esc, image, para, section, tag
from .model_facts import ModelFacts
from .parts import caution_box, identity, map_images, materials_table, params_table

PLOTS = (("_history.png", "history", "Temperature against time"),
         ("_zth.png", "zth", "Thermal impedance Z(t) with the Foster fit"),
         ("_duty.png", "duty", "Peak rise per watt against pulse width"))
"""The plots of a transient run: file-name ending, key, caption."""


def is_transient(summary: dict[str, Any]) -> bool:
    """Whether a summary is that of a transient run."""
    return summary.get("mode") == "transient" or isinstance(summary.get("transient"), dict)


def split_images(images: list[tuple[str, bytes]]) -> tuple[list[tuple[str, bytes]],
                                                           dict[str, tuple[str, bytes]]]:
    """The maps (the temperature map first) and the plots by key (history, zth, duty)."""
    maps, plots = [], {}
    for name, data in images:
        key = next((k for end, k, _ in PLOTS if name.endswith(end)), None)
        if key is None:
            maps.append((name, data))
        else:
            plots.setdefault(key, (name, data))
    return maps, plots


def _plot(plots: dict[str, tuple[str, bytes]], key: str, missing: str) -> str:
    caption = next(c for _, k, c in PLOTS if k == key)
    if key not in plots:
        return para(missing, cls="muted")
    name, data = plots[key]
    return image(data, alt=f"{caption} ({name})", caption=f"{caption} ({name})")


def transient_report(summary: dict[str, Any], *, images: list[tuple[str, bytes]] = (),
                     facts: ModelFacts, compare: dict[str, Any] | None = None) -> str:
    """The report page of a transient run from its summary, its PNG images (name and
    bytes), what is known of its model file and an optional comparison."""
    title = summary["model"].get("title") or Path(summary["model"]["file"]).stem
    tr = summary["transient"]
    maps, plots = split_images(list(images))
    run = [("run", f"transient to {tr['end_s']:g} s in {tr.get('steps')} steps, start "
                   f"state {tr.get('initial')}")]
    top = tag("header", tag("h1", esc(title)) + para(
        f"heat2d transient run report · model {summary['model']['file']}", cls="muted"))
    hot = summary["hot_spot"]
    first = (identity(summary, facts, run) + tt.headline(summary)
             + caution_box(summary["caution"])
             + map_images(maps, title, what="Temperature map at the hottest moment",
                          caption=f"t = {hot['time_s']:.4g} s"))
    body = [top + tag("section", first, id="overview"),
            section("Temperatures over the run",
                    tag("h3", "Peak of each shape") + tt.peaks_table(summary)
                    + tag("h3", "Limits and margins") + tt.limits_table(summary)
                    + tag("h3", "The hottest moment") + tt.hottest_moment(summary)
                    + tag("h3", "Probes") + tt.probes_table(summary)
                    + _plot(plots, "history", "No history plot in the folder."),
                    anchor="temperatures"),
            section("Thermal impedance and RC networks", tt.zth_section(summary)
                    + _plot(plots, "zth", "No impedance plot in the folder."),
                    anchor="impedance"),
            section("Periodic operation", tt.periodic_table(summary) + tt.duty_table(summary)
                    + (_plot(plots, "duty", "No duty plot in the folder.")
                       if tr.get("duty") or "duty" in plots else ""),
                    anchor="periodic"),
            section("Energy and heat paths over the run", tt.energy_section(summary),
                    page=False, anchor="heat")]
    model_part = ""
    if facts.description:
        model_part += tag("h3", "Description (from the model file)") + tag(
            "pre", esc(facts.description), class_="description")
    model_part += (tag("h3", "Materials") + materials_table(facts, capacity=True)
                   + params_table(summary))
    body.append(section("The model", model_part, anchor="model"))
    extra = tt.further(summary)
    warnings = (tag("ul", "".join(tag("li", esc(w)) for w in summary["warnings"]),
                    class_="warnings") if summary["warnings"]
                else para("The run raised no warnings.", cls="muted"))
    body.append(section("Time stepping, mesh and solver", tt.numerics(summary)
                        + tag("h3", "Warnings") + warnings
                        + (tag("h3", "Further figures") + extra if extra else ""),
                        anchor="numerics"))
    if compare is not None:
        body.append(compare_section(compare))
    body.append(tag("footer", caution_box(summary["caution"]) + para(
        f"Written by heat2d {__version__} from {summary['model']['file']}"
        + (f" (SHA-256 {facts.digest})" if facts.digest else "") + ".", cls="note")))
    return document(f"{title} · heat2d transient report", "".join(body))
