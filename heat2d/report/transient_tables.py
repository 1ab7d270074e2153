"""The tables of a transient run's report, read from its summary (``"mode":
"transient"``): each shape's peak over the run with its time-step error and when it
occurs, the limits, the hottest moment, the thermal impedance with its Foster and Cauer
networks, the periodic peaks and the energy over the run."""

from __future__ import annotations

import math
from typing import Any

from .generic import render
from .html import definitions, esc, figure_cell, num, para, pm, table, tag

KNOWN = frozenset({
    "heat2d_version", "mode", "model", "units", "temperature", "hot_spot", "shapes",
    "groups", "boundaries", "energy_balance", "probes", "limits", "mesh", "transient",
    "ids", "timings_s", "warnings", "caution", "insulated_length",
})
"""Summary keys of a transient run given a section of their own (or not shown: ``ids``);
any other key is shown under "Further figures"."""
KNOWN_TRANSIENT = frozenset({
    "end_s", "report_times", "steps", "smallest_step_s", "largest_step_s", "initial",
    "tolerance_k", "solver", "time_step_error_k", "peaks", "energy_balance",
    "snapshot_times_s", "zth", "periodic", "duty",
})
"""Keys of the ``transient`` block the report shows by name."""


def _s(value: Any) -> str:
    """A time in seconds, four significant digits."""
    return num(value, ".4g")


def _by(summary: dict[str, Any]) -> str:
    """How the run estimated its time-step error (older summaries: halved steps)."""
    return summary["transient"].get("time_step_error_by") or "march repeated on halved steps"


def _limit_hits(summary: dict[str, Any]) -> dict[str, float]:
    """Shape -> its periodic peak, for the shapes whose periodic peak passes their limit."""
    periodic = summary["transient"].get("periodic") or {}
    out = {}
    for name, p in periodic.items():
        lim = summary["limits"].get(name)
        if lim and isinstance(p.get("peak"), int | float) and p["peak"] > lim["limit"]:
            out[name] = p["peak"]
    return out


def headline(summary: dict[str, Any]) -> str:
    """The figures a reviewer reads first: the peak and when, energy in, the margins."""
    hs = summary["hot_spot"]
    unit = summary["units"]["length"]
    peak_error = (summary["shapes"].get(hs["shape"]) or {}).get("max_error")
    boxes = [(f"{pm(hs['temperature'], peak_error)} °C",
              f"peak temperature over the run (± time-step error), in \"{hs['shape']}\""),
             (f"t = {_s(hs['time_s'])} s",
              f"the hottest moment, at ({hs['x']:.4g}, {hs['y']:.4g}) {unit}"),
             (f"{summary['energy_balance']['energy_in_j']:.4g} J",
              f"energy in over {_s(summary['transient']['end_s'])} s, for the "
              f"{summary['units']['powers_and_heat_flows_for']}")]
    if summary["limits"]:
        name, lim = min(summary["limits"].items(), key=lambda kv: kv[1]["margin"])
        boxes.append((f"{num(lim['margin'], '.2f')} K",
                      f"smallest margin to a limit over the run (\"{name}\")"
                      + (" — EXCEEDED" if lim["exceeded"] else "")))
    for name, peak in _limit_hits(summary).items():
        boxes.append((f"{peak:.2f} °C", f"\"{name}\" in periodic steady state: above its "
                                        f"limit {num(summary['limits'][name]['limit'])} °C"))
    return tag("div", "".join(tag("div", tag("b", esc(v)) + tag("span", esc(k)))
                              for v, k in boxes), class_="headline")


def peaks_table(summary: dict[str, Any]) -> str:
    """Every shape: material, peak power, its peak over the run ± the time-step error and
    when it occurs, and its mean and min at the hottest moment."""
    exceeded = {n for n, lim in summary["limits"].items() if lim["exceeded"]}
    rows, bad = [], []
    for i, (name, s) in enumerate(summary["shapes"].items()):
        if name in exceeded:
            bad.append(i)
        rows.append([name, s.get("material") or f"({s.get('kind', 'group')})",
                     figure_cell(num(s.get("power_w"))),
                     figure_cell(pm(s["max"], s.get("max_error"), error_spec=".1e")),
                     figure_cell(_s(s.get("time_s"))), figure_cell(num(s.get("mean"), ".2f")),
                     figure_cell(num(s.get("min"), ".2f"))])
    hot = summary["hot_spot"]["time_s"]
    return table(["shape", "material", "peak power (W)", "peak (°C) ± time step",
                  "peak at (s)", f"mean at {_s(hot)} s (°C)", f"min at {_s(hot)} s (°C)"],
                 rows, bad_rows=bad) + para(
        "Peak: the largest temperature of the shape at any step of the run; ± the estimate "
        f"of its time-step error ({_by(summary)}). It carries no "
        "estimate of the mesh error. Mean and min are at the hottest moment of the run.",
        cls="note")


