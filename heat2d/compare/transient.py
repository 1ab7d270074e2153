"""Two transient runs side by side: each shape's peak over the run and when it occurs,
the hottest moment, the limits' margins, the steady resistance and thermal impedance of
each powered shape, and the periodic peaks, with their differences B − A.

Error bars. A transient run estimates the time-step error of each peak (``max_error``)
but not the mesh error. The ``error`` of a compared peak is the sum of the two time-step
errors (a bound on the time-step part of the change); ``significant`` stays null, since
the mesh error, usually the larger, is not known.
"""

from __future__ import annotations

import math
from typing import Any

from ..errors import ModelError
from ..version import __version__
from .sides import Side
from .wording import closing_notes

SAME_TIME_RTOL = 1e-9
"""Two hottest moments are the same time when they agree to this fraction of the run."""


def mode(summary: dict[str, Any]) -> str:
    """``"transient"`` or ``"steady"``: the kind of run a summary records."""
    return "transient" if summary.get("mode") == "transient" or isinstance(
        summary.get("transient"), dict) else "steady"


def check_modes(a: Side, b: Side) -> str:
    """The mode both runs share; :class:`~heat2d.errors.ModelError` naming both when one
    is transient and the other steady."""
    ma, mb = mode(a.summary), mode(b.summary)
    if ma != mb:
        raise ModelError(f"cannot compare a {ma} run with a {mb} run: A {a.where} is "
                         f"{ma}, B {b.where} is {mb}; compare two steady or two transient "
                         "runs")
    return ma


def _number(value: Any) -> float | None:
    if value is None or isinstance(value, bool):
        return None
    value = float(value)
    return value if math.isfinite(value) else None


def entry(va: Any, vb: Any, ea: Any = None, eb: Any = None) -> dict[str, Any]:
    """One compared figure: A, B, the change B − A, the combined time-step ± (e_A + e_B,
    null unless both are known) and ``significant`` null (no mesh error estimate)."""
    va, vb, ea, eb = _number(va), _number(vb), _number(ea), _number(eb)
    delta = None if va is None or vb is None else vb - va
    error = None if ea is None or eb is None else ea + eb
    return {"a": va, "b": vb, "delta": delta, "error": error, "significant": None}


def compare_transient(a: Side, b: Side, *, same_geometry: bool) -> dict[str, Any]:
    """The comparison document of two transient runs (the ``compare.json`` content).

    Keys: ``heat2d_version``, ``mode`` (``"transient"``), ``a``, ``b``,
    ``same_geometry`` (same mesh), ``same_moment`` (the same hottest moment, so the map
    subtracts the two fields), ``shapes`` (each shape's peak over the run: an entry with
    ``a_time_s`` and ``b_time_s``), ``probes`` (peaks), ``boundaries`` (heat out at the
    end of the run, ``a_w`` ... as in a steady comparison), ``hot_spot`` (``a`` and ``b``
    with ``time_s``, then ``delta``, ``error``, ``significant``, ``same_shape``,
    ``delta_time_s``), ``margins`` (shapes with a limit in both runs: the margin over the
    run, with ``a_exceeded``, ``b_exceeded``), ``zth`` ({shape: {``r_k_per_w``: entry,
    ``at``: {time: entry}}} at the decade times both runs have), ``periodic`` ({shape:
    entry of the periodic peak with ``a_train`` and ``b_train``, ``same_train``}),
    ``only_in_a``, ``only_in_b``, ``verdict``, ``caution``. An entry is as
    :func:`entry` makes it. No value is NaN.
    """
    sa, sb = a.summary, b.summary
    ta, tb = sa["transient"], sb["transient"]
    only_a: list[str] = []
    only_b: list[str] = []

    def paired(kind: str, da: dict, db: dict) -> list[str]:
        only_a.extend(f"{kind} {n}" for n in da if n not in db)
        only_b.extend(f"{kind} {n}" for n in db if n not in da)
        return [n for n in da if n in db]

    shapes = {}
    for name in paired("shape", sa["shapes"], sb["shapes"]):
        x, y = sa["shapes"][name], sb["shapes"][name]
        shapes[name] = {**entry(x["max"], y["max"], x.get("max_error"), y.get("max_error")),
                        "a_time_s": _number(x.get("time_s")),
                        "b_time_s": _number(y.get("time_s"))}
    pa, pb = sa.get("probes", {}), sb.get("probes", {})
    probes = {n: entry(pa[n], pb[n]) for n in paired("probe", pa, pb)}
    boundaries = {}
    for name in paired("boundary", sa["boundaries"], sb["boundaries"]):
        e = entry(sa["boundaries"][name]["heat_out_w"], sb["boundaries"][name]["heat_out_w"])
        boundaries[name] = {"a_w": e["a"], "b_w": e["b"], "delta_w": e["delta"],
                            "error_w": None, "significant": None}
    la, lb = sa.get("limits", {}), sb.get("limits", {})
    margins = {n: {**entry(la[n]["margin"], lb[n]["margin"],
                           (sa["shapes"].get(n) or {}).get("max_error"),
                           (sb["shapes"].get(n) or {}).get("max_error")),
                   "a_exceeded": bool(la[n]["exceeded"]), "b_exceeded": bool(lb[n]["exceeded"])}
               for n in paired("limit", la, lb)}
    za, zb = ta.get("zth") or {}, tb.get("zth") or {}
    zth = {}
    for name in paired("zth", za, zb):
        at_a, at_b = za[name].get("at") or {}, zb[name].get("at") or {}
        zth[name] = {"r_k_per_w": entry(za[name]["r_k_per_w"], zb[name]["r_k_per_w"]),
                     "at": {t: entry(at_a[t], at_b[t]) for t in at_a if t in at_b}}
    qa, qb = ta.get("periodic") or {}, tb.get("periodic") or {}
    periodic = {}
    for name in paired("periodic", qa, qb):
        x, y = qa[name], qb[name]
        train_a, train_b = _train(x), _train(y)
        periodic[name] = {**entry(x.get("peak"), y.get("peak")), "a_train": train_a,
                          "b_train": train_b, "same_train": train_a == train_b}
    hot = _hot_spot(sa["hot_spot"], sb["hot_spot"],
                    (sa["shapes"].get(sa["hot_spot"]["shape"]) or {}).get("max_error"),
                    (sb["shapes"].get(sb["hot_spot"]["shape"]) or {}).get("max_error"))
    end = max(float(ta["end_s"]), float(tb["end_s"]))
    same_moment = bool(hot["delta_time_s"] is not None
                       and abs(hot["delta_time_s"]) <= SAME_TIME_RTOL * end)
    doc = {
        "heat2d_version": __version__, "mode": "transient",
        "a": _about(a), "b": _about(b),
        "same_geometry": same_geometry, "same_moment": same_moment,
        "end_s": {"a": _number(ta["end_s"]), "b": _number(tb["end_s"])},
        "shapes": shapes, "probes": probes, "boundaries": boundaries, "hot_spot": hot,
        "margins": margins, "zth": zth, "periodic": periodic,
        "only_in_a": only_a, "only_in_b": only_b,
    }
    doc["verdict"] = verdict(doc, key_shapes={n for n in shapes for s in (sa, sb)
                                              if s["shapes"][n].get("power_w")
                                              or n in s.get("limits", {})})
    doc["caution"] = caution(doc, a, b)
    return doc


