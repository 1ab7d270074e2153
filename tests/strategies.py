"""Hypothesis strategies for heat2d model files: small valid models and their mutations.

A valid model is drawn as a plain dict (the TOML document) by :func:`models` and turned
into text by :func:`to_toml`. Every drawn model is small: a base plate or layer stack a
few to 30 mm long, at most three more shapes standing on it or inside it, and a mesh
size of 1/6 to 1/14 of the plate, so that one run takes well under a second. It uses
the keys of docs/model-format.md: materials with ``k``, ``kx``/``ky`` or a k(T) table,
rect, polygon and circle shapes, voids, ``power``, ``power_density``, ``mesh_size``,
``repeat``, ``max_temperature``, a ``[[stack]]``, boundaries of every kind on side,
shape, box and ``exterior`` selectors, an ``[[interface]]``, probes, ``[mesh]`` and
``[params]`` with expressions.

:func:`mutated_texts` then breaks such a model the way a user might (or worse): a key
deleted, a value of the wrong type or out of range (lists, tables, booleans, strings,
integers of hundreds of digits, nan and inf, 1e300, 5e-324), an unknown key, a name
that refers to nothing, absurd expressions, deeply nested arrays, or TOML text garbled
character by character. :func:`model_texts` mixes the two.
"""

from __future__ import annotations

import json
import math
import re
from typing import Any

from hypothesis import strategies as st

Doc = dict[str, Any]


class Raw(str):
    """TOML text written as it stands (deep arrays, dates)."""

# -- TOML text --------------------------------------------------------------------------

_BARE = re.compile(r"^[A-Za-z0-9_-]+$")


def _key(k: str) -> str:
    return k if _BARE.match(k) else json.dumps(k)


def toml_value(v: Any) -> str:
    """One TOML value, written inline (tables as ``{ k = v }``)."""
    if isinstance(v, Raw):
        return str(v)
    if isinstance(v, bool):
        return "true" if v else "false"
    if isinstance(v, int):
        return str(v)
    if isinstance(v, float):
        if math.isnan(v):
            return "nan"
        if math.isinf(v):
            return "inf" if v > 0 else "-inf"
        return repr(v)
    if isinstance(v, str):
        return json.dumps(v)  # a JSON string is a TOML basic string
    if isinstance(v, list):
        return "[" + ", ".join(toml_value(x) for x in v) + "]"
    if isinstance(v, dict):
        return "{ " + ", ".join(f"{_key(k)} = {toml_value(x)}" for k, x in v.items()) + " }"
    raise TypeError(type(v))


def to_toml(doc: Doc) -> str:
    """The model file for ``doc``: ``[table]``, ``[materials.NAME]``, ``[[array]]``."""
    head: list[str] = []
    body: list[str] = []
    for name, value in doc.items():
        if isinstance(value, dict) and name == "materials" and all(
                isinstance(m, dict) for m in value.values()):
            for mat, table in value.items():
                body.append(f"\n[materials.{_key(mat)}]")
                body += [f"{_key(k)} = {toml_value(x)}" for k, x in table.items()]
        elif isinstance(value, dict):
            body.append(f"\n[{_key(name)}]")
            body += [f"{_key(k)} = {toml_value(x)}" for k, x in value.items()]
        elif isinstance(value, list) and value and all(isinstance(t, dict) for t in value):
            for table in value:
                body.append(f"\n[[{_key(name)}]]")
                body += [f"{_key(k)} = {toml_value(x)}" for k, x in table.items()]
        else:
            head.append(f"{_key(name)} = {toml_value(value)}")
    return "\n".join(head + body) + "\n"


# -- valid models -----------------------------------------------------------------------

def _num(lo: float, hi: float, places: int = 2) -> st.SearchStrategy[float]:
    """A round number in [lo, hi] (round numbers keep shrunk models readable)."""
    scale = 10 ** places
    return st.integers(math.ceil(lo * scale), math.floor(hi * scale)).map(lambda i: i / scale)


@st.composite
def materials(draw: st.DrawFn, count: int) -> Doc:
    out: Doc = {}
    for i in range(count):
        kind = draw(st.sampled_from(["k", "k", "kxky", "table"]))
        if kind == "k":
            m: Doc = {"k": draw(_num(0.1, 400, 1))}
        elif kind == "kxky":
            m = {"kx": draw(_num(0.1, 400, 1)), "ky": draw(_num(0.1, 400, 1))}
        else:
            m = {"k": [[0, draw(_num(0.5, 200, 1))], [150, draw(_num(0.5, 200, 1))]]}
        if draw(st.booleans()):
            m["note"] = "generated"
        out[f"m{i}"] = m
    return out