def limits_table(summary: dict[str, Any]) -> str:
    """Each shape with a temperature limit: its peak over the run, the limit, the margin
    and when the peak occurs."""
    if not summary["limits"]:
        return para("No shape has a temperature limit (max_temperature).", cls="muted")
    rows, bad = [], []
    for i, (name, lim) in enumerate(summary["limits"].items()):
        if lim["exceeded"]:
            bad.append(i)
        err = (summary["shapes"].get(name) or {}).get("max_error")
        rows.append([name, figure_cell(pm(lim["max"], err, error_spec=".1e")),
                     figure_cell(num(lim["limit"], ".2f")),
                     figure_cell(pm(lim["margin"], err, error_spec=".1e")),
                     figure_cell(_s(lim.get("time_s"))),
                     "EXCEEDED" if lim["exceeded"] else "within"])
    note = ("Over the run as marched; the peak of a repeating pulse train in periodic "
            "steady state is under Periodic operation.")
    return table(["shape", "peak (°C)", "limit (°C)", "margin (K)", "peak at (s)", "status"],
                 rows, bad_rows=bad) + para(note, cls="note")


def probes_table(summary: dict[str, Any]) -> str:
    """Each probe's peak over the report times."""
    if not summary["probes"]:
        return para("The model has no probes.", cls="muted")
    return table(["probe", "peak over the report times (°C)"],
                 [[n, figure_cell(num(t, ".2f"))] for n, t in summary["probes"].items()])


def hottest_moment(summary: dict[str, Any]) -> str:
    """When and where the largest temperature of the run occurs."""
    hs, t = summary["hot_spot"], summary["temperature"]
    unit = summary["units"]["length"]
    return definitions([
        ("time", f"{_s(hs['time_s'])} s of {_s(summary['transient']['end_s'])} s"),
        ("largest temperature", f"{num(hs['temperature'], '.2f')} °C"),
        ("where", f"({hs['x']:.4g}, {hs['y']:.4g}) {unit}, in shape \"{hs['shape']}\""),
        ("coldest at that moment or at the start", f"{num(t.get('min'), '.2f')} °C")])


def _decades(at: dict[str, Any]) -> str:
    times = list(at)
    return table(["t (s)", *times],
                 [["Z (K/W)", *(figure_cell(num(at[k])) for k in times)]])


def _networks(z: dict[str, Any]) -> str:
    """The Foster terms (R, τ) beside the Cauer ladder (R, C), one row per term."""
    foster, ladder = z.get("foster") or {}, z.get("cauer")
    fr, ft = foster.get("r_k_per_w", []), foster.get("tau_s", [])
    cr = (ladder or {}).get("r_k_per_w", [])
    cc = (ladder or {}).get("c_j_per_k", [])
    count = max(len(fr), len(cr))

    def at(values: list, i: int, spec: str = ".4g") -> Any:
        return figure_cell(num(values[i], spec) if i < len(values) else "")

    rows = [[str(i + 1), at(fr, i), at(ft, i, ".3e"), at(cr, i), at(cc, i, ".3e")]
            for i in range(count)]
    rows.append(["sum", figure_cell(num(math.fsum(fr))), figure_cell(""),
                 figure_cell(num(math.fsum(cr)) if cr else ""), figure_cell("")])
    out = table(["term", "Foster R (K/W)", "Foster τ (s)", "Cauer R (K/W)", "Cauer C (J/K)"],
                rows)
    if ladder is None:
        out += para("No Cauer ladder: the conversion from the Foster network failed.",
                    cls="muted")
    return out + para(
        "Foster: Z(t) = Σ Rᵢ (1 − exp(−t/τᵢ)), terms from the fastest. Cauer: the ladder "
        "with the same impedance, R from the heated shape towards the sink (stage 1 at "
        "the shape), C of each node to the reference. Both sum to the steady resistance. "
        "The same terms are in rc_networks.csv and rc_networks.json.", cls="note")


def _modal(check: dict[str, Any] | None) -> str:
    if not check:
        return "not made (a nonlinear model, or a mesh too large for the eigenproblem)"
    if check.get("max_difference") is None:
        return f"{check.get('modes')} modes: none settled within the run"
    return (f"the fit is within {100 * check['max_difference']:.2g} % of R of the modal "
            f"network (the {check.get('modes')} slowest modes of the discrete model) from "
            f"{_s(check.get('from_s'))} s on; slowest mode τ = "
            f"{_s(check.get('slowest_tau_s'))} s, R = {num(check.get('slowest_r_k_per_w'))} "
            "K/W")


