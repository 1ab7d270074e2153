"""The manufactured-solution study of ``heat2d verify`` (Roache, *J. Fluids Eng.* 124:4,
2002; reference-facts.md problem 13).

The model format has no spatially varying source, so the study uses the stages
directly: heat2d builds the geometry, mesh and conduction matrix of the case's model
(``models/manufactured.toml``, an orthotropic pentagon in metres); the study loads the
source of the exact solution

    T = eˣ cos(1.5y) + x²y,   q̇ = −(kx ∂²T/∂x² + ky ∂²T/∂y²),

with kx and ky taken from the model's [params], holds every boundary node at the exact
T, and measures the L2 and energy-norm errors on each mesh. The observed orders are
the least-squares slopes of log error against log h; linear triangles should give 2
and 1 (Strang & Fix, *An Analysis of the Finite Element Method*, 1973).
"""

from __future__ import annotations

import math
from collections.abc import Mapping, Sequence
from dataclasses import replace
from typing import Any

import numpy as np

from ..model import Model

# Dunavant's 6-point rule, exact for degree-4 polynomials (Int. J. Numer. Meth. Eng.
# 21:1129, 1985): barycentric points; weights sum to 1.
QA, QB = 0.445948490915965, 0.091576213509771
QUAD_POINTS = np.array([[1 - 2 * QA, QA, QA], [QA, 1 - 2 * QA, QA],
                        [QA, QA, 1 - 2 * QA], [1 - 2 * QB, QB, QB],
                        [QB, 1 - 2 * QB, QB], [QB, QB, 1 - 2 * QB]])
QUAD_WEIGHTS = np.array([0.223381589678011] * 3 + [0.109951743655322] * 3)


def exact(x: np.ndarray, y: np.ndarray) -> np.ndarray:
    """The manufactured solution T = eˣ cos(1.5y) + x²y (K, x and y in m)."""
    return np.exp(x) * np.cos(1.5 * y) + x * x * y


def gradient(x: np.ndarray, y: np.ndarray) -> np.ndarray:
    """∇T of :func:`exact`, shape ``x.shape + (2,)``."""
    return np.stack([np.exp(x) * np.cos(1.5 * y) + 2 * x * y,
                     -1.5 * np.exp(x) * np.sin(1.5 * y) + x * x], axis=-1)


def source(x: np.ndarray, y: np.ndarray, kx: float, ky: float) -> np.ndarray:
    """q̇ = −(kx Txx + ky Tyy), Txx = eˣcos(1.5y) + 2y, Tyy = −2.25 eˣcos(1.5y) (W/m³)."""
    return -(kx * (np.exp(x) * np.cos(1.5 * y) + 2 * y)
             - 2.25 * ky * np.exp(x) * np.cos(1.5 * y))


def errors(model: Model, refine: float) -> tuple[float, float, float, int]:
    """Errors of the finite-element solution on the model's mesh refined by ``refine``.

    Parameters
    ----------
    model
        The study's domain (lengths in m, depth 1 m), with ``kx`` and ``ky`` in [params].
    refine
        Divides the model's mesh size.

    Returns
    -------
    tuple
        The L2 error (K·m), the energy-norm error √(∫∇e·k∇e dA) (√(W·K/m)), the mesh
        size h = √(mean triangle area) (m) and the node count.
    """
    from ..fem.assembly import assemble  # the solver stack loads on first use
    from ..fem.geometry import build_geometry
    from ..fem.mesh import build_mesh
    from ..fem.solver import solve

    params = dict(model.params)
    kx, ky = params["kx"], params["ky"]
    mesh = build_mesh(build_geometry(model, refine=refine))
    system = assemble(mesh)
    tri, points = mesh.triangles, mesh.points
    p = points[tri]                                                       # (m, 3, 2)
    d1, d2 = p[:, 1] - p[:, 0], p[:, 2] - p[:, 0]
    area = 0.5 * np.abs(d1[:, 0] * d2[:, 1] - d1[:, 1] * d2[:, 0])
    q = np.einsum("ki,tid->tkd", QUAD_POINTS, p)                          # (m, 6, 2)
    w = area[:, None] * QUAD_WEIGHTS
    x, y = q[..., 0], q[..., 1]
    # F_i = ∫ q̇ φ_i dA (depth 1 m)
    load = np.einsum("tk,ki->ti", w * source(x, y, kx, ky), QUAD_POINTS)
    F = np.bincount(tri.ravel(), load.ravel(), minlength=len(points))
    boundary = np.unique(mesh.edges)
    solution = solve(replace(system, F=F, fixed=boundary,
                             fixed_value=exact(*points[boundary].T)))
    T = solution.temperature
    th = np.einsum("ki,ti->tk", QUAD_POINTS, T[tri])
    l2 = math.sqrt(np.sum(w * (th - exact(x, y)) ** 2))
    grad = (system.gradient @ T).reshape(2, -1).T[:, None, :]
    e = grad - gradient(x, y)
    energy = math.sqrt(np.sum(w * (system.kx[:, None] * e[..., 0] ** 2
                                   + system.ky[:, None] * e[..., 1] ** 2)))
    return l2, energy, math.sqrt(area.mean()), len(points)


def slope(h: Sequence[float], e: Sequence[float]) -> float:
    """Least-squares slope of log ``e`` against log ``h``: the observed order."""
    return float(np.polyfit(np.log(h), np.log(e), 1)[0])


def study(model: Model, refine: Sequence[float]) -> Mapping[str, Any]:
    """The convergence study over the meshes refined by each factor of ``refine``.

    Parameters
    ----------
    model
        The study's domain (``models/manufactured.toml``).
    refine
        Mesh refinement factors, coarsest first.

    Returns
    -------
    dict
        ``l2_order`` and ``energy_order`` (the observed orders, what the table's checks
        read) and ``convergence``: the series ``h``, ``nodes``, ``l2`` and ``energy``
        behind them (plotted in verify.png).
    """
    rows = [errors(model, f) for f in refine]
    l2, energy, h, nodes = (list(col) for col in zip(*rows, strict=True))
    return {"l2_order": slope(h, l2), "energy_order": slope(h, energy),
            "convergence": {"h": h, "nodes": nodes, "l2": l2, "energy": energy}}


STUDIES = {"manufactured": study}
"""Studies the table can name (``study = "..."``), by name."""
