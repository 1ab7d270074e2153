"""The files and the text table of a transient run.

Beside the time series (:mod:`.files`): ``<stem>.vtu`` and ``<stem>.png`` hold the field
at the hottest moment of the run (the map a steady run draws, for that moment), and
``summary.txt`` the table :func:`format_transient` prints.
"""

from __future__ import annotations

from pathlib import Path
from typing import Any

import numpy as np

from ..fem.solver import Solution
from ..post.results import Result
from ..post.writers import write_png, write_vtu
from .files import write_transient


def hottest_result(result) -> Result:
    """The field at the hottest moment as a steady-style :class:`Result` (for the map and
    the VTU; its summary is the transient summary)."""
    history, system = result.history, result.system
    T = history.hottest
    kx, ky, _, _ = system.conductivity(T)
    grad = system.gradients(T).T
    flux = -np.column_stack([kx * grad[0], ky * grad[1]])
    solution = Solution(system, T, "transient", len(history.steps), 0.0, 0.0)
    # The map's title states the power: the power at that moment, not the run's mean.
    t_hot = result.summary["hot_spot"]["time_s"]
    row = int(np.argmin(np.abs(history.times - t_hot)))
    summary = {**result.summary, "energy_balance": {
        **result.summary["energy_balance"], "power_in_w": float(history.power_in[row])}}
    return Result(solution=solution, heat_flux=flux, summary=summary)


def save(result, out_dir, *, stem: str | None = None, show_mesh: bool = False,
         **_options) -> list[Path]:
    """Write every output of a transient run into ``out_dir``, all or nothing."""
    stem = stem or result.model.stem

    def extra(folder: Path) -> list[str]:
        hot = hottest_result(result)
        write_vtu(hot, folder / f"{stem}.vtu")
        write_png(hot, folder / f"{stem}.png", show_mesh=show_mesh)
        (folder / "summary.txt").write_text(format_transient(result.summary) + "\n",
                                            encoding="utf-8")
        return [f"{stem}.vtu", f"{stem}.png", "summary.txt"]

    return write_transient(result, out_dir, stem=stem, extra=extra)


def format_transient(summary: dict[str, Any]) -> str:
    """The summary of a transient run as a readable table, with the caution."""
    tr = summary["transient"]
    m = summary["model"]
    lines = [f"{m['title'] or m['file']}: transient to {tr['end_s']:g} s, "
             f"{tr['steps']} steps ({tr['smallest_step_s']:.2g} to "
             f"{tr['largest_step_s']:.2g} s), start state {tr['initial']}",
             f"powers and heat flows for {summary['units']['powers_and_heat_flows_for']}",
             "", f"{'shape':<20} {'peak °C':>10} {'± time step':>12} {'at s':>11} "
                 f"{'peak W':>9}"]
    for name, s in summary["shapes"].items():
        err = "" if s["max_error"] is None else f"{s['max_error']:.2g} K"
        lines.append(f"{name:<20} {s['max']:>10.2f} {err:>12} {s['time_s']:>11.4g} "
                     f"{s['power_w']:>9.4g}")
    hs = summary["hot_spot"]
    lines += ["", f"hottest moment: {hs['temperature']:.2f} °C in {hs['shape']} at "
                  f"({hs['x']:.4g}, {hs['y']:.4g}) {summary['model']['length_unit']}, "
                  f"t = {hs['time_s']:.4g} s"]
    if summary["limits"]:
        lines.append("")
        for name, lim in summary["limits"].items():
            state = "EXCEEDED" if lim["exceeded"] else "ok"
            lines.append(f"limit {name}: peak {lim['max']:.1f} °C against {lim['limit']:g} °C "
                         f"(margin {lim['margin']:.1f} K) {state}")
    if tr["zth"]:
        lines += ["", f"{'thermal impedance':<20} {'R K/W':>9} {'Foster terms':>13} "
                      f"{'fit error':>10} {'modal check':>12}"]
        for name, z in tr["zth"].items():
            mc = z.get("modal_check") or {}
            check = ("" if mc.get("max_difference") is None
                     else f"{100 * mc['max_difference']:.2f} %")
            lines.append(f"{name:<20} {z['r_k_per_w']:>9.4g} {z['foster']['terms']:>13d} "
                         f"{100 * z['foster']['fit_error']:>9.2f}% {check:>12}")
    for name, p in tr["periodic"].items():
        lines.append(f"periodic {name}: {p['pulse_w']:g} W pulses of {p['width_s']:g} s every "
                     f"{p['period_s']:g} s (duty {100 * p['duty']:.3g} %): peak "
                     f"{p['peak']:.2f} °C in periodic steady state ({p['method']})")
    for name, c in summary.get("conductors", {}).items():
        hot, cold = 1e3 * c["resistance_ohm_per_m"], 1e3 * c["cold_resistance_ohm_per_m"]
        lines.append(f"conductor {name} at the hottest moment: {c['current_a']:.4g} A, "
                     f"{hot:.4g} mΩ/m ({cold:.4g} cold), "
                     f"loss {c['loss_w']:.4g} W, drop {1e3 * c['voltage_v']:.4g} mV, max "
                     f"{c['max_c']:.2f} °C")
    eb = summary["energy_balance"]
    lines += ["", f"energy over the run: in {eb['energy_in_j']:.6g} J = stored "
                  f"{eb['stored_j']:.6g} J + out {eb['heat_out_j']:.6g} J "
                  f"(balance {eb['relative_error']:.1e})"]
    if summary["boundaries"]:
        lines.append(f"{'boundary':<20} {'heat out W at end':>18} {'peak W':>10}")
        for name, b in summary["boundaries"].items():
            lines.append(f"{name:<20} {b['heat_out_w']:>18.4g} {b['heat_out_peak_w']:>10.4g}")
    if summary["probes"]:
        lines.append("")
        for name, v in summary["probes"].items():
            lines.append(f"probe {name}: peak {v:.2f} °C")
    for w in summary["warnings"]:
        lines.append(f"warning: {w}")
    lines += ["", "CAUTION: " + summary["caution"]]
    return "\n".join(lines)
