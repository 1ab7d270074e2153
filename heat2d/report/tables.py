"""The run report's tables, read from a summary (the ``summary.json`` content): the
figures a design review asks for, each with its error estimate (±) where one was made."""

from __future__ import annotations

from typing import Any

from .generic import render
from .html import definitions, esc, figure_cell, num, para, pm, table, tag

KNOWN = frozenset({
    "heat2d_version", "model", "units", "temperature", "hot_spot", "shapes", "groups",
    "boundaries", "interfaces", "insulated_length", "axis_length", "energy_balance",
    "probes", "probe_errors", "limits", "mesh", "solver", "thermal_resistance", "ids",
    "timings_s", "warnings", "caution", "errors", "package", "cuts", "adaptive",
})
"""Summary keys given a section of their own (or not shown: ``ids``); any other key is
shown under "Further figures" by the generic renderer."""


def headline(summary: dict[str, Any]) -> str:
    """The few figures a reviewer reads first, in boxes."""
    hs, t = summary["hot_spot"], summary["temperature"]
    unit = summary["units"]["length"]
    boxes = [(f"{pm(t['max'], t.get('max_error'))} °C", "maximum temperature"),
             (f"\"{hs['shape']}\" at ({hs['x']:.4g}, {hs['y']:.4g}) {unit}", "hot spot"),
             (f"{summary['energy_balance']['power_in_w']:.4g} W",
              f"power in, for the {summary['units']['powers_and_heat_flows_for']}")]
    if summary["limits"]:
        name, lim = min(summary["limits"].items(), key=lambda kv: kv[1]["margin"])
        boxes.append((f"{pm(lim['margin'], lim.get('margin_error'))} K",
                      f"smallest margin to a limit (\"{name}\")"
                      + (" — EXCEEDED" if lim["exceeded"] else "")))
    return tag("div", "".join(tag("div", tag("b", esc(v)) + tag("span", esc(k)))
                              for v, k in boxes), class_="headline")


def shapes_table(summary: dict[str, Any]) -> str:
    """Every shape and group: material, power, min, mean ± and max ± in °C."""
    exceeded = {n for n, lim in summary["limits"].items() if lim["exceeded"]}
    rows, bad = [], []
    items = [*summary["shapes"].items(), *summary.get("groups", {}).items()]
    for i, (name, s) in enumerate(items):
        if name in exceeded:
            bad.append(i)
        rows.append([name, s.get("material") or f"({s.get('kind', 'group')})",
                     figure_cell(num(s["power_w"])), figure_cell(num(s["min"], ".2f")),
                     figure_cell(pm(s["mean"], s.get("mean_error"))),
                     figure_cell(pm(s["max"], s.get("max_error")))])
    return table(["shape", "material", "power (W)", "min (°C)", "mean (°C)", "max (°C)"],
                 rows, bad_rows=bad)


def limits_table(summary: dict[str, Any]) -> str:
    """Each shape with a temperature limit: its maximum, the limit and the margin ±."""
    if not summary["limits"]:
        return para("No shape has a temperature limit (max_temperature).", cls="muted")
    rows, bad = [], []
    for i, (name, lim) in enumerate(summary["limits"].items()):
        if lim["exceeded"]:
            bad.append(i)
        rows.append([name, figure_cell(pm(lim["max"], lim.get("margin_error"))),
                     figure_cell(num(lim["limit"], ".2f")),
                     figure_cell(pm(lim["margin"], lim.get("margin_error"))),
                     "EXCEEDED" if lim["exceeded"] else "within"])
    return table(["shape", "max (°C)", "limit (°C)", "margin (K)", "status"], rows,
                 bad_rows=bad)


def probes_table(summary: dict[str, Any]) -> str:
    """Each probe's temperature ±."""
    if not summary["probes"]:
        return para("The model has no probes.", cls="muted")
    errors = summary.get("probe_errors", {})
    return table(["probe", "temperature (°C)"],
                 [[n, figure_cell(pm(t, errors.get(n)))] for n, t in summary["probes"].items()])