@st.composite
def models(draw: st.DrawFn) -> Doc:
    """A small valid model as a TOML document (dict)."""
    w = draw(_num(5, 30, 1))
    n_layers = draw(st.integers(1, 3))
    layer_t = draw(_num(1 / n_layers, 4 / n_layers))
    h = layer_t * n_layers  # exactly the stack's height: no accidental sliver on top
    size = round(max(w, h) / draw(st.integers(6, 14)), 4)
    mats = draw(materials(draw(st.integers(1, 3))))
    names = list(mats)
    doc: Doc = {}
    model: Doc = {"length_unit": "mm"}
    axisymmetric = draw(st.integers(0, 9)) == 0
    if axisymmetric:
        model["axisymmetric"] = True
    elif draw(st.booleans()):
        model["depth"] = draw(_num(1, 50, 1))
    if draw(st.booleans()):
        model["title"] = "generated model"
    doc["model"] = model
    use_params = draw(st.booleans())
    if use_params:
        doc["params"] = {"w": w, "h": h, "half": "w / 2", "p": draw(_num(0, 5))}
    doc["materials"] = mats

    shapes: list[Doc] = []
    stacks: list[Doc] = []
    base_w: Any = "w" if use_params else w
    if n_layers == 1 and draw(st.booleans()):
        shapes.append({"name": "base", "material": draw(st.sampled_from(names)),
                       "rect": {"x": 0, "y": 0, "width": base_w, "height": "h" if use_params
                                else h}})
    else:
        layers = [{"name": f"l{i}", "thickness": layer_t,
                   "material": draw(st.sampled_from(names))} for i in range(n_layers)]
        stacks.append({"name": "base", "x": 0, "y": 0, "width": base_w, "layers": layers})
    extras = draw(st.lists(st.sampled_from(["chip", "blob", "hole", "wedge", "notch"]),
                           max_size=3, unique=True))
    if "hole" in extras and draw(st.booleans()):
        extras.append("hole2")  # a second void circle overlapping the first
    for kind in extras:
        mat = draw(st.sampled_from(names))
        if kind == "chip":
            cw = draw(_num(w / 10, w / 3))
            cx = draw(_num(0, w - cw))
            s: Doc = {"name": "chip", "material": mat,
                      "rect": {"x": cx, "y": h, "width": cw, "height": draw(_num(0.3, 1.5))}}
            count = draw(st.integers(1, 3))
            if count > 1 and cx + (count - 1) * 1.2 * cw + cw <= w:
                s["repeat"] = {"count": count, "dx": round(1.2 * cw, 4)}
        elif kind == "blob":
            r = draw(_num(h / 5, h / 3))
            s = {"name": "blob", "material": mat,
                 "circle": {"x": draw(_num(r, w - r)), "y": h / 2, "r": r}}
        elif kind == "hole":
            r = draw(_num(h / 6, h / 4))
            s = {"name": "hole", "void": True,
                 "circle": {"x": draw(_num(0.3 * w, 0.7 * w)), "y": h / 2, "r": r}}
        elif kind == "wedge":
            a = draw(_num(w / 8, w / 3))
            x0 = draw(_num(0, w - a))
            s = {"name": "wedge", "material": mat,
                 "polygon": [[x0, h], [x0 + a, h], [x0 + a / 2, h + draw(_num(0.3, 2))]]}
        elif kind == "hole2":
            first = shapes[-1]["circle"] if shapes[-1]["name"] == "hole" else {
                "x": w / 2, "y": h / 2, "r": h / 5}
            s = {"name": "hole2", "void": True,
                 "circle": {"x": round(first["x"] + first["r"] * draw(_num(0.2, 1.5)), 4),
                            "y": round(h / 2 + first["r"] * draw(_num(-0.5, 0.5)), 4),
                            "r": round(first["r"] * draw(_num(0.5, 1.2)), 4)}}
        else:
            nw, nh = round(w / 8, 2), round(h / 3, 2)  # a corner cut, flush with the base
            s = {"name": "notch", "void": True,
                 "rect": {"x": round(w - nw, 4), "y": round(h - nh, 4), "width": nw,
                          "height": nh}}
        if not s.get("void"):
            power = draw(st.sampled_from([None, "power", "power", "density"]))
            if power == "power":
                s["power"] = "p" if use_params else draw(_num(0, 5))
            elif power == "density":
                s["power_density"] = draw(_num(1e3, 1e6, 0))
            if draw(st.integers(0, 4)) == 0:
                s["max_temperature"] = draw(_num(20, 150, 0))
        if draw(st.integers(0, 3)) == 0:
            s["mesh_size"] = round(size * draw(_num(0.4, 1.5)), 4)
        shapes.append(s)
    if stacks:  # written first: the base is painted before the shapes on and in it
        doc["stack"] = stacks
    if shapes:
        doc["shape"] = shapes
    solids = [s["name"] for s in shapes if not s.get("void") and s["name"] != "base"]

    boundaries: list[Doc] = []
    anchor = draw(st.sampled_from(["left", "bottom"]))
    if anchor == "left" and not axisymmetric:
        boundaries.append({"name": "mount", "on": "base.left",
                           "temperature": draw(_num(0, 100, 1))})
    else:
        boundaries.append({"name": "mount", "on": "base.bottom", "h": draw(_num(1, 500, 1)),
                           "ambient": draw(_num(0, 60, 1))})
    if draw(st.booleans()):
        boundaries.append({"name": "cut", "on": "base.right",
                           "heat_flux": draw(_num(-500, 500, 0))})
    if "hole" in extras and draw(st.booleans()):
        boundaries.append({"name": "bore", "on": "hole", "temperature": draw(_num(0, 60))})
    if "chip" in extras and draw(st.booleans()):
        boundaries.append({"name": "lid", "on": "chip.top", "h": draw(_num(1, 100)),
                           "ambient": 25})
    if draw(st.integers(0, 3)) == 0:
        # The top face near the left end, clear of base.left and of every chip top.
        boundaries.append({"name": "spot", "on": {"box": [round(w / 20, 4), round(h * 0.9, 4),
                                                          round(w / 5, 4), h + 0.2]},
                           "heat_flux": draw(_num(-100, 1000, 0))})
    if draw(st.booleans()):
        air: Doc = {"name": "air", "on": "exterior", "h": draw(_num(1, 50, 1)),
                    "ambient": draw(_num(0, 60, 1))}
        if draw(st.booleans()):
            air["emissivity"] = draw(_num(0.05, 1))
        boundaries.append(air)
    doc["boundary"] = boundaries
    if solids and draw(st.integers(0, 3)) == 0:
        doc["interface"] = [{"name": "pad", "between": [solids[0], "base"],
                             "resistance": draw(_num(1e-5, 1e-3, 5))}]
    mesh: Doc = {"size": size}
    if draw(st.booleans()):
        mesh["min_angle"] = draw(_num(20, 30, 0))
    doc["mesh"] = mesh
    if draw(st.booleans()):
        doc["probe"] = [{"name": "near_end", "at": [round(w * 0.1, 4), round(h / 2, 4)]}]
    return doc