def _about(side: Side) -> dict:
    return {"folder": side.folder, "model": side.model, "title": side.title}


def _train(p: dict[str, Any]) -> dict[str, Any]:
    return {k: _number(p.get(k)) for k in ("pulse_w", "between_w", "width_s", "period_s")}


def _hot_spot(ha: dict, hb: dict, ea: Any, eb: Any) -> dict[str, Any]:
    e = entry(ha["temperature"], hb["temperature"], ea, eb)

    def spot(h: dict) -> dict:
        return {"x": _number(h["x"]), "y": _number(h["y"]), "shape": h["shape"],
                "temperature": _number(h["temperature"]), "time_s": _number(h.get("time_s"))}

    ta, tb = _number(ha.get("time_s")), _number(hb.get("time_s"))
    return {"a": spot(ha), "b": spot(hb), **{k: e[k] for k in ("delta", "error",
                                                               "significant")},
            "same_shape": ha["shape"] == hb["shape"],
            "delta_time_s": None if ta is None or tb is None else tb - ta}


def _size(value: float) -> str:
    v = abs(value)
    return "0" if v == 0 else f"{v:.2f}" if v >= 0.1 else f"{v:.2g}"


def sentence(what: str, e: dict[str, Any], *, unit: str = "K") -> str:
    """One plain sentence on one compared figure of two transient runs."""
    d = e["delta"]
    if d is None:
        return f"{what}: not known in both runs"
    text = (f"{what} is the same in A and B" if d == 0 else
            f"{what} is {_size(d)} {unit} {'higher' if d > 0 else 'lower'} in B")
    a = e["a"]["temperature"] if isinstance(e["a"], dict) else e["a"]
    if a and unit != "K":           # a share of a temperature in °C means nothing
        text += f" ({100 * d / abs(a):+.3g} %)"
    if e["error"] is not None:
        text += f"; time-step error ± {_size(e['error'])} {unit}"
    return text


