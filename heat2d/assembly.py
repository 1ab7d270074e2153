"""Stage 4: :class:`~heat2d.mesh.Mesh` -> :class:`System`, the discrete heat balance K T = F.

Linear triangles, assembled for the model's depth so that K is in W/K and F
in W. Everything is vectorized over triangles and edges.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import scipy.sparse as sp
from scipy.sparse.csgraph import connected_components

from .errors import NoHeatPathError
from .mesh import Mesh


@dataclass(frozen=True, repr=False)
class System:
    """The assembled heat balance, with what the results stage needs to interpret it.

    Attributes
    ----------
    K : (n, n) CSR, W/K
        Conduction plus the convection edge terms, before fixed temperatures.
    F : (n,) W
        Sources, heat-flux edges and h·T_ambient terms.
    fixed, fixed_value
        Nodes held at a fixed temperature (°C) and their values.
    gradient : (2m, n) CSR, K/m per °C
        Maps nodal temperatures to the constant gradient of each triangle
        (rows 0..m-1: d/dx, rows m..2m-1: d/dy).
    kx, ky, qdot : (m,)
        Conductivity W/(m·K) and generation W/m³ of each triangle.
    """

    mesh: Mesh
    K: sp.csr_matrix
    F: np.ndarray
    fixed: np.ndarray
    fixed_value: np.ndarray
    gradient: sp.csr_matrix
    kx: np.ndarray
    ky: np.ndarray
    qdot: np.ndarray
    warnings: tuple[str, ...]

    @property
    def model(self):
        return self.mesh.model

    def __repr__(self) -> str:
        return (f"System({self.K.shape[0]} unknowns, {self.K.nnz} non-zeros, "
                f"{len(self.fixed)} fixed nodes, power {self.qdot_power():.6g} W)")

    def qdot_power(self) -> float:
        """Total generated power, W."""
        a = self.mesh.areas * self.model.unit_m ** 2
        return float((self.qdot * a).sum() * self.model.depth_m)


def assemble(mesh: Mesh) -> System:
    """Assemble conduction, sources and boundary terms.

    Raises
    ------
    NoHeatPathError
        A connected body has neither a fixed-temperature nor a convection boundary.
    """
    model = mesh.model
    s, depth = model.unit_m, model.depth_m
    n = len(mesh.points)
    tri = mesh.triangles
    x, y = mesh.points[tri, 0], mesh.points[tri, 1]          # (m, 3), model units
    b = np.column_stack([y[:, 1] - y[:, 2], y[:, 2] - y[:, 0], y[:, 0] - y[:, 1]])
    c = np.column_stack([x[:, 2] - x[:, 1], x[:, 0] - x[:, 2], x[:, 1] - x[:, 0]])
    area = 0.5 * (b[:, 0] * c[:, 1] - b[:, 1] * c[:, 0])     # model units²

    kx = np.array([mt.kx for mt in model.materials])[mesh.triangle_material]
    ky = np.array([mt.ky for mt in model.materials])[mesh.triangle_material]

    # K_e = depth/(4A) (kx b bᵀ + ky c cᵀ)   [∫ k∇φ_i·∇φ_j dA; scale-free in 2-D]
    ke = (kx[:, None, None] * b[:, :, None] * b[:, None, :]
          + ky[:, None, None] * c[:, :, None] * c[:, None, :]) * (depth / (4 * area))[:, None, None]
    rows = np.repeat(tri, 3, axis=1).ravel()
    cols = np.tile(tri, (1, 3)).ravel()
    data = [ke.ravel()]
    row_parts, col_parts = [rows], [cols]

    # Sources: F_i += q̇ A/3 · depth   [∫ q̇ φ_i dA]
    area_m2 = area * s * s
    qdot = _generation(mesh, area_m2)
    F = np.bincount(tri.ravel(), np.repeat(qdot * area_m2 * depth / 3.0, 3), minlength=n)

    # Boundary edges.
    edges, owner = mesh.edges, mesh.edge_boundary
    length = mesh.edge_lengths * s * depth                   # m² of surface per edge
    kind = np.array([bc.kind for bc in model.boundaries] + ["none"])[owner]
    value = {key: np.array([getattr(bc, key) or 0.0 for bc in model.boundaries] + [0.0])[owner]
             for key in ("heat_flux", "h", "ambient", "temperature")}
    # heat flux: F_i += q″ L/2
    flux = kind == "heat_flux"
    F += np.bincount(edges[flux].ravel(), np.repeat(value["heat_flux"][flux] * length[flux] / 2, 2),
                     minlength=n)
    # convection: K += h L/6 [[2, 1], [1, 2]],  F_i += h T∞ L/2   [∮ h (T − T∞) φ_i ds]
    conv = kind == "convection"
    e, hl = edges[conv], value["h"][conv] * length[conv]
    row_parts += [e[:, 0], e[:, 1], e[:, 0], e[:, 1]]
    col_parts += [e[:, 0], e[:, 1], e[:, 1], e[:, 0]]
    data += [hl / 3, hl / 3, hl / 6, hl / 6]
    F += np.bincount(e.ravel(), np.repeat(hl * value["ambient"][conv] / 2, 2), minlength=n)
    K = sp.csr_matrix((np.concatenate(data), (np.concatenate(row_parts),
                                              np.concatenate(col_parts))), shape=(n, n))

    # Fixed temperatures: the first entry in file order wins at a shared node.
    fixed_edges = kind == "temperature"
    e, t, who = edges[fixed_edges], value["temperature"][fixed_edges], owner[fixed_edges]
    order = np.argsort(-who, kind="stable")                  # later entries first, then overwritten
    node_value = np.full(n, np.nan)
    node_value[e[order].ravel()] = np.repeat(t[order], 2)
    fixed = np.flatnonzero(~np.isnan(node_value))
    warnings = _conflicts(mesh, e, t, node_value)

    # Gradient operator: ∇T = (Σ b_i T_i, Σ c_i T_i) / (2A), per metre.
    m = len(tri)
    g_rows = np.concatenate([np.repeat(np.arange(m), 3), np.repeat(np.arange(m, 2 * m), 3)])
    g_vals = np.concatenate([(b / (2 * area * s)[:, None]).ravel(),
                             (c / (2 * area * s)[:, None]).ravel()])
    gradient = sp.csr_matrix((g_vals, (g_rows, np.concatenate([tri.ravel(), tri.ravel()]))),
                             shape=(2 * m, n))

    _check_heat_paths(mesh, K, fixed, conv)
    return System(mesh=mesh, K=K, F=F, fixed=fixed, fixed_value=node_value[fixed],
                  gradient=gradient, kx=kx, ky=ky, qdot=qdot, warnings=tuple(warnings))


def _generation(mesh: Mesh, area_m2: np.ndarray) -> np.ndarray:
    """Generation W/m³ per triangle: ``power`` spread over the shape's meshed (visible) area."""
    model = mesh.model
    shape_area = np.bincount(mesh.triangle_shape, area_m2, minlength=len(model.shapes))
    per_shape = np.zeros(len(model.shapes))
    for i, shape in enumerate(model.shapes):
        if shape.power_density is not None:
            per_shape[i] = shape.power_density
        elif shape.power is not None and shape_area[i] > 0:
            per_shape[i] = shape.power / (shape_area[i] * model.depth_m)
    return per_shape[mesh.triangle_shape]


