"""The summary of a transient run: what ``summary.json`` holds.

The keys every run writes keep their meaning, read over time:

* ``temperature.max``, ``hot_spot``: the hottest moment of the run (its time in
  ``time_s``); ``temperature.min`` the coldest nodal value over the run;
* ``shapes[NAME]``: ``max`` the shape's peak over the run (with ``time_s`` and the
  time-step error ``max_error``), ``mean`` and ``min`` at the hottest moment of the run;
* ``boundaries[NAME].heat_out_w``: at the end of the run, with ``heat_out_peak_w``;
* ``energy_balance``: over the whole run, in J and as mean powers over its length;
* ``probes[NAME]``: the probe's peak over the report times.

and ``transient`` adds the time-step record, each shape's peak, the thermal impedance
at decade times, the RC networks and the periodic peaks.
"""

from __future__ import annotations

from typing import Any

import numpy as np

from ..fem.sanity import check_finite
from ..post.resistance import shape_stats, surface_means
from ..post.results import CAUTION, CONDUCTOR_CAUTION, implausible
from ..version import __version__
from .march import PLAUSIBLE_SPAN, RELATIVE_TOLERANCE

TIME_CAUTION = (
    "A transient run assumes the section is long in depth and that the materials' density "
    "and specific heat hold; the pulse and duty figures are for the 2-D section, not a "
    "rating of the part.")