def zth_section(summary: dict[str, Any]) -> str:
    """Per powered shape: the steady resistance, Z at each decade of time, the fit error,
    the modal check and the Foster and Cauer tables."""
    zth = summary["transient"].get("zth") or {}
    if not zth:
        return para("No thermal impedance: no powered shape, or the run was made with "
                    "zth = false.", cls="muted")
    out = para("Z(t): the rise of the shape's maximum temperature per watt after a step of "
               "power in that shape alone, from a separate march.", cls="note")
    for name, z in zth.items():
        foster = z.get("foster") or {}
        step = (f"{num(z.get('step_power_w'))} W (linear model: Z holds for any power)"
                if z.get("linear") else
                f"{num(z.get('step_power_w'))} W, its peak power (nonlinear model: the "
                "impedance at that operating point)")
        out += tag("h3", esc(f"{name}: R = {num(z['r_k_per_w'])} K/W"))
        out += definitions([
            ("steady resistance R", f"{num(z['r_k_per_w'])} K/W (solved directly)"),
            ("power step", step),
            ("Foster terms", str(foster.get("terms", len(foster.get("r_k_per_w", []))))),
            ("fit error", f"{100 * foster['fit_error']:.2g} % (largest |fit − Z|/Z over "
                          "the report times)" if isinstance(foster.get("fit_error"),
                                                            int | float) else "-"),
            ("modal check", _modal(z.get("modal_check")))])
        if z.get("at"):
            out += _decades(z["at"])
        out += _networks(z)
    return out


def periodic_table(summary: dict[str, Any]) -> str:
    """Each repeating pulse train: the pulse, its duty and the peak in periodic steady
    state, with the margin to the shape's limit."""
    periodic = summary["transient"].get("periodic") or {}
    if not periodic:
        return para("No shape has a repeating pulse train (power_pulse with a period): "
                    "no periodic peak.", cls="muted")
    rows, bad = [], []
    for i, (name, p) in enumerate(periodic.items()):
        lim = summary["limits"].get(name)
        margin = None if lim is None or not isinstance(p.get("peak"), int | float) \
            else lim["limit"] - p["peak"]
        if margin is not None and margin < 0:
            bad.append(i)
        how = p.get("method", "")
        if p.get("periods"):
            how += f" ({p['periods']} periods)"
        rows.append([name, figure_cell(num(p.get("pulse_w"))),
                     figure_cell(num(p.get("between_w"))), figure_cell(_s(p.get("width_s"))),
                     figure_cell(_s(p.get("period_s"))),
                     figure_cell(f"{100 * p['duty']:.3g} %" if isinstance(
                         p.get("duty"), int | float) else "-"),
                     figure_cell(num(p.get("rise_per_w"))), figure_cell(num(p.get("peak"),
                                                                            ".2f")),
                     figure_cell(num(margin, ".2f")), how])
    return table(["shape", "pulse (W)", "between (W)", "width (s)", "period (s)", "duty",
                  "rise per W (K/W)", "periodic peak (°C)", "margin to limit (K)", "how"],
                 rows, bad_rows=bad) + para(
        "The peak once the pulse train has repeated long enough to settle (periodic "
        "steady state), as if it never ended; the run itself marches only the pulses the "
        "model gives (count).", cls="note")


def duty_table(summary: dict[str, Any]) -> str:
    """Peak rise per watt at each decade of pulse width: a single pulse and each duty."""
    out = ""
    for name, d in (summary["transient"].get("duty") or {}).items():
        widths = d.get("widths_s") or []
        pick = [i for i, w in enumerate(widths) if w > 0 and abs(math.log10(w)
                                                                 - round(math.log10(w))) < 1e-6]
        if not pick:
            continue
        duties = list(d.get("k_per_w") or {})
        rows = [[figure_cell(_s(widths[i])),
                 figure_cell(num(d["single_pulse_k_per_w"][i])),
                 *(figure_cell(num(d["k_per_w"][k][i])) for k in duties)] for i in pick]
        out += tag("h3", esc(f"{name}: peak rise per watt (K/W)"))
        out += table(["pulse width (s)", "single pulse",
                      *(f"duty {100 * float(k):.3g} %" for k in duties)], rows)
    if out:
        out += para("From the Foster network by superposition (linear in power): the rise "
                    "of the shape's maximum over the state between pulses, per watt of "
                    "pulse, at each decade of width; the plot has every width.", cls="note")
    return out