def _conflicts(mesh: Mesh, edges: np.ndarray, values: np.ndarray,
               node_value: np.ndarray) -> list[str]:
    """Warn where two fixed-temperature entries with different values meet at a node."""
    if len(edges) == 0:
        return []
    differs = np.abs(node_value[edges] - values[:, None]) > 0
    if not differs.any():
        return []
    node = edges[differs][0]
    x, y = mesh.points[node]
    return [f"fixed temperatures of different value meet at ({x:.6g}, {y:.6g}) and "
            f"{int(differs.any(axis=1).sum())} other place(s); the entry first in the file "
            "sets the shared node"]


def _check_heat_paths(mesh: Mesh, K: sp.csr_matrix, fixed: np.ndarray,
                      conv: np.ndarray) -> None:
    """Each connected body needs a way to lose heat, or no steady state exists."""
    count, label = connected_components(K, directed=False)
    anchored = np.zeros(count, dtype=bool)
    anchored[label[fixed]] = True
    anchored[label[mesh.edges[conv].ravel()]] = True
    if anchored.all():
        return
    body = int(np.flatnonzero(~anchored)[0])
    in_body = label[mesh.triangles[:, 0]] == body
    names = [mesh.model.shapes[i].name for i in np.unique(mesh.triangle_shape[in_body])]
    where = "the body" if count == 1 else f"body {body + 1} of {count}"
    raise NoHeatPathError(
        f"{where} (shapes: {', '.join(names)}) has no fixed-temperature or convection "
        "boundary, so it has no steady temperature; give it a heat path",
        file=mesh.model.source, entry="[[boundary]]")