def boundaries_table(summary: dict[str, Any]) -> str:
    """Each boundary: kind, where, heat out ±, its share of all heat leaving, mean °C."""
    unit = summary["units"]["length"]
    bounds = summary["boundaries"]
    total = sum(max(b["heat_out_w"], 0.0) for b in bounds.values())
    rows = [[name, b["kind"], b.get("on", ""),
             figure_cell(f"{b['heat_out_w']:.4g}" + (f" ± {b['heat_out_error_w']:.2g}"
                                                     if "heat_out_error_w" in b else "")),
             figure_cell(f"{100 * b['heat_out_w'] / total:.1f} %" if total > 0 else "-"),
             figure_cell(num(b["mean_temperature"], ".2f")),
             figure_cell(num(b["length"]))] for name, b in bounds.items()]
    rows.append(["(insulated)", "", "", figure_cell("0"), figure_cell(""), figure_cell(""),
                 figure_cell(num(summary.get("insulated_length")))])
    note = para("Share: of the total heat leaving through all boundaries (heat entering "
                "through a boundary counts as negative heat out).", cls="note")
    return table(["boundary", "kind", "on", "heat out (W)", "share", "mean (°C)",
                  f"length ({unit})"], rows) + note


def interfaces_table(summary: dict[str, Any]) -> str:
    """Each contact interface: the two shapes, R″, heat across and the temperature jump."""
    if not summary["interfaces"]:
        return para("The model has no contact interfaces.", cls="muted")
    rows = [[name, " / ".join(i["between"]), figure_cell(num(i["resistance"], ".3g")),
             figure_cell(num(i["heat_w"])), figure_cell(num(i["mean_jump"])),
             figure_cell(num(i.get("max_abs_jump")))]
            for name, i in summary["interfaces"].items()]
    return table(["interface", "between", "R″ (m²·K/W)", "heat across (W)",
                  "mean jump (K)", "largest jump (K)"], rows)


def resistance_tables(summary: dict[str, Any]) -> str:
    """The °C/W matrix (rise of each shape's mean and maximum per watt in each powered
    shape) and each source's heat split among the boundaries."""
    res = summary.get("thermal_resistance")
    if not res or not res.get("sources"):
        return para("No powered shape: no °C/W matrix.", cls="muted")
    sources = res["sources"]
    out = para(f"Rise of each shape's temperature per watt dissipated in each powered shape "
               f"(columns), in K/W = °C/W; {res.get('basis', '')}.", cls="note")
    for key, what in (("mean_rise_k_per_w", "mean temperature"),
                      ("max_rise_k_per_w", "maximum temperature")):
        if key in res:
            out += tag("h3", esc(f"Rise of the {what} (K/W)"))
            out += table(["shape", *sources],
                         [[row, *(figure_cell(num(vals.get(s))) for s in sources)]
                          for row, vals in res[key].items()])
    if res.get("heat_share"):
        exits = list(next(iter(res["heat_share"].values())))
        out += tag("h3", "Where each source's heat leaves (share of that source's watts)")
        out += table(["source", *exits],
                     [[src, *(figure_cell(f"{100 * v[b]:.1f} %" if v.get(b) is not None
                                          else "-") for b in exits)]
                      for src, v in res["heat_share"].items()])
    rest = {k: v for k, v in res.items() if k not in
            ("sources", "basis", "mean_rise_k_per_w", "max_rise_k_per_w", "heat_share")}
    return out + (render(rest) if rest else "")


def package_tables(summary: dict[str, Any]) -> str:
    """Per powered shape: the junction-to-boundary resistance to each exit (rise of the
    shape's maximum over the boundary's mean temperature, per watt) and its heat split."""
    out = para("Per powered shape: the rise of its temperature over each boundary's mean "
               "temperature per watt it dissipates (junction-to-boundary resistance, K/W) "
               "and how its heat divides among the exits.", cls="note")
    for name, p in summary["package"].items():
        exits = p.get("to") if isinstance(p.get("to"), dict) else {}
        out += tag("h3", esc(f"{name}: {num(p.get('power_w'))} W"))
        if "rise_k_per_w" in p:
            out += para(f"Rise of its maximum per watt: {num(p['rise_k_per_w'])} K/W"
                        + (f" ({p['basis']})" if p.get("basis") else ""))
        known = {"resistance_k_per_w", "resistance_from_mean_k_per_w", "heat_w", "share"}
        if exits and all(known >= set(e) for e in exits.values()):
            out += table(["exit (boundary)", "from its maximum (K/W)", "from its mean (K/W)",
                          "heat (W)", f"share of {name}'s heat"],
                         [[b, figure_cell(num(e.get("resistance_k_per_w"))),
                           figure_cell(num(e.get("resistance_from_mean_k_per_w"))),
                           figure_cell(num(e.get("heat_w"))),
                           figure_cell(f"{100 * e['share']:.1f} %" if isinstance(
                               e.get("share"), int | float) else "-")]
                          for b, e in exits.items()])
        elif exits:
            out += render(exits, first="exit")
        rest = {k: v for k, v in p.items() if k not in ("power_w", "basis", "rise_k_per_w",
                                                        "to")}
        out += render(rest) if rest else ""
    return out