def verdict(doc: dict[str, Any], *, key_shapes=()) -> str:
    """The verdict in words: the hottest moment, each key shape's peak (powered or with a
    limit; every shape when there are none), the limits, the steady resistances and the
    periodic peaks."""
    lines = ["transient runs carry no mesh error estimate: the changes are stated, "
             "whether each is real is not decided (± is the time-step error only)"]
    hs = doc["hot_spot"]
    when = (f"at t = {hs['a']['time_s']:.4g} s in both" if doc["same_moment"] else
            f"at t = {hs['a']['time_s']:.4g} s in A, {hs['b']['time_s']:.4g} s in B"
            if hs["delta_time_s"] is not None else "")
    where = "" if hs["same_shape"] else f", moved from {hs['a']['shape']} to {hs['b']['shape']}"
    lines.append(sentence("the hottest moment's temperature", hs) + f" ({when}{where})")
    lines += [sentence(f"{n} peak", e) for n, e in doc["shapes"].items()
              if n in key_shapes or not key_shapes]
    for n, e in doc["margins"].items():
        if e["a_exceeded"] != e["b_exceeded"]:
            lines.append(f"{n}: limit {'exceeded' if e['b_exceeded'] else 'kept'} in B, "
                         f"{'exceeded' if e['a_exceeded'] else 'kept'} in A")
        elif e["a_exceeded"]:
            lines.append(f"{n}: limit exceeded in both")
    lines += [sentence(f"{n} steady resistance", z["r_k_per_w"], unit="K/W")
              for n, z in doc["zth"].items()]
    for n, e in doc["periodic"].items():
        lines.append(sentence(f"{n} periodic peak", e)
                     + ("" if e["same_train"] else " (the pulse trains differ)"))
    lines += [sentence(f"probe {n} peak", e) for n, e in doc["probes"].items()]
    return "\n".join(lines)


def caution(doc: dict[str, Any], a: Side, b: Side) -> str:
    """What the comparison of two transient runs rests on, and the caution."""
    parts = ["The ± of a peak is the sum of the two runs' time-step error estimates; "
             "transient runs make no mesh error estimate, and the inputs (conductivities, "
             "heat capacities, h, powers) usually matter more."]
    if not doc["same_geometry"]:
        parts.append("The two runs have different meshes: the maps are side by side, "
                     "not subtracted.")
    elif not doc["same_moment"]:
        parts.append("The hottest moments differ in time: the maps are side by side, each "
                     "at its own run's hottest moment.")
    if doc["end_s"]["a"] != doc["end_s"]["b"]:
        parts.append("The runs end at different times: peaks cover different spans.")
    return " ".join(parts + closing_notes(a, b))


def format_transient_comparison(doc: dict[str, Any]) -> str:
    """The comparison of two transient runs as a plain-text table (``compare.txt``)."""

    def name(side: str) -> str:
        about = doc[side]
        where = about["folder"] or about["model"]
        return f"{side.upper()}: {where}" + (f"  ({about['title']})" if about["title"] else "")

    def f(value: Any, spec: str = ".3f") -> str:
        return "-" if value is None else format(value, spec)

    same = ("same mesh and hottest moment: yes (difference map)" if doc["same_geometry"]
            and doc["same_moment"] else "maps side by side, each at its hottest moment")
    lines = [f"heat2d {doc['heat2d_version']} compare (transient runs)", name("a"), name("b"),
             same, ""]

    def table(title: str, unit: str, rows: dict, extra=None) -> None:
        if not rows:
            return
        width = max(len(title), *(len(n) for n in rows)) + 2
        head = (f"{title:<{width}}{'A ' + unit:>12}{'B ' + unit:>12}{'Δ ' + unit:>12}"
                f"{'± ' + unit:>11}")
        lines.append(head + (f"  {extra[0]}" if extra else ""))
        for n, e in rows.items():
            lines.append(f"{n:<{width}}{f(e['a']):>12}{f(e['b']):>12}{f(e['delta']):>12}"
                         f"{f(e['error'], '.2g'):>11}" + (f"  {extra[1](e)}" if extra else ""))
        lines.append("")

    table("shape peak", "°C", doc["shapes"],
          ("at s (A, B)", lambda e: f"{f(e['a_time_s'], '.4g')}, {f(e['b_time_s'], '.4g')}"))
    table("limit margin", "K", doc["margins"])
    table("probe peak", "°C", doc["probes"])
    table("steady R", "K/W", {n: z["r_k_per_w"] for n, z in doc["zth"].items()})
    table("Z(t)", "K/W", {f"{n} at {t} s": e for n, z in doc["zth"].items()
                          for t, e in z["at"].items()})
    table("periodic peak", "°C", doc["periodic"],
          ("same pulse train", lambda e: "yes" if e["same_train"] else "NO"))
    table("heat out at end", "W", {n: {"a": e["a_w"], "b": e["b_w"], "delta": e["delta_w"],
                                       "error": None} for n, e in doc["boundaries"].items()})
    for side in ("a", "b"):
        only = doc[f"only_in_{side}"]
        if only:
            lines.append(f"only in {side.upper()} (not compared): " + ", ".join(only))
    if doc["only_in_a"] or doc["only_in_b"]:
        lines.append("")
    lines += ["verdict:", *("  " + v for v in doc["verdict"].splitlines()), "",
              doc["caution"]]
    return "\n".join(lines)