@st.composite
def transient_models(draw: st.DrawFn) -> Doc:
    """A small valid model made transient: every material gets a capacity, a powered
    shape (if any) may get a pulse train or a table, and a [transient] section."""
    doc = draw(models())
    for m in doc["materials"].values():
        m["density"] = draw(_num(100, 9000, 0))
        m["specific_heat"] = draw(_num(100, 2000, 0))
    end = draw(st.sampled_from([0.01, 1.0, 100.0]))
    section: Doc = {"end": end}
    if draw(st.booleans()):
        section["first"] = end * draw(st.sampled_from([1e-6, 1e-4, 1e-2]))
        section["per_decade"] = draw(st.integers(1, 10))
    elif draw(st.booleans()):
        section["every"] = end / draw(st.integers(2, 40))
    section["initial"] = draw(st.sampled_from(["steady", 25.0, 80.0]))
    section["zth"] = draw(st.booleans())
    doc["transient"] = section
    powered = [sh for sh in doc.get("shape", []) if "power" in sh]
    if powered and draw(st.booleans()):
        shape = powered[0]
        width = end * draw(st.sampled_from([0.01, 0.1, 0.3]))
        if draw(st.booleans()):
            pulse: Doc = {"power": draw(_num(0.1, 10)), "width": width}
            if draw(st.booleans()):
                pulse["period"] = width * draw(st.sampled_from([2, 5, 10]))
                pulse["count"] = draw(st.integers(1, 5))
            shape["power_pulse"] = pulse
        else:
            shape.pop("power")
            shape["power_table"] = [[0, 0], [width, draw(_num(0.1, 10))], [2 * width, 0]]
    return doc


