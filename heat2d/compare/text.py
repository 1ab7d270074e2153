"""The words of a comparison: the verdict, the caution and the ``compare.txt`` table."""

from __future__ import annotations

from collections.abc import Collection, Sequence

from .sides import Side
from .transient import format_transient_comparison
from .wording import closing_notes

COMBINATION = ("the sum of the two runs' error estimates (a conservative bound on the error "
               "of the difference)")
"""How the combined ± is formed, as the compare text states it."""


def _num(value: float | None, spec: str = ".2f") -> str:
    return "-" if value is None else format(value, spec)


def _size(value: float, digits: int = 2) -> str:
    """A change or error in plain figures: two decimals, or two significant digits for
    small values (round-off shows as such, not as 0.00); ``digits`` more where needed."""
    v = abs(value)
    return "0" if v == 0 else f"{v:.{digits}f}" if v >= 0.1 else f"{v:.{digits}g}"


def sentence(what: str, entry: dict, *, unit: str = "K", more: str = "higher",
             less: str = "lower") -> str:
    """One plain sentence on one compared figure, e.g. ``die max is 3.2 K lower in B
    (± 0.4 K): larger than the error bars``."""
    d, err = entry["delta"], entry["error"]
    if d is None:
        return f"{what}: not known in both runs"
    # A change and error bars that print alike get the digits that tell them apart.
    digits = next((n for n in (2, 3, 4) if err is None or d == 0
                   or _size(d, n) != _size(err, n)), 4)
    change = (f"{what} is the same in A and B" if d == 0 else
              f"{what} is {_size(d, digits)} {unit} {more if d > 0 else less} in B")
    if err is None:
        return f"{change} (no error bars): significance unknown"
    change += f" (± {_size(err, digits)} {unit})"
    if entry["significant"]:
        return f"{change}: larger than the error bars"
    if d == 0:
        return f"{change}: no change"
    return f"{change}: within the error bars: no conclusion from these meshes"


def verdict(doc: dict, *, key_shapes: Collection[str] = (),
            unestimated: Sequence[str] = ()) -> str:
    """The verdict: whether the runs differ by more than their error bars, then one
    sentence on the hot spot, each of ``key_shapes``' maximum (the powered shapes and
    those with a temperature limit; every shape when there are none) and every probe;
    first a line for each run in ``unestimated`` (labels of runs without an error
    estimate)."""
    lines = [f"no error estimate in {label}: significance unknown" for label in unestimated]
    temps = [*doc["shapes"].values(), *doc["probes"].values()]
    known = [e for e in temps if e["significant"] is not None]
    larger = sum(bool(e["significant"]) for e in known)
    if known:
        kind = "shape maxima and probes"
        lines.append(
            f"{larger} of {len(known)} temperatures ({kind}) changed by more than their "
            "error bars" if larger else
            f"none of the {len(known)} temperatures ({kind}) changed by more than its "
            "error bars: no conclusion from these meshes"
            if any(e["delta"] for e in known) else
            f"none of the {len(known)} temperatures ({kind}) changed")
    heat = [n for n, e in doc["boundaries"].items() if e["significant"]]
    if heat:
        lines.append("heat through " + ", ".join(heat) + " changed by more than the "
                     "error bars")
    hs = doc["hot_spot"]
    where = ("" if hs["same_shape"] else
             f" (moved from {hs['a']['shape']} to {hs['b']['shape']})")
    lines.append(sentence("hot spot", hs) + where)
    lines += [sentence(f"{n} max", e) for n, e in doc["shapes"].items()
              if n in key_shapes or not key_shapes]
    lines += [sentence(f"probe {n}", e) for n, e in doc["probes"].items()]
    return "\n".join(lines)


def caution(doc: dict, a: Side, b: Side) -> str:
    """What the error bars cover and what they do not, and the caution every heat2d
    output carries."""
    parts = [f"Error bars: {COMBINATION}. They cover the meshes only, not the inputs "
             "(conductivities, contact resistances, h, powers), which usually matter more."]
    if not doc["same_geometry"]:
        parts.append("The two runs have different meshes: the maps are side by side, "
                     "not subtracted.")
    if doc["resistances"]:
        parts.append("The °C/W matrix carries no error estimate: its changes have no "
                     "error bars.")
    return " ".join(parts + closing_notes(a, b))


def format_comparison(doc: dict) -> str:
    """The comparison as a plain-text table (``compare.txt``): shapes, probes, boundaries,
    °C/W entries, what only one run has, the verdict and the caution (two transient runs:
    :func:`~heat2d.compare.transient.format_transient_comparison`)."""
    if doc.get("mode") == "transient":
        return format_transient_comparison(doc)

    def name(side: str) -> str:
        about = doc[side]
        where = about["folder"] or about["model"]
        return f"{side.upper()}: {where}" + (f"  ({about['title']})" if about["title"] else "")

    def flag(e: dict) -> str:
        return "unknown" if e["significant"] is None else "YES" if e["significant"] else "no"

    lines = [f"heat2d {doc['heat2d_version']} compare", name("a"), name("b"),
             "same mesh: yes (difference map)" if doc["same_geometry"] else
             "same mesh: no (maps side by side)", ""]

    def table(title: str, unit: str, rows: dict, keys=("a", "b", "delta", "error")) -> None:
        if not rows:
            return
        width = max(len(title), *(len(n) for n in rows)) + 2
        lines.append(f"{title:<{width}}{'A ' + unit:>11}{'B ' + unit:>11}{'Δ ' + unit:>11}"
                     f"{'± ' + unit:>11}  larger than ±")
        for n, e in rows.items():
            lines.append(f"{n:<{width}}" + "".join(f"{_num(e[k], '.3f'):>11}" for k in keys[:3])
                         + f"{_num(e[keys[3]], '.2g'):>11}  {flag(e)}")
        lines.append("")

    table("shape max", "°C", doc["shapes"])
    table("shape mean", "°C", doc["shape_means"])
    table("probe", "°C", doc["probes"])
    table("heat out", "W", doc["boundaries"], keys=("a_w", "b_w", "delta_w", "error_w"))
    rows = {f"{row} <- {src}": e for row, cols in doc["resistances"].items()
            for src, e in cols.items()}
    table("mean rise per W", "K/W", rows)
    for side in ("a", "b"):
        only = doc[f"only_in_{side}"]
        if only:
            lines.append(f"only in {side.upper()} (not compared): " + ", ".join(only))
    if doc["only_in_a"] or doc["only_in_b"]:
        lines.append("")
    lines += ["verdict:", *("  " + v for v in doc["verdict"].splitlines()), "",
              doc["caution"]]
    return "\n".join(lines)