def build_summary(result, timings: dict[str, float]) -> dict[str, Any]:
    """The summary dict of a :class:`~.run.TransientResult` (before its summary is set)."""
    system, history = result.system, result.history
    mesh, model = system.mesh, system.model
    hot, hot_time = history.hottest, float(history.hottest_time)
    tri = mesh.triangles
    stats = shape_stats(mesh, hot[tri], system.layout.source, system.qdot * system.layout.volume)
    node = int(np.argmax(hot))
    around = np.flatnonzero((tri == node).any(axis=1))
    hot_tri = around[np.argmax(hot[tri[around]].mean(axis=1))]
    peaks = history.peaks()
    shapes = {}
    for sh in model.shapes:
        if sh.void or sh.name not in peaks:
            continue
        p = peaks[sh.name]
        s = stats[sh.index]
        shapes[sh.name] = {"material": sh.material, "max": p["max"], "time_s": p["time_s"],
                           "max_error": _finite(p["max_error"]), "mean": s["mean"],
                           "min": s["min"], "power_w": _peak_power(sh),
                           "area": s["area"], "volume_m3": s["volume_m3"]}
    limits = {}
    warnings = [*mesh.geometry.warnings, *mesh.warnings, *system.warnings]
    for sh in model.shapes:
        if sh.max_temperature is not None and sh.name in shapes:
            t = shapes[sh.name]["max"]
            limits[sh.name] = {"max": t, "limit": sh.max_temperature,
                               "margin": sh.max_temperature - t,
                               "exceeded": bool(t > sh.max_temperature),
                               "time_s": shapes[sh.name]["time_s"]}
            if t > sh.max_temperature:
                warnings.append(f"shape \"{sh.name}\" reaches {t:.1f} °C at "
                                f"{shapes[sh.name]['time_s']:.4g} s, above its limit "
                                f"{sh.max_temperature:g} °C")
    for name, per in result.periodic.items():
        limit = model.shape(name).max_temperature
        if limit is not None and per["peak"] > limit:
            warnings.append(f"shape \"{name}\": its pulse train repeated for ever (duty "
                            f"{100 * per['duty']:.3g} %) would reach {per['peak']:.1f} °C, "
                            f"above its limit {limit:g} °C")
    if np.isfinite(history.peak_max).any():
        warnings += implausible(float(np.nanmax(history.peak_max)))
    used = float(history.stats.get("coarse", history.stats).get("tolerance_used_k", 0.0))
    if used > model.transient.tolerance * (1 + 1e-9):
        warnings.append(f"the time-step tolerance was raised from "
                        f"{model.transient.tolerance:g} K to {used:.3g} K, "
                        f"{RELATIVE_TOLERANCE:g} of a temperature span past "
                        f"{PLAUSIBLE_SPAN:g} K")
    means = surface_means(mesh, system.layout, history.final)
    boundaries = {b.name: {"kind": b.label, "heat_out_w": float(history.heat_out[-1, i]),
                           "heat_out_peak_w": float(np.max(history.heat_out[:, i])),
                           "mean_temperature": _finite(means[i])}
                  for i, b in enumerate(model.boundaries)}
    energy = history.energy
    end = float(history.times[-1])
    balance = {"energy_in_j": energy["input_j"], "stored_j": energy["stored_j"],
               "heat_out_j": energy["out_j"], "heat_through_j": energy.get("through_j", 0.0),
               "roundoff_j": energy.get("roundoff_j", 0.0),
               "relative_error": energy["relative_error"],
               "power_in_w": energy["input_j"] / end, "heat_out_w": energy["out_j"] / end,
               "stored_w": energy["stored_j"] / end,
               "note": "over the whole run: power_in_w, heat_out_w and stored_w are means "
                       "over its length; energy in = stored + heat out; relative_error "
                       "over the largest of these and heat_through_j (the heat through "
                       "the boundaries either way)"}
    if abs(energy["relative_error"]) > 1e-6:
        warnings.append(f"the energy balance over the run closes only to "
                        f"{energy['relative_error']:.1e}")
    probes = {p.name: float(np.max(history.probes[:, i])) for i, p in enumerate(model.probes)}
    summary: dict[str, Any] = {
        "heat2d_version": __version__,
        "mode": "transient",
        "model": {"file": model.source, "title": model.title, "length_unit": model.length_unit,
                  "depth": None if model.axisymmetric else model.depth,
                  "axisymmetric": model.axisymmetric, "params": dict(model.params)},
        "units": {"length": model.length_unit, "temperature": "degC", "power": "W",
                  "time": "s", "energy": "J", "impedance": "K/W",
                  "powers_and_heat_flows_for": ("full revolution (axisymmetric)"
                                                if model.axisymmetric else
                                                f"depth {model.depth:g} {model.length_unit}")},
        "temperature": {"max": float(hot.max()), "min": float(history.coldest),
                        "time_s": hot_time},
        "hot_spot": {"x": float(mesh.points[node, 0]), "y": float(mesh.points[node, 1]),
                     "temperature": float(hot[node]), "time_s": hot_time,
                     "shape": model.shapes[mesh.triangle_shape[hot_tri]].name},
        "shapes": shapes,
        "boundaries": boundaries,
        "energy_balance": balance,
        "probes": probes,
        "limits": limits,
        "mesh": {"nodes": len(mesh.points), "triangles": len(tri),
                 "min_angle_deg": mesh.min_angle(), "target_size": mesh.geometry.size},
        "transient": _transient(result),
        "ids": {"shape": [sh.name for sh in model.shapes],
                "material": [m.name for m in model.materials]},
        "timings_s": dict(timings),
        "warnings": warnings,
        "caution": CAUTION + " " + TIME_CAUTION,
    }
    if model.has_current:
        summary["conductors"] = _conductors_at(system, hot, hot_time)
        for name, c in summary["conductors"].items():
            for member in c.get("members", {name: c}):
                if member in summary["shapes"]:
                    summary["shapes"][member]["power_w"] = (
                        c["members"][member]["loss_w"] if "members" in c else c["loss_w"])
        summary["caution"] += " " + CONDUCTOR_CAUTION
    check_finite({"summary": summary}, model.source)
    return summary


def _conductors_at(system, T: np.ndarray, t: float) -> dict[str, Any]:
    """Each conductor's figures (:func:`heat2d.fem.joule.conductor_figures`) at the
    hottest moment, with the currents of that moment."""
    from ..fem.joule import conductor_figures
    from .forcing import forcing
    from .joule_stepper import with_currents

    drive = forcing(system)
    # The currents just before t: the hottest moment is often a pulse's end.
    left = 2e-6 * max(t, 1e-12)
    figures = conductor_figures(with_currents(system, drive.currents(t, left)), T)
    return {name: {**c, "time_s": t} for name, c in figures.items()}


