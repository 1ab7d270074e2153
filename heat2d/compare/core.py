"""Two runs side by side: every figure both report, its change B − A, the combined error
bars of the two runs and whether the change is larger than them.

Combined error bars. Each run's ``..._error`` bounds the discretisation error of its own
mesh. The two errors may have either sign and, on two different meshes, are not known to
cancel, so the change B − A is uncertain by at most e_A + e_B. That sum (not the
root-sum-square, which assumes independent random errors and can understate a bound) is
the ``error`` of each compared figure, and a change is ``significant`` when
|B − A| > e_A + e_B. A run made without an estimate (``--no-estimate``) has no error
bars: its figures are compared with ``error`` and ``significant`` null.
"""

from __future__ import annotations

import math
from pathlib import Path
from typing import Any

import numpy as np

from ..errors import ModelError
from ..model import Model
from ..version import __version__
from .sides import Side, load_side
from .text import caution, verdict
from .transient import check_modes, compare_transient

SAME_POINTS_RTOL = 1e-9
"""Two meshes are the same when their node coordinates agree to this fraction of the
model's size (round-off of the written VTU coordinates is far below it)."""


def compare(a: str | Path | Model, b: str | Path | Model, *, method: str = "auto",
            transient=None) -> dict:
    """Compare two runs: result folders, model files or models.

    Parameters
    ----------
    a, b
        Each a result folder of ``heat2d run`` (``summary.json`` and ``MODELSTEM.vtu``),
        a model file (``.toml``) or a :class:`~heat2d.Model`; models are solved here with
        the default error estimate.
    method
        Linear solver for models.
    transient
        The function that marches a transient model (``heat2d.transient.run.
        run_transient``), for models with a ``[transient]`` section (see
        :func:`~heat2d.compare.load_side`).

    Returns
    -------
    dict
        The comparison document written as ``compare.json`` (see :func:`compare_sides`).

    Raises
    ------
    ModelError
        A path is missing or not a result folder or model, the two runs use different
        units, or one run is transient and the other steady.
    """
    return compare_sides(load_side(a, label="A", method=method, transient=transient),
                         load_side(b, label="B", method=method, transient=transient))


def compare_sides(a: Side, b: Side) -> dict:
    """The comparison document of two loaded sides (the ``compare.json`` content).

    Keys: ``heat2d_version``; ``a`` and ``b`` (``folder``, ``model``, ``title``);
    ``same_geometry``; ``shapes`` and ``shape_means`` ({shape: entry}
    for the maximum and the mean temperature); ``probes`` ({probe: entry});
    ``boundaries`` ({boundary: ``a_w``, ``b_w``, ``delta_w``, ``error_w``,
    ``significant``}, heat leaving through it); ``resistances`` ({row shape: {source:
    entry}}, the mean rise per watt of the °C/W matrix, K/W, where both runs have it);
    ``hot_spot`` (``a`` and ``b``: the runs' hot spots, then ``delta``, ``error``,
    ``significant``, ``same_shape``); ``only_in_a``, ``only_in_b`` (items reported by
    one run only, as ``"shape NAME"``, ``"probe NAME"``, ...); ``verdict`` and
    ``caution`` (text). An entry is ``a``, ``b``, ``delta`` (b − a), ``error`` (the
    combined ±, see the module docstring; null without estimates) and ``significant``
    (|delta| > error; null without estimates). No value is NaN.

    Two transient runs give the document of
    :func:`~heat2d.compare.transient.compare_transient` (``"mode": "transient"``); a
    transient run against a steady one raises :class:`~heat2d.errors.ModelError`.
    """
    sa, sb = a.summary, b.summary
    kind = check_modes(a, b)
    for key, what in (("length", "length unit"), ("temperature", "temperature unit")):
        ua, ub = sa["units"].get(key), sb["units"].get(key)
        if ua != ub:
            raise ModelError(f"{what} {ub!r} differs from A's {ua!r}: compare runs made in "
                             "the same units", file=b.where)
    if kind == "transient":
        return compare_transient(a, b, same_geometry=same_mesh(a, b))
    only_a: list[str] = []
    only_b: list[str] = []

    def paired(kind: str, da: dict, db: dict) -> list[str]:
        only_a.extend(f"{kind} {n}" for n in da if n not in db)
        only_b.extend(f"{kind} {n}" for n in db if n not in da)
        return [n for n in da if n in db]

    shapes, means = {}, {}
    for name in paired("shape", sa["shapes"], sb["shapes"]):
        x, y = sa["shapes"][name], sb["shapes"][name]
        shapes[name] = _entry(x["max"], x.get("max_error"), a, y["max"], y.get("max_error"), b)
        means[name] = _entry(x["mean"], x.get("mean_error"), a, y["mean"], y.get("mean_error"),
                             b)
    pa, pb = sa.get("probes", {}), sb.get("probes", {})
    ea, eb = sa.get("probe_errors", {}), sb.get("probe_errors", {})
    probes = {n: _entry(pa[n], ea.get(n), a, pb[n], eb.get(n), b)
              for n in paired("probe", pa, pb)}
    boundaries = {}
    for name in paired("boundary", sa["boundaries"], sb["boundaries"]):
        x, y = sa["boundaries"][name], sb["boundaries"][name]
        e = _entry(x["heat_out_w"], x.get("heat_out_error_w"), a, y["heat_out_w"],
                   y.get("heat_out_error_w"), b)
        boundaries[name] = {"a_w": e["a"], "b_w": e["b"], "delta_w": e["delta"],
                            "error_w": e["error"], "significant": e["significant"]}
    doc = {
        "heat2d_version": __version__,
        "a": _about(a), "b": _about(b),
        "same_geometry": same_mesh(a, b),
        "shapes": shapes, "shape_means": means, "probes": probes, "boundaries": boundaries,
        "resistances": _resistances(a, b, only_a, only_b),
        "hot_spot": _hot_spot(a, b),
        "only_in_a": only_a, "only_in_b": only_b,
    }
    key = {n for n in shapes for s in (sa, sb) if s["shapes"][n].get("power_w")
           or n in s.get("limits", {})}
    doc["verdict"] = verdict(doc, key_shapes=key,
                             unestimated=[s.label for s in (a, b) if not s.estimated])
    doc["caution"] = caution(doc, a, b)
    return doc


