"""The run summary as a plain-text table (``summary.txt`` and what ``heat2d run``
prints), in the words of the trade: junction-to-boundary resistances, the heat each
powered shape sends to each exit, heat across cut lines, boundary shares of all heat out.
Every share printed says what it is a share of (as the ``summary.json`` keys do).
"""

from __future__ import annotations


def _fmt(value: float | None, spec: str = ".2f") -> str:
    return "-" if value is None else format(value, spec)


def _pm(error: float | None, spec: str = ".2g") -> str:
    """' ± e' for an error estimate, or nothing where none was made."""
    return "" if error is None else f" ± {error:{spec}}"


def format_summary(summary: dict) -> str:
    """The run summary as a plain-text table."""
    unit = summary["units"]["length"]
    hs = summary["hot_spot"]
    eb = summary["energy_balance"]
    lines = [
        f"heat2d {summary['heat2d_version']}: {summary['model']['file']}"
        + (f"  ({summary['model']['title']})" if summary["model"]["title"] else ""),
        f"powers and heat flows are for the {summary['units']['powers_and_heat_flows_for']}",
        "",
        f"Hot spot      {hs['temperature']:.2f}{_pm(hs.get('temperature_error'))} °C in "
        f"\"{hs['shape']}\" at ({hs['x']:.4g}, {hs['y']:.4g}) {unit}",
        f"Temperature   min {summary['temperature']['min']:.2f} °C, "
        f"max {summary['temperature']['max']:.2f}"
        f"{_pm(summary['temperature'].get('max_error'))} °C",
        "",
        f"{'shape':<20} {'material':<16} {'min °C':>9} {'mean °C':>16} {'max °C':>16} "
        f"{'power W':>10}",
    ]
    for name, s in [*summary["shapes"].items(), *summary["groups"].items()]:
        label = s.get("material") or f"({s['kind']})"
        mean = _fmt(s["mean"]) + _pm(s.get("mean_error"))
        top = _fmt(s["max"]) + _pm(s.get("max_error"))
        lines.append(f"{name:<20} {label:<16} {_fmt(s['min']):>9} {mean:>16} {top:>16} "
                     f"{s['power_w']:>10.4g}")
    if summary["limits"]:
        lines += ["", f"{'limit':<20} {'max °C':>9} {'limit °C':>9} {'margin K':>16}"]
        for name, lim in summary["limits"].items():
            flag = "  EXCEEDED" if lim["exceeded"] else ""
            margin = f"{lim['margin']:.2f}{_pm(lim.get('margin_error'))}"
            lines.append(f"{name:<20} {lim['max']:>9.2f} {lim['limit']:>9.2f} "
                         f"{margin:>16}{flag}")
    lines += ["", f"{'boundary':<20} {'kind':<21} {'heat out W':>20} {'of all out':>10} "
              f"{'mean °C':>9} {'length ' + unit:>11}"]
    total_out = sum(max(b["heat_out_w"], 0.0) for b in summary["boundaries"].values())
    for name, b in summary["boundaries"].items():
        fraction = b.get("share_of_heat_out", b["heat_out_w"] / total_out if total_out > 0
                         else None)
        share = "-" if fraction is None else f"{100 * fraction:.1f}%"
        heat = f"{b['heat_out_w']:.4g}{_pm(b.get('heat_out_error_w'))}"
        lines.append(f"{name:<20} {b['kind']:<21} {heat:>20} {share:>10} "
                     f"{b['mean_temperature']:>9.2f} {b['length']:>11.4g}")
    lines.append(f"{'(insulated)':<20} {'':<21} {0:>20} {'':>10} {'':>9} "
                 f"{summary['insulated_length']:>11.4g}")
    lines.append("  (of all out: share of all heat leaving the body through its boundaries)")
    if summary["interfaces"]:
        lines += ["", f"{'interface':<20} {'heat W':>11} {'mean jump K':>12} {'R″ m²K/W':>10}"]
        for name, itf in summary["interfaces"].items():
            lines.append(f"{name:<20} {itf['heat_w']:>11.4g} {itf['mean_jump']:>12.4g} "
                         f"{itf['resistance']:>10.3g}")
    lines += _conductor_lines(summary.get("conductors", {}), summary)
    lines += _cut_lines(summary.get("cuts", {}))
    lines += _package_lines(summary.get("package", {}), summary["boundaries"])
    res = summary.get("thermal_resistance")
    if res and res["sources"]:
        head = "".join(f" {s[:12]:>12}" for s in res["sources"])
        basis = ("linear" if res["basis"] == "linear"
                 else "linearised at the operating point")
        lines += ["", f"°C/W matrix: rise of each shape's mean temperature per watt in each "
                  f"powered shape, K/W ({basis})", f"{'shape':<20}{head}"]
        for row, vals in res["mean_rise_k_per_w"].items():
            lines.append(f"{row:<20}" + "".join(f" {_fmt(vals[s], '.4g'):>12}"
                                                 for s in res["sources"]))
    if summary["probes"]:
        lines += ["", f"{'probe':<20} {'°C':>9}"]
        errors = summary.get("probe_errors", {})
        lines += [f"{name:<20} {t:>9.2f}{_pm(errors.get(name))}"
                  for name, t in summary["probes"].items()]
    m, sv = summary["mesh"], summary["solver"]
    lines += [
        "",
        f"Energy balance  power in {eb['power_in_w']:.6g} W, heat out {eb['heat_out_w']:.6g} W, "
        f"relative error {eb['relative_error']:.1e}",
        f"Mesh            {m['nodes']} nodes, {m['triangles']} triangles, smallest angle "
        f"{m['min_angle_deg']:.1f}°",
        f"Solver          {sv['method']}, {sv['iterations']} iteration(s), relative residual "
        f"{sv['relative_residual']:.1e}"
        + (f", {len(sv['history'])} Newton step(s)" if sv["nonlinear"] else ""),
    ]
    if "errors" in summary:
        e = summary["errors"]
        if e["reliable"]:
            how = (f"against a nested refinement ({e['nodes'][0]} nodes, every triangle "
                   "split in four)")
        else:
            how = (f"grid convergence over non-nested meshes of "
                   f"{', '.join(str(n) for n in e['nodes'])} nodes (less reliable)")
        lines.append(f"Error estimate  ± figures {how}; energy-norm indicator "
                     f"{100 * e['energy_norm']['relative']:.2g} %")
    if "adaptive" in summary:
        lines += _adaptive_lines(summary["adaptive"])
    lines += [f"warning: {w}" for w in summary["warnings"]]
    lines += ["", "CAUTION: " + summary["caution"]]
    return "\n".join(lines)