# -- mutations --------------------------------------------------------------------------

HUGE_INT = 10 ** 400
#: Expressions that must fail cleanly (or evaluate) without running for long.
EXPRESSIONS: list[Any] = [
    "1e300 * 1e300", "9**9**9", "(9**99)**99", "1 / 0", "sqrt(-1)", "log(0)", "x + 1",
    "__import__('os')", "(" * 300 + "1" + ")" * 300, "+".join(["1"] * 20000),
    "1" * 500, "-" * 5000 + "1", "exp(1000)", "max()", "pi.real", "[1][0]", "2**-2000",
    "10**308 * 10", "w * 1e308", "half - half", "abs(-3)", "1 if 1 else 2",
]
#: Values of the wrong type, out of range or absurd, put where a valid value stood.
WEIRD: list[Any] = [
    [], [1, 2], [[1.0, 2.0], [3.0]], {}, {"a": 1}, True, False, "", "abc", "nosuch",
    HUGE_INT, -HUGE_INT, 2 ** 63, float("nan"), float("inf"), -float("inf"), "nan", "inf",
    "-inf", -1, 0, -1e300, 1e300, 1e-300, 5e-324, 1e15, 1.5, "m", "um",
    Raw("[" * 600 + "]" * 600), Raw("1979-05-27T07:32:00Z"), Raw("07:32:00"),
] + EXPRESSIONS
#: Numbers at the edges of what a float can hold, or of what a key allows.
EXTREME: list[Any] = [-1, 0, -1e300, 1e300, 1e-300, 5e-324, 1e15, 1e9, -1e9, 1e-9,
                      HUGE_INT, 2 ** 63, 1e6, -273.15, -300, 0.5]
UNKNOWN_KEYS = ["colour", "K", "Width", "temprature", "shape", "on", ""]


def _paths(node: Any, prefix: tuple = ()) -> list[tuple]:
    """Every place in the document: keys of tables and indexes of arrays."""
    out: list[tuple] = []
    items = (node.items() if isinstance(node, dict) else
             enumerate(node) if isinstance(node, list) else ())
    for k, v in items:
        p = prefix + (k,)
        out.append(p)
        if len(p) < 6:
            out += _paths(v, p)
    return out


def _parent(doc: Doc, path: tuple) -> Any:
    node: Any = doc
    for k in path[:-1]:
        node = node[k]
    return node


def _copy(v: Any) -> Any:
    if isinstance(v, dict):
        return {k: _copy(x) for k, x in v.items()}
    if isinstance(v, list):
        return [_copy(x) for x in v]
    return v


@st.composite
def mutate(draw: st.DrawFn, doc: Doc) -> Doc:
    """``doc`` with one mutation applied (a new document)."""
    doc = _copy(doc)
    paths = _paths(doc)
    op = draw(st.sampled_from(["delete", "weird", "extreme", "unknown", "rename",
                               "expression", "section", "geometry"]))
    if op == "geometry":
        return draw(reshape(doc))
    if op == "section":
        # A whole new top-level entry or table that heat2d does not know.
        doc[draw(st.sampled_from(["materials", "mesh", "model", "shapes", "Boundary",
                                  "params"]))] = draw(st.sampled_from(WEIRD))
        return doc
    if op == "unknown":
        tables = [()] + [p for p in paths if isinstance(_get(doc, p), dict)]
        where = draw(st.sampled_from(tables))
        target = _get(doc, where)
        target[draw(st.sampled_from(UNKNOWN_KEYS))] = draw(st.sampled_from([1, "x", True]))
        return doc
    if op == "rename":
        strings = [p for p in paths if isinstance(_get(doc, p), str)] or paths
        path = draw(st.sampled_from(strings))
        value = draw(st.sampled_from(["nosuch", "nosuch.top", "base.middle", "base[9]",
                                      "chip[0]", "exterior", "base", "m0", "m9", "Base"]))
    else:
        if op in ("extreme", "expression"):
            numbers = [p for p in paths if isinstance(_get(doc, p), int | float | str)
                       and not isinstance(_get(doc, p), bool | Raw)] or paths
            path = draw(st.sampled_from(numbers))
        else:
            path = draw(st.sampled_from(paths))
        if op == "delete":
            parent = _parent(doc, path)
            del parent[path[-1]]
            return doc
        if op == "extreme":
            value = draw(st.sampled_from(EXTREME))
        elif op == "expression":
            value = draw(st.sampled_from(EXPRESSIONS))
        else:
            value = draw(st.sampled_from(WEIRD))
    _parent(doc, path)[path[-1]] = value
    return doc