def cuts_table(summary: dict[str, Any]) -> str:
    """Heat crossing each named cut line, with its ± and the side it is counted from."""
    cuts = summary["cuts"]
    known = {"heat_w", "heat_w_error", "through", "closed", "from", "generated_on_from_side_w"}
    if not all(isinstance(c, dict) and known >= set(c) for c in cuts.values()):
        return render(cuts, first="cut")
    rows = [[name, " → ".join(f"({num(x)}, {num(y)})" for x, y in c.get("through", [])),
             figure_cell(f"{num(c.get('heat_w'))}" + (f" ± {c['heat_w_error']:.2g}"
                                                      if "heat_w_error" in c else "")),
             c.get("from", ""), figure_cell(num(c.get("generated_on_from_side_w")))]
            for name, c in cuts.items()]
    return table(["cut line", f"through ({summary['units']['length']})", "heat across (W)",
                  "counted positive from", "generated on that side (W)"], rows)


def numerics(summary: dict[str, Any]) -> str:
    """Energy balance, mesh, solver (with its Newton steps), error estimate, timings."""
    eb, m, sv = summary["energy_balance"], summary["mesh"], summary["solver"]
    out = tag("h3", "Energy balance") + definitions([
        ("power in", f"{eb['power_in_w']:.6g} W"),
        ("heat out", f"{eb['heat_out_w']:.6g} W"),
        ("relative error",
         f"{eb['relative_error']:.1e} (relative to {eb.get('relative_to', 'power in')})")])
    out += tag("h3", "Mesh") + definitions([
        ("nodes", str(m["nodes"])), ("triangles", str(m["triangles"])),
        ("smallest angle", f"{m['min_angle_deg']:.1f}°"),
        ("target size", f"{num(m.get('target_size'))} {summary['units']['length']}"),
        *((k.replace("_", " "), num(v)) for k, v in m.items()
          if k not in ("nodes", "triangles", "min_angle_deg", "target_size"))])
    out += tag("h3", "Solver") + definitions([
        ("method", str(sv["method"])), ("iterations", str(sv["iterations"])),
        ("relative residual", f"{sv['relative_residual']:.1e}"),
        ("nonlinear", "yes (Newton's method)" if sv["nonlinear"] else "no")])
    if sv.get("history"):
        out += table(["Newton step", "largest change (K)", "relative residual"],
                     [[str(h["iteration"]), figure_cell(f"{h['max_change_k']:.2e}"),
                       figure_cell(f"{h['relative_residual']:.2e}")] for h in sv["history"]])
    out += tag("h3", "Error estimate (the ± figures)")
    e = summary.get("errors")
    if e:
        out += definitions([
            ("method", e.get("method", "")),
            ("reliable", "yes" if e.get("reliable") else "no: less reliable, see method"),
            ("meshes (nodes)", ", ".join(str(n) for n in e.get("nodes", []))),
            ("energy-norm indicator",
             f"{100 * e['energy_norm']['relative']:.2g} %" if "energy_norm" in e else "-")])
    else:
        out += para("No error estimate was made for this run (no ± figures).", cls="muted")
    if summary.get("adaptive"):
        out += tag("h3", "Adaptive refinement") + render(summary["adaptive"], first="step")
    if summary.get("timings_s"):
        out += tag("h3", "Time per stage (s)") + table(
            [*summary["timings_s"]], [[figure_cell(f"{v:.3g}")
                                       for v in summary["timings_s"].values()]])
    return out


def warnings_list(summary: dict[str, Any]) -> str:
    """The run's warnings, or a line saying there were none."""
    if not summary["warnings"]:
        return para("The run raised no warnings.", cls="muted")
    return tag("ul", "".join(tag("li", esc(w)) for w in summary["warnings"]),
               class_="warnings")


def further(summary: dict[str, Any]) -> str:
    """Summary keys this report does not know by name, rendered generically."""
    return "".join(tag("h3", esc(k)) + render(v) for k, v in summary.items() if k not in KNOWN)