def _adaptive_lines(adaptive: dict) -> list[str]:
    """The adaptive refinement steps: nodes, max temperature and each target's estimate."""
    keys = list(adaptive["targets"])
    names = ["max" if k == "temperature.max" else k.split(".", 1)[1] for k in keys]
    asked = ", ".join(f"{n} ± {adaptive['targets'][k]:.3g} K" for n, k in zip(names, keys,
                                                                            strict=True))
    steps = adaptive["steps"]
    state = ("reached" if adaptive["reached"] else
             f"NOT reached ({adaptive.get('stopped', 'node budget')})")
    widths = [max(12, len(n) + 2) for n in names]
    lines = [f"Adaptive        {asked}: {state} after {len(steps)} mesh(es)",
             f"  {'step':>4} {'nodes':>8} {'max °C':>10}"
             + "".join(f" {'± ' + n:>{w}}" for n, w in zip(names, widths, strict=True))]
    for i, step in enumerate(steps, 1):
        lines.append(f"  {i:>4} {step['nodes']:>8} {step['max_temperature']:>10.3f}"
                     + "".join(f" {step['estimate'][k]:>{w}.2g}"
                               for k, w in zip(keys, widths, strict=True)))
    return lines


def _cut_lines(cuts: dict) -> list[str]:
    """Heat across each cut line, from its from side to the other, with its ±."""
    if not cuts:
        return []
    lines = ["", f"{'cut line':<20} {'heat across W':>20}  from"]
    for name, cut in cuts.items():
        heat = f"{cut['heat_w']:.4g}{_pm(cut.get('heat_w_error'))}"
        side = "inside" if cut["closed"] else "left side (first point to last)"
        lines.append(f"{name:<20} {heat:>20}  {side}, where "
                     f"{cut['generated_on_from_side_w']:.4g} W is generated")
    return lines