def same_mesh(a: Side, b: Side) -> bool:
    """Whether the two runs have the same mesh (same nodes to round-off, same triangles):
    then their fields can be subtracted node by node."""
    if not (a.has_mesh and b.has_mesh) or a.points.shape != b.points.shape \
            or a.triangles.shape != b.triangles.shape:
        return False
    size = float(np.ptp(a.points, axis=0).max()) or 1.0
    return bool(np.array_equal(a.triangles, b.triangles)
                and np.abs(a.points - b.points).max() <= SAME_POINTS_RTOL * size)


def _number(value: Any) -> float | None:
    """A finite float, or None (JSON has no NaN)."""
    if value is None:
        return None
    value = float(value)
    return value if math.isfinite(value) else None


def _entry(va: float, ea: float | None, a: Side, vb: float, eb: float | None, b: Side) -> dict:
    """One compared figure: the two values, b − a, the combined ± (e_A + e_B) and whether
    the change is larger. Without an estimate on either side the ± is unknown."""
    va, vb = _number(va), _number(vb)
    delta = None if va is None or vb is None else vb - va
    ea = _number(ea) if a.estimated else None
    eb = _number(eb) if b.estimated else None
    error = None if ea is None or eb is None else ea + eb
    significant = None if error is None or delta is None else bool(abs(delta) > error)
    return {"a": va, "b": vb, "delta": delta, "error": error, "significant": significant}


def _about(side: Side) -> dict:
    return {"folder": side.folder, "model": side.model, "title": side.title}


def _resistances(a: Side, b: Side, only_a: list[str], only_b: list[str]) -> dict:
    """Mean rise per watt (K/W) of each row shape and source both matrices hold. The
    matrix carries no error estimate: its entries have ``error`` null."""
    ra = (a.summary.get("thermal_resistance") or {}).get("mean_rise_k_per_w", {})
    rb = (b.summary.get("thermal_resistance") or {}).get("mean_rise_k_per_w", {})
    out: dict[str, dict] = {}
    for row in sorted(set(ra) | set(rb), key=lambda n: (n not in ra, n)):
        ca, cb = ra.get(row, {}), rb.get(row, {})
        only_a.extend(f"resistance {row} <- {s}" for s in ca if s not in cb)
        only_b.extend(f"resistance {row} <- {s}" for s in cb if s not in ca)
        both = {s: _entry(ca[s], None, a, cb[s], None, b) for s in ca if s in cb}
        if both:
            out[row] = both
    return out


def _hot_spot(a: Side, b: Side) -> dict:
    ha, hb = a.summary["hot_spot"], b.summary["hot_spot"]
    e = _entry(ha["temperature"], ha.get("temperature_error"), a, hb["temperature"],
               hb.get("temperature_error"), b)

    def spot(h: dict, side: Side) -> dict:
        return {"x": _number(h["x"]), "y": _number(h["y"]), "shape": h["shape"],
                "temperature": _number(h["temperature"]),
                "temperature_error": _number(h.get("temperature_error"))
                if side.estimated else None}

    return {"a": spot(ha, a), "b": spot(hb, b), "delta": e["delta"], "error": e["error"],
            "significant": e["significant"], "same_shape": ha["shape"] == hb["shape"]}