def energy_section(summary: dict[str, Any]) -> str:
    """The energy over the run and the heat through each boundary."""
    eb = summary["energy_balance"]
    out = definitions([
        ("energy in", f"{eb['energy_in_j']:.6g} J (mean {eb.get('power_in_w', 0):.4g} W)"),
        ("stored", f"{eb['stored_j']:.6g} J (mean {eb.get('stored_w', 0):.4g} W)"),
        ("heat out", f"{eb['heat_out_j']:.6g} J (mean {eb.get('heat_out_w', 0):.4g} W)"),
        ("balance", f"{eb['relative_error']:.1e} (energy in − stored − heat out, relative "
                    "to energy in)")])
    bounds = summary["boundaries"]
    if not bounds:
        return out + para("The model has no boundaries.", cls="muted")
    unit = summary["units"]["length"]
    total = sum(max(b["heat_out_w"], 0.0) for b in bounds.values())
    lengths = any("length" in b for b in bounds.values())
    where = any(b.get("on") for b in bounds.values())
    rows = [[name, b.get("kind", ""), *([b.get("on", "")] if where else []),
             figure_cell(num(b["heat_out_w"])),
             figure_cell(num(b.get("heat_out_peak_w"))),
             figure_cell(f"{100 * b['heat_out_w'] / total:.1f} %" if total > 0 else "-"),
             figure_cell(num(b.get("mean_temperature"), ".2f")),
             *([figure_cell(num(b.get("length")))] if lengths else [])]
            for name, b in bounds.items()]
    heads = ["boundary", "kind", *(["on"] if where else []), "heat out at the end (W)",
             "largest heat out (W)", "share at the end", "mean at the end (°C)"]
    return out + tag("h3", "Boundaries") + table(
        heads + ([f"length ({unit})"] if lengths else []), rows) + para(
        "Heat out is positive leaving; the share is of all heat leaving at the end of the "
        "run. Until the run settles, part of the power goes into the stored heat.",
        cls="note")


def numerics(summary: dict[str, Any]) -> str:
    """The time stepping, the march's solver record, the mesh and the timings."""
    tr, m = summary["transient"], summary["mesh"]
    initial = tr.get("initial")
    out = tag("h3", "Time stepping") + definitions([
        ("end of the run", f"{_s(tr['end_s'])} s"),
        ("start state", "the steady state of the powers before t = 0" if initial == "steady"
         else f"uniform {num(initial)} °C" if isinstance(initial, int | float)
         else str(initial)),
        ("report times", str(tr.get("report_times"))),
        ("steps", f"{tr.get('steps')} ({num(tr.get('smallest_step_s'), '.2g')} s to "
                  f"{num(tr.get('largest_step_s'), '.2g')} s)"),
        ("local error allowed per step", f"{num(tr.get('tolerance_k'))} K"),
        ("time-step error of the largest temperature",
         f"{num(tr.get('time_step_error_k'), '.2g')} K ({_by(summary)})"),
        ("energy balance of the march",
         num((tr.get("energy_balance") or {}).get("relative_error"), ".1e")),
        ("snapshots (VTU series, .pvd)", ", ".join(f"{t:g}" for t in tr.get(
            "snapshot_times_s", [])) + " s")])
    if tr.get("solver"):
        out += tag("h3", "Solver of the march") + render(tr["solver"])
    out += tag("h3", "Mesh") + definitions([
        ("nodes", str(m["nodes"])), ("triangles", str(m["triangles"])),
        ("smallest angle", f"{m['min_angle_deg']:.1f}°"),
        ("target size", f"{num(m.get('target_size'))} {summary['units']['length']}"),
        *((k.replace("_", " "), num(v)) for k, v in m.items()
          if k not in ("nodes", "triangles", "min_angle_deg", "target_size"))])
    out += tag("h3", "Error estimate (the ± figures)") + para(
        "The ± beside each peak is the time-step error only; a transient run makes no "
        "estimate of the mesh error (refine the mesh, or compare with a steady run of the "
        "same mesh, to judge it).", cls="muted")
    if summary.get("timings_s"):
        out += tag("h3", "Time per stage (s)") + table(
            [*summary["timings_s"]], [[figure_cell(f"{v:.3g}")
                                       for v in summary["timings_s"].values()]])
    return out


def further(summary: dict[str, Any]) -> str:
    """Summary keys (and keys of its ``transient`` block) this report does not know by
    name, rendered generically."""
    out = "".join(tag("h3", esc(k)) + render(v) for k, v in summary.items()
                  if k not in KNOWN)
    return out + "".join(tag("h3", esc(f"transient: {k}")) + render(v)
                         for k, v in summary["transient"].items() if k not in KNOWN_TRANSIENT)
