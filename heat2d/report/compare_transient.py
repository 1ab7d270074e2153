"""The comparison of two transient runs in a report (a ``compare.json`` with ``"mode":
"transient"``): each shape's peak and when, the hottest moment, the limits' margins,
the steady resistance and Z(t), the periodic peaks, side by side with B − A."""

from __future__ import annotations

from typing import Any

from .generic import cell_text
from .html import definitions, esc, figure_cell, image, num, para, section, table, tag


def _side(data: dict[str, Any], key: str) -> str:
    side = data.get(key) or {}
    return " · ".join(str(side[k]) for k in ("title", "model", "folder") if side.get(k))


def _delta(e: dict[str, Any], spec: str) -> Any:
    return cell_text(e.get("delta"), e.get("error"), spec=spec)


def _rel(e: dict[str, Any]) -> Any:
    a, d = e.get("a"), e.get("delta")
    return figure_cell(f"{100 * d / abs(a):+.3g} %" if isinstance(a, int | float) and a
                       and isinstance(d, int | float) else "-")


def _table(entries: dict[str, Any], first: str, unit: str, spec: str = ".2f",
           extra: tuple[list[str], Any] | None = None) -> str:
    """One row per name: A, B, Δ ± the time-step error, Δ relative to A (not for
    temperatures: a share of a value in °C means nothing), then extras."""
    rel = unit not in ("°C", "K")
    heads = [first, f"A ({unit})", f"B ({unit})", f"Δ (B − A) ({unit})"] + (
        ["Δ / A"] if rel else [])
    rows = []
    for name, e in entries.items():
        row = [name, cell_text(e.get("a"), spec=spec), cell_text(e.get("b"), spec=spec),
               _delta(e, spec), *([_rel(e)] if rel else [])]
        rows.append(row + (extra[1](e) if extra else []))
    return table(heads + (extra[0] if extra else []), rows)


def _hot_spot(hs: dict[str, Any], same_moment: bool) -> str:
    def where(side: Any) -> str:
        if not isinstance(side, dict):
            return "-"
        return (f"{num(side.get('temperature'), '.2f')} °C at t = "
                f"{num(side.get('time_s'))} s, in \"{side.get('shape')}\" at "
                f"({num(side.get('x'))}, {num(side.get('y'))})")

    pairs = [("hottest moment of A", where(hs.get("a"))),
             ("hottest moment of B", where(hs.get("b")))]
    if isinstance(hs.get("delta"), int | float):
        d = cell_text(hs["delta"], hs.get("error"), spec=".2f")
        pairs.append(("Δ (B − A)", f"{getattr(d, 'text', d)} K"
                      + ("" if same_moment or hs.get("delta_time_s") is None
                         else f", {num(hs['delta_time_s'])} s later in B"
                         if hs["delta_time_s"] > 0
                         else f", {num(-hs['delta_time_s'])} s earlier in B")))
    return tag("h3", "Hottest moment") + definitions(pairs)


def _train(t: dict[str, Any] | None) -> str:
    if not t:
        return "-"
    return (f"{num(t.get('pulse_w'))} W for {num(t.get('width_s'))} s every "
            f"{num(t.get('period_s'))} s")


def transient_compare_section(data: dict[str, Any]) -> str:
    """The comparison section of two transient runs."""
    same = data.get("same_geometry") and data.get("same_moment")
    out = definitions([("A", _side(data, "a")), ("B", _side(data, "b")),
                       ("map", "the same mesh and hottest moment: the map shows B − A"
                        if same else "the maps are side by side, each at its run's "
                        "hottest moment")])
    lines = [ln for ln in str(data.get("verdict") or "").splitlines() if ln.strip()]
    if lines:
        out += tag("div", tag("strong", "Verdict. ") + esc(lines[0]) + (tag("ul", "".join(
            tag("li", esc(ln)) for ln in lines[1:])) if len(lines) > 1 else ""),
            class_="caution")
    if isinstance(data.get("hot_spot"), dict):
        out += _hot_spot(data["hot_spot"], bool(data.get("same_moment")))
    if data.get("shapes"):
        out += tag("h3", "Peak of each shape over the run") + _table(
            data["shapes"], "shape", "°C",
            extra=(["peak at (s): A", "B"], lambda e: [figure_cell(num(e.get("a_time_s"))),
                                                      figure_cell(num(e.get("b_time_s")))]))
    if data.get("margins"):
        out += tag("h3", "Margins to the limits over the run") + _table(
            data["margins"], "shape", "K",
            extra=(["status: A", "B"], lambda e: [
                "EXCEEDED" if e.get("a_exceeded") else "within",
                "EXCEEDED" if e.get("b_exceeded") else "within"]))
    if data.get("zth"):
        out += tag("h3", "Steady resistance of each powered shape") + _table(
            {n: z["r_k_per_w"] for n, z in data["zth"].items()}, "shape", "K/W", ".4g")
        at = {f"{n} at {t} s": e for n, z in data["zth"].items()
              for t, e in (z.get("at") or {}).items()}
        if at:
            out += tag("h3", "Thermal impedance Z(t)") + _table(at, "shape and time", "K/W",
                                                                ".4g")
    if data.get("periodic"):
        out += tag("h3", "Periodic peaks") + _table(
            data["periodic"], "shape", "°C",
            extra=(["pulse train: A", "B"], lambda e: [_train(e.get("a_train")),
                                                      _train(e.get("b_train"))]))
    if data.get("probes"):
        out += tag("h3", "Probes: peak over the report times") + _table(
            data["probes"], "probe", "°C")
    for key, side in (("only_in_a", "A"), ("only_in_b", "B")):
        if data.get(key):
            out += para(f"Only in {side}: " + ", ".join(str(n) for n in data[key]) + ".")
    out += para("No row is called a real change: transient runs make no mesh error "
                "estimate.", cls="note")
    if data.get("caution"):
        out += para(str(data["caution"]), cls="note")
    if data.get("_png"):
        out += image(data["_png"], alt="comparison map",
                     caption="Difference map (B − A) at the hottest moment" if same
                     else "The two maps side by side, each at its hottest moment")
    return section("Comparison with another run", out, anchor="compare")