def _package_lines(package: dict, boundaries: dict) -> list[str]:
    """Per powered shape: junction-to-boundary resistance and heat to each exit."""
    if not package:
        return []
    linear = {p["basis"] for p in package.values()} == {"linear"}
    how = "by superposition" if linear else "linearised at the operating point"
    lines = ["", "Junction-to-boundary resistance, K/W, and heat to each exit "
             f"(each powered shape alone, {how})"]
    for name, p in package.items():
        lines += [f"{name} at {p['power_w']:.4g} W: rise of its max over the ambients and "
                  f"fixed temperatures {p['rise_k_per_w']:.4g} K/W",
                  f"  {'to boundary':<18} {'K/W (max)':>10} {'K/W (mean)':>11} "
                  f"{'heat W':>10} {'of its heat':>12}"]
        for bname, to in p["to"].items():
            lines.append(f"  {bname:<18} {_fmt(to['resistance_k_per_w'], '.4g'):>10} "
                         f"{_fmt(to['resistance_from_mean_k_per_w'], '.4g'):>11} "
                         f"{to['heat_w']:>10.4g} {100 * to['share']:>11.1f}%")
    lines += ["  K/W: rise of the shape's max (or mean) temperature over the boundary's mean "
              "temperature, per watt;",
              "  of its heat: share of that shape's heat. A boundary's share of all heat out "
              "(table above) also",
              "  counts the heat its boundary values drive through the body"
              + (":" if linear else " (here with what the linearisation leaves out):")]
    for bname, b in boundaries.items():
        if "heat_from_powered_shapes_w" in b and (b["heat_out_w"] != 0
                                                  or b["heat_from_powered_shapes_w"] != 0):
            rest = b["heat_driven_by_boundary_values_w"]
            lines.append(f"    {bname:<18} {b['heat_out_w']:.4g} W out = "
                         f"{b['heat_from_powered_shapes_w']:.4g} W from the powered shapes "
                         f"{'+' if rest >= 0 else '−'} {abs(rest):.4g} W "
                         + ("driven by the boundary values" if linear else "remainder"))
    return lines


def _conductor_lines(conductors: dict, summary: dict) -> list[str]:
    """Per conductor: current, resistance per metre hot and cold, I²R loss, voltage drop
    over the model's depth, mean and max temperature and the rise."""
    if not conductors:
        return []
    depth = summary["units"]["powers_and_heat_flows_for"]
    lines = ["", f"{'conductor':<16} {'A':>8} {'mΩ/m hot':>10} {'mΩ/m cold':>10} "
                 f"{'loss W':>9} {'drop mV':>9} {'mean °C':>8} {'max °C':>8} {'rise K':>7}"]
    for name, c in conductors.items():
        lines.append(f"{name:<16} {c['current_a']:>8.4g} "
                     f"{1e3 * c['resistance_ohm_per_m']:>10.4g} "
                     f"{1e3 * c['cold_resistance_ohm_per_m']:>10.4g} {c['loss_w']:>9.4g} "
                     f"{1e3 * c['voltage_v']:>9.4g} {c['mean_c']:>8.2f} {c['max_c']:>8.2f} "
                     f"{c['max_rise_k']:>7.2f}")
    ambient = next(iter(conductors.values()))["ambient_c"]
    lines.append(f"  (loss and voltage drop for {depth}; cold: the conductor at "
                 f"{ambient:g} °C; rise over {ambient:g} °C)")
    return lines
