"""Heat crossing a named cut line (``[[cut]]``), from the weak form of the heat balance.

The heat is not sampled from the element fluxes (which jump from triangle to triangle
and do not balance); it is the conservative flux of the discrete system, found the way
the heat at fixed edges is found from the reactions.

Derivation. Let w be the finite-element function with w_i = 1 at the nodes of the
triangles on the *from* side of the cut (the triangles whose centroid lies left of the
polyline, walking from its first point to its last, or inside a closed one) and w_i = 0
at every other node. The discrete balance of node i is

    (K_c T)_i + (K_g T)_i + B_i(T) = G_i + Φ_i + R_i,

with K_c the conduction matrix (K_e = ∫ k ∇φ_i·∇φ_j dV, k per triangle at the solved
state), K_g the contact-resistance coupling of interfaces ([[M, −M], [−M, M]]/R″), B_i
the heat node i loses by convection and radiation, G_i = ∫ q̇ φ_i dV the generation,
Φ_i = ∫ q″ φ_i dS the imposed flux in, and R_i the heat a fixed temperature puts in
(zero at free nodes). Weighting by w_i and summing,

    Q = Σ_i w_i ((K_c + K_g) T)_i = Σ_i w_i (G_i + Φ_i + R_i − B_i):

the right side is the heat generated and let in on the from side minus what its own
boundaries (convection, radiation and flux edges, fixed edges through R) give off, all
weighted by w, so the boundary terms on the w = 1 side belong to that side's balance,
and Q is the heat that side sends across the band of triangles where w falls from 1 to
0. For the exact field, Σ w_i (K T)_i = ∫ k ∇T·∇w dV → ∫_cut q·n dS as the band narrows,
so Q converges to the heat through the line; its error estimate comes from the nested
refinement like every other figure (``cuts.NAME.heat_w`` in ``errors.figures``).

The left side is computed from the first form: only the triangles where w is not
constant contribute (constants are in the null space of every K_e and of the interface
block), Q = Σ_band w_eᵀ K_e T_e + Σ_interface edges (w_a − w_b)ᵀ M (T_a − T_b)/R″.
"""

from __future__ import annotations

from typing import Any

import numpy as np

from ..errors import ModelError


def cut_heat(solution) -> dict[str, float]:
    """Heat crossing each cut of the model from its from side to the other, W."""
    return {cut.name: _crossing(solution, cut_weights(solution.mesh, cut))
            for cut in solution.model.cuts}


def cut_figures(solution) -> dict[str, dict[str, Any]]:
    """The ``cuts`` entry of the summary: per cut its heat and what it is measured from."""
    system, mesh = solution.system, solution.mesh
    power = system.qdot * system.layout.volume
    out = {}
    for cut in solution.model.cuts:
        w = cut_weights(mesh, cut)
        marked = mesh.cache[_key(cut)][1]
        out[cut.name] = {
            "heat_w": _crossing(solution, w),
            "through": [list(p) for p in cut.points],
            "closed": cut.closed,
            "from": "inside the line" if cut.closed else
                    "the side left of the line, walking from its first point to its last",
            "generated_on_from_side_w": float(power[marked].sum()),
        }
    return out


def _key(cut) -> tuple:
    return ("cut", cut.points)


def cut_weights(mesh, cut) -> np.ndarray:
    """w at each node: 1 at the nodes of the triangles on the cut's from side, else 0
    (kept in the mesh's cache with the triangles marked)."""
    key = _key(cut)
    if key not in mesh.cache:
        import shapely

        side = _from_side(mesh, cut)
        centroid = mesh.points[mesh.triangles].mean(axis=1)
        marked = shapely.contains_xy(side, centroid[:, 0], centroid[:, 1])
        if marked.all() or not marked.any():
            raise _fail(mesh.model, cut, "does not separate the mesh: every triangle lies "
                        "on one side of it")
        w = np.zeros(len(mesh.points))
        w[mesh.triangles[marked].ravel()] = 1.0
        mesh.cache[key] = (w, marked)
    return mesh.cache[key][0]


def _crossing(solution, w: np.ndarray) -> float:
    """Q = Σ_band w_eᵀ K_e T_e + Σ_interface (w_a − w_b)ᵀ M (T_a − T_b)/R″ (module text)."""
    system, mesh, L = solution.system, solution.mesh, solution.system.layout
    T = solution.temperature
    tri = mesh.triangles
    we = w[tri]
    band = we.min(axis=1) != we.max(axis=1)
    kx, ky, _, _ = system.conductivity(T)
    ke = L.element_matrices(kx[band], ky[band], band)
    q = float(np.einsum("ei,eij,ej->", we[band], ke, T[tri[band]]))
    if len(mesh.interface_id):
        ia, ib = mesh.interface_a, mesh.interface_b
        dw = w[ia] - w[ib]
        across = np.abs(dw).max(axis=1) > 0
        if across.any():
            g = (1.0 / np.array([i.resistance for i in mesh.model.interfaces]))[
                mesh.interface_id[across]]
            dt = T[ia[across]] - T[ib[across]]
            q += float((g * np.einsum("ei,eij,ej->e", dw[across], L.iface_mass[across],
                                      dt)).sum())
    return q


def _fail(model, cut, reason: str) -> ModelError:
    return ModelError(reason, file=model.source, entry=f'cut "{cut.name}"', line=cut.line)


def _from_side(mesh, cut):
    """The part of the body on the cut's from side (shapely), after checking that every
    point lies in the body and that the line separates it."""
    import shapely
    from shapely.geometry import LineString, Point, Polygon
    from shapely.ops import split

    geometry, model = mesh.geometry, mesh.model
    body, tol = geometry.body, geometry.tolerance
    for j, (x, y) in enumerate(cut.points):
        if body.distance(Point(x, y)) > tol:
            raise _fail(model, cut, f"through[{j}] = [{x:g}, {y:g}] is outside the body")
    if cut.closed:
        ring = Polygon(cut.points)
        if not ring.is_valid:
            raise _fail(model, cut, "through: the closed line crosses itself")
        inside = body.intersection(ring)
        if inside.area <= tol * tol or body.difference(ring).area <= tol * tol:
            raise _fail(model, cut, "does not separate anything: the closed line holds "
                        "none of the body, or all of it")
        return inside
    pts = np.array(cut.points, float)
    # Extend both ends a little along the end segments, so that ends drawn on the outline
    # (to within rounding) reach just past it and split the body.
    reach = max(100 * tol, 1e-9 * float(np.ptp(np.array(body.bounds).reshape(2, 2), axis=0).max()))
    for end, nxt in ((0, 1), (-1, -2)):
        d = pts[end] - pts[nxt]
        pts[end] = pts[end] + reach * d / np.hypot(*d)
    line = LineString(pts)
    pieces = list(split(body, line).geoms)
    left = line.buffer(reach, single_sided=True)
    right = line.buffer(-reach, single_sided=True)
    least = reach * reach
    chosen = []
    for piece in pieces:
        on_left = piece.intersection(left).area > least
        on_right = piece.intersection(right).area > least
        if on_left and on_right:
            raise _fail(model, cut, "does not separate the body: the line must run from "
                        "outline to outline (or be closed), with the body on both sides")
        if on_left:
            chosen.append(piece)
    if not chosen or len(chosen) == len(pieces):
        raise _fail(model, cut, "does not separate anything: the body lies on one side "
                    "of the line only")
    return shapely.union_all(chosen)