def _transient(result) -> dict[str, Any]:
    h, model = result.history, result.model
    st = model.transient
    stats = dict(h.stats)
    out: dict[str, Any] = {
        "end_s": float(h.times[-1]), "report_times": len(h.times), "steps": len(h.steps),
        "smallest_step_s": float(np.min(h.steps)), "largest_step_s": float(np.max(h.steps)),
        "initial": st.initial if isinstance(st.initial, str) else float(st.initial),
        "tolerance_k": st.tolerance,
        "tolerance_used_k": float(stats.get("coarse", stats).get("tolerance_used_k",
                                                                  st.tolerance)),
        # The history march's own counts (a linear model's error transport is among
        # them); a nonlinear model's check march on halved steps under "check_march".
        "solver": _counts(stats.get("coarse", stats)),
        "time_step_error_k": (_finite(float(np.nanmax(h.error)))
                              if np.isfinite(h.error).any() else None),
        "time_step_error_by": stats.get("error_estimate"),
        "peaks": h.peaks(),
        **({"check_march": _counts(stats)} if "coarse" in stats else {}),
        "energy_balance": dict(h.energy),
        "snapshot_times_s": [float(t) for t in h.snapshot_times],
    }
    for p in out["peaks"].values():
        p["max_error"] = _finite(p["max_error"])
    zth = {}
    for name, net in result.networks.items():
        t, z = result.zth[name]
        decades = 10.0 ** np.arange(np.ceil(np.log10(t[1])), np.floor(np.log10(t[-1])) + 1)
        foster, ladder, modal = net["foster"], net["cauer"], net["modal"]
        entry = {"r_k_per_w": net["r_total"], "linear": net["linear"],
                 "step_power_w": 1.0 if net["linear"] else net["power_w"],
                 "at": {f"{d:g}": float(np.interp(np.log(d), np.log(t[1:]), z[1:]))
                        for d in decades},
                 "foster": {"r_k_per_w": foster.r.tolist(), "tau_s": foster.tau.tolist(),
                            "fit_error": foster.error, "terms": len(foster.r)},
                 "cauer": None if ladder is None else {
                     "r_k_per_w": ladder.r.tolist(), "c_j_per_k": ladder.c.tolist()}}
        if modal is not None:
            entry["modal_check"] = modal_check(foster, modal, t, net["r_total"])
        zth[name] = entry
    out["zth"] = zth
    out["periodic"] = result.periodic
    out["duty"] = {name: {"widths_s": d["widths"].tolist(), "duties": list(d["duties"]),
                          "single_pulse_k_per_w": _list(d["peaks"][0]),
                          "k_per_w": {f"{duty:g}": _list(d["peaks"][i + 1])
                                      for i, duty in enumerate(d["duties"])}}
                   for name, d in result.duty.items()}
    return out


def modal_check(foster, modal, t: np.ndarray, r_total: float) -> dict[str, Any]:
    """The fitted network against the modal one of the discrete model, over the times
    where the modes kept describe the response (past 3 time constants of the fastest)."""
    tt = t[t > 3 * float(np.min(modal.tau))]
    if not len(tt):
        return {"modes": len(modal.r), "from_s": None, "max_difference": None}
    # The truncated modes hold the rest of the resistance; at these times they are settled.
    missing = r_total - float(np.sum(modal.r))
    diff = np.abs(foster.z(tt) - (modal.z(tt) + missing)) / r_total
    return {"modes": len(modal.r), "from_s": float(tt[0]),
            "max_difference": float(diff.max()),
            "slowest_tau_s": float(np.max(modal.tau)),
            "slowest_r_k_per_w": float(modal.r[np.argmax(modal.tau)])}


def _peak_power(shape) -> float:
    if shape.schedule is not None:
        return float(shape.schedule.peak)
    return float(shape.power or 0.0)


def _counts(stats: dict) -> dict:
    return {k: v for k, v in stats.items() if isinstance(v, int | float | str)}


def _list(values) -> list:
    """Numbers as a JSON list, None where a value is not finite."""
    return [float(v) if np.isfinite(v) else None for v in values]


def _finite(value):
    return None if value is None or not np.isfinite(value) else float(value)