def _lengths(doc: Doc) -> list[tuple]:
    """Paths of the coordinates and sizes (numbers only)."""
    keys = {"x", "y", "width", "height", "r", "thickness", "dx", "size", "mesh_size"}
    out = []
    for p in _paths(doc):
        v = _get(doc, p)
        if isinstance(v, int | float) and not isinstance(v, bool) and (
                p[-1] in keys or (len(p) > 2 and p[-3] in ("polygon", "at"))):
            out.append(p)
    return out


@st.composite
def reshape(draw: st.DrawFn, doc: Doc) -> Doc:
    """Plausible geometry mistakes: every length scaled (a unit slip), a sliver, a shape
    moved far away or lifted off the rest, a shape covered by a later one."""
    how = draw(st.sampled_from(["scale", "sliver", "far", "lift", "cover"]))
    raw = doc.get("shape")
    shapes = [t for t in raw if isinstance(t, dict)] if isinstance(raw, list) else []
    if how == "scale" or not shapes:
        factor = draw(st.sampled_from([1e-6, 1e-3, 1e3, 1e5]))
        for p in _lengths(doc):
            _parent(doc, p)[p[-1]] = _get(doc, p) * factor
        return doc
    shape = draw(st.sampled_from(shapes))
    geo = next((shape[k] for k in ("rect", "circle") if isinstance(shape.get(k), dict)), None)
    if how == "cover":
        # An earlier mutation may have left [materials] empty or not a table: any name.
        materials = doc.get("materials")
        name = next(iter(materials), "m") if isinstance(materials, dict) else "m"
        doc["shape"].append({"name": "cover", "material": name,
                             "rect": {"x": -1, "y": -1, "width": 100, "height": 100}})
    elif geo is None:
        return doc
    elif how == "sliver":
        key = "height" if "height" in geo else "r"
        geo[key] = draw(st.sampled_from([1e-5, 1e-7, 1e-9]))
    elif how == "far":
        geo["x"] = draw(st.sampled_from([1e5, -1e5, 9e5]))
    else:
        y = geo.get("y", 0)                 # a circle may leave y out (0)
        geo["y"] = (y if isinstance(y, int | float) else 0) + 0.05
    return doc


def _get(doc: Doc, path: tuple) -> Any:
    node: Any = doc
    for k in path:
        node = node[k]
    return node


@st.composite
def garble(draw: st.DrawFn, text: str) -> str:
    """``text`` with a few characters inserted, deleted or lines repeated."""
    for _ in range(draw(st.integers(1, 3))):
        op = draw(st.sampled_from(["insert", "delete", "truncate", "duplicate"]))
        i = draw(st.integers(0, max(len(text) - 1, 0)))
        if op == "insert":
            text = text[:i] + draw(st.sampled_from(list("[]{}=\"',\n#\\.") + ["\x00", "é",
                                                                               "\t"])) + text[i:]
        elif op == "delete":
            text = text[:i] + text[i + draw(st.integers(1, 20)):]
        elif op == "truncate":
            text = text[:i]
        else:
            lines = text.splitlines(keepends=True)
            j = draw(st.integers(0, max(len(lines) - 1, 0)))
            text = "".join(lines[:j + 1] + lines[j:j + 1] + lines[j + 1:])
    return text


@st.composite
def mutated_texts(draw: st.DrawFn) -> str:
    """The text of a valid model broken by one or two mutations, or garbled."""
    doc = draw(models())
    for _ in range(draw(st.integers(1, 2))):
        doc = draw(mutate(doc))
    text = to_toml(doc)
    if draw(st.integers(0, 4)) == 0:
        text = draw(garble(text))
    return text


def model_texts() -> st.SearchStrategy[str]:
    """Model file texts: about one valid model for every two broken ones."""
    return st.one_of(models().map(to_toml), mutated_texts(), mutated_texts())
