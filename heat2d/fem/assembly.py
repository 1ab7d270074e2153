"""Stage 4: :class:`~heat2d.mesh.Mesh` -> :class:`System`, the discrete heat balance K T = F.

Linear triangles, assembled for the model's depth (or the full revolution of an
axisymmetric model) so that K is in W/K and F in W. Everything is vectorized over
triangles and edges; the sparsity pattern is built once and every later matrix
(a nonlinear iteration, a variant with other values) only refills its values.
"""

from __future__ import annotations

from dataclasses import dataclass
from functools import cached_property

import numpy as np
import scipy.sparse as sp
from scipy.sparse.csgraph import connected_components

from ..errors import NoHeatPathError
from .mesh import Mesh

SIGMA = 5.670374419e-8
"""Stefan–Boltzmann constant, W/(m²·K⁴) (CODATA 2018, exact in SI since 2019)."""
KELVIN = 273.15


class Pattern:
    """A CSR sparsity pattern (the diagonal, both directions of every mesh edge, and any
    extra couplings such as interfaces) and, for each element entry, its data slot."""

    def __init__(self, n: int, triangles: np.ndarray, extra_rows: np.ndarray,
                 extra_cols: np.ndarray) -> None:
        self.n = n
        local = np.array([[0, 1], [1, 2], [2, 0]])
        pairs = triangles[:, local]                                  # (m, 3, 2)
        lo, hi = pairs.min(axis=2), pairs.max(axis=2)
        edge_keys, edge_of = np.unique((lo.astype(np.int64) * n + hi).ravel(),
                                       return_inverse=True)
        edge_of = edge_of.reshape(-1, 3)
        elo, ehi = edge_keys // n, edge_keys % n
        nodes = np.arange(n, dtype=np.int64)
        rows = np.concatenate([elo, ehi, nodes, extra_rows.astype(np.int64)])
        cols = np.concatenate([ehi, elo, nodes, extra_cols.astype(np.int64)])
        self.keys, where = np.unique(rows * n + cols, return_inverse=True)
        where = where.ravel()
        ne = len(edge_keys)
        down, up, diag = where[:ne], where[ne:2 * ne], where[2 * ne:2 * ne + n]
        del rows, cols, where
        self.indices = (self.keys % n).astype(np.int32)
        self.indptr = np.searchsorted(self.keys // n, np.arange(n + 1)).astype(np.int32)
        # Element entry (i, j) of each triangle, row-major: the diagonal slot of node i,
        # or the slot of edge {i, j} in the direction row i → column j.
        slot_type = np.int32 if len(self.keys) < 2**31 else np.int64
        slots = np.empty((len(triangles), 3, 3), dtype=slot_type)
        for i in range(3):
            slots[:, i, i] = diag[triangles[:, i]]
        for k, (i, j) in enumerate(local):
            forward = triangles[:, i] < triangles[:, j]
            e = edge_of[:, k]
            slots[:, i, j] = np.where(forward, down[e], up[e])
            slots[:, j, i] = np.where(forward, up[e], down[e])
        self.slot = slots.ravel()

    def slots(self, rows: np.ndarray, cols: np.ndarray) -> np.ndarray:
        """Slots of entries that are already in the pattern."""
        return np.searchsorted(self.keys, rows.astype(np.int64) * self.n + cols)

    def data(self, slots: np.ndarray, values: np.ndarray) -> np.ndarray:
        """The CSR data array holding ``values`` summed into their slots."""
        return np.bincount(slots, values, minlength=len(self.indices))

    def matrix(self, data: np.ndarray) -> sp.csr_matrix:
        """A matrix of this pattern; every matrix of one pattern shares index arrays."""
        return sp.csr_matrix((data, self.indices, self.indptr), shape=(self.n, self.n))


@dataclass(frozen=True, repr=False, eq=False)
class Layout:
    """What depends on the mesh alone: element geometry, integration weights, pattern.

    Weights include the depth (planar) or 2πr (axisymmetric), in SI units. Element
    matrices are computed where used, not stored: ∫ ∂φi/∂x ∂φj/∂x dV = V b_i b_j with
    V = ∫ dV and b = ``grad_b`` constant per triangle (:meth:`element_matrices`).
    """

    source: np.ndarray         # (m, 3): ∫ φi dV, m³ (planar: a read-only view of V/3)
    volume: np.ndarray         # (m,): ∫ dV, m³
    edge_load: np.ndarray      # (e, 2): ∫ φi dS over each exposed edge, m²
    edge_mass: np.ndarray      # (e, 2, 2): ∫ φi φj dS, m²
    iface_mass: np.ndarray     # (k, 2, 2): the same over interface edges
    grad_b: np.ndarray         # (m, 3): ∂φi/∂x, 1/m
    grad_c: np.ndarray         # (m, 3): ∂φi/∂y, 1/m
    triangles: np.ndarray
    edges: np.ndarray
    interface_a: np.ndarray
    interface_b: np.ndarray
    n: int

    kx_unit = property(lambda self: self.element_matrices(1.0, 0.0),
                       doc="(m, 3, 3) ∫ ∂φi/∂x ∂φj/∂x dV per unit k, computed on each use")
    ky_unit = property(lambda self: self.element_matrices(0.0, 1.0),
                       doc="(m, 3, 3) ∫ ∂φi/∂y ∂φj/∂y dV per unit k, computed on each use")

    def element_matrices(self, kx: np.ndarray, ky: np.ndarray, select=None) -> np.ndarray:
        """(m, 3, 3) K_e = ∫ (kx ∂φi/∂x ∂φj/∂x + ky ∂φi/∂y ∂φj/∂y) dV with kx, ky per
        triangle (of ``select`` when given)."""
        b, c, v = self.grad_b, self.grad_c, self.volume
        if select is not None:
            b, c, v = b[select], c[select], v[select]
        ke = (kx * v)[:, None, None] * b[:, :, None] * b[:, None, :]
        cv = c * (ky * v)[:, None]
        for i in range(3):
            ke[:, i, :] += cv[:, i, None] * c
        return ke

    def conduction(self, kx: np.ndarray, ky: np.ndarray, values: np.ndarray,
                   rows: np.ndarray, cols: np.ndarray) -> sp.csr_matrix:
        """Σ_e K_e as CSR plus ``values`` at (``rows``, ``cols``): one COO of each
        triangle's three edges both ways (K_e is symmetric) and one diagonal entry per
        node, 6m + n entries rather than 9m, summed by scipy's COO → CSR."""
        tri, n, m = self.triangles, self.n, len(self.triangles)
        b, c = self.grad_b, self.grad_c
        kxv, kyv = kx * self.volume, ky * self.volume
        size = 6 * m + n + len(values)
        index = tri.dtype if size < 2**31 else np.int64
        data, r, q = np.empty(size), np.empty(size, index), np.empty(size, index)
        off, r_off, q_off = (a[:6 * m].reshape(2, 3, m) for a in (data, r, q))
        for k, (i, j) in enumerate(((0, 1), (1, 2), (2, 0))):
            np.multiply(b[:, i] * b[:, j], kxv, out=off[0, k])
            off[0, k] += c[:, i] * c[:, j] * kyv
            r_off[0, k], q_off[0, k] = tri[:, i], tri[:, j]
        off[1], r_off[1], q_off[1] = off[0], q_off[0], r_off[0]
        data[6 * m:6 * m + n] = np.bincount(tri.ravel(), (kxv[:, None] * b * b
                                                          + kyv[:, None] * c * c).ravel(),
                                            minlength=n)
        r[6 * m:6 * m + n] = q[6 * m:6 * m + n] = np.arange(n)
        data[6 * m + n:], r[6 * m + n:], q[6 * m + n:] = values, rows, cols
        K = sp.coo_matrix((data, (r, q)), shape=(n, n))
        del data, r, q, off, r_off, q_off
        return K.tocsr()

    @cached_property
    def pattern(self) -> Pattern:
        """The sparsity pattern, built on first use (nonlinear solves, variants)."""
        ia, ib = self.interface_a, self.interface_b
        return Pattern(self.n, self.triangles,
                       np.concatenate([_block_rows(ia, ib), _block_rows(ib, ia)]),
                       np.concatenate([_block_cols(ia, ib), _block_cols(ib, ia)]))

    @property
    def tri_slots(self) -> np.ndarray:
        return self.pattern.slot

    @cached_property
    def edge_slots(self) -> np.ndarray:
        e = self.edges
        return self.pattern.slots(_block_rows(e, e), _block_cols(e, e))

    @cached_property
    def iface_slots(self) -> np.ndarray:
        return self.pattern.slots(*_iface_blocks(self.interface_a, self.interface_b))


def build_layout(mesh: Mesh) -> Layout:
    """Element gradients, integration weights and (on first use) the sparsity pattern."""
    model, tri = mesh.model, mesh.triangles
    x, y = mesh.points[tri, 0] * model.unit_m, mesh.points[tri, 1] * model.unit_m  # (m, 3) m
    roll, back = [1, 2, 0], [2, 0, 1]
    b = y[:, roll] - y[:, back]                    # b_i = y_j − y_k, c_i = x_k − x_j
    c = x[:, back] - x[:, roll]
    area = 0.5 * (b[:, 0] * c[:, 1] - b[:, 1] * c[:, 0])
    if model.axisymmetric:
        # ∫ f 2πr dA: exact for the constant gradient product with r̄ at the centroid;
        # ∫ φi 2πr dA = 2π A (3 r̄ + r_i)/12.
        rbar = x.mean(axis=1)
        source = 2 * np.pi * area[:, None] * (3 * rbar[:, None] + x) / 12
        volume = source.sum(axis=1)
    else:
        volume = area * model.depth_m
        source = np.broadcast_to((volume / 3)[:, None], (len(tri), 3))
    del x, y
    b /= (2 * area)[:, None]
    c /= (2 * area)[:, None]
    edge_load, edge_mass = _edge_terms(mesh, mesh.edges)
    _, iface_mass = _edge_terms(mesh, mesh.interface_a)
    return Layout(source=source, volume=volume, edge_load=edge_load, edge_mass=edge_mass,
                  iface_mass=iface_mass, grad_b=b, grad_c=c, triangles=tri, edges=mesh.edges,
                  interface_a=mesh.interface_a, interface_b=mesh.interface_b,
                  n=len(mesh.points))


def _iface_blocks(ia: np.ndarray, ib: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Rows and columns of the four 2×2 blocks aa, ab, ba, bb of each interface edge."""
    blocks = [(ia, ia), (ia, ib), (ib, ia), (ib, ib)]
    return (np.concatenate([_block_rows(p, q) for p, q in blocks]),
            np.concatenate([_block_cols(p, q) for p, q in blocks]))


def _block_rows(a: np.ndarray, b: np.ndarray) -> np.ndarray:
    """Row indices of the 2×2 blocks (a_i, b_j), flattened i-major."""
    return np.repeat(a, 2, axis=1).ravel()


def _block_cols(a: np.ndarray, b: np.ndarray) -> np.ndarray:
    return np.tile(b, (1, 2)).ravel()


def _edge_terms(mesh: Mesh, edges: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """∫ φi dS and ∫ φi φj dS over straight edges, with the depth or 2πr weight."""
    model = mesh.model
    p = mesh.points[edges] * model.unit_m                                # (e, 2, 2)
    length = np.hypot(*(p[:, 1] - p[:, 0]).T)
    if model.axisymmetric:
        r = p[:, :, 0]
        r1, r2 = r[:, 0], r[:, 1]
        load = 2 * np.pi * length[:, None] * np.column_stack([2 * r1 + r2, r1 + 2 * r2]) / 6
        mass = 2 * np.pi * length[:, None, None] / 12 * np.stack(
            [np.column_stack([3 * r1 + r2, r1 + r2]), np.column_stack([r1 + r2, r1 + 3 * r2])],
            axis=1)
    else:
        load = (length * model.depth_m / 2)[:, None].repeat(2, axis=1)
        mass = (length * model.depth_m / 6)[:, None, None] * np.array([[2.0, 1.0], [1.0, 2.0]])
    return load, mass


@dataclass(frozen=True, repr=False, eq=False)
class System:
    """The assembled heat balance, with what the results stage needs to interpret it.

    Attributes
    ----------
    K : (n, n) CSR, W/K
        Conduction, convection and interface terms at 25 °C conductivities, before fixed
        temperatures; radiation linearised at the surroundings temperature.
    F : (n,) W
        Sources, heat-flux edges, h·T_ambient and linearised radiation terms.
    fixed, fixed_value
        Nodes held at a fixed temperature (°C) and their values.
    gradient : (2m, n) CSR, K/m per °C
        Maps nodal temperatures to the constant gradient of each triangle.
    kx, ky, qdot : (m,)
        Conductivity W/(m·K) (at 25 °C where it varies) and generation W/m³ per triangle.
    edge : dict of (e,) arrays
        Per exposed edge: ``h``, ``ambient``, ``flux``, ``emissivity``, ``surroundings``.
    """

    mesh: Mesh
    layout: Layout
    K: sp.csr_matrix
    F: np.ndarray
    fixed: np.ndarray
    fixed_value: np.ndarray
    kx: np.ndarray
    ky: np.ndarray
    qdot: np.ndarray
    edge: dict
    warnings: tuple[str, ...]
    other_values: np.ndarray

    @cached_property
    def other_data(self) -> np.ndarray:
        """Convection, linearised radiation and interface terms as pattern data."""
        L = self.layout
        slots = [L.edge_slots] + ([L.iface_slots] if len(self.mesh.interface_id) else [])
        return L.pattern.data(np.concatenate(slots), self.other_values)

    @cached_property
    def gradient(self) -> sp.csr_matrix:
        """(2m, n) CSR: nodal temperatures to triangle gradients (x rows, then y)."""
        L, m = self.layout, len(self.layout.triangles)
        return sp.csr_matrix((np.concatenate([L.grad_b.ravel(), L.grad_c.ravel()]),
                              np.tile(L.triangles.ravel(), 2), np.arange(0, 6 * m + 1, 3)),
                             shape=(2 * m, L.n))

    def gradients(self, T: np.ndarray) -> np.ndarray:
        """Gradient of T in each triangle, (m, 2) K/m."""
        L = self.layout
        te = T[L.triangles]
        return np.column_stack([(L.grad_b * te).sum(axis=1), (L.grad_c * te).sum(axis=1)])

    @property
    def model(self):
        return self.mesh.model

    @property
    def nonlinear(self) -> bool:
        return self.model.nonlinear

    def __repr__(self) -> str:
        return (f"System({self.K.shape[0]} unknowns, {self.K.nnz} non-zeros, "
                f"{len(self.fixed)} fixed nodes, power {self.qdot_power():.6g} W)")

    def qdot_power(self) -> float:
        """Total generated power, W."""
        return float((self.qdot * self.layout.volume).sum())

    def conductivity(self, T: np.ndarray | None) -> tuple[np.ndarray, ...]:
        """kx, ky and dkx/dT, dky/dT per triangle at nodal temperatures T (element means)."""
        m = len(self.mesh.triangles)
        if T is None or not any(mt.varies for mt in self.model.materials):
            return self.kx, self.ky, np.zeros(m), np.zeros(m)
        t_mean = T[self.mesh.triangles].mean(axis=1)
        out = [self.kx.copy(), self.ky.copy(), np.zeros(m), np.zeros(m)]
        for i, mt in enumerate(self.model.materials):
            if mt.varies:
                sel = self.mesh.triangle_material == i
                for arr, val in zip(out, mt.k_at(t_mean[sel]), strict=True):
                    arr[sel] = val
        return tuple(out)

    def residual(self, T: np.ndarray) -> np.ndarray:
        """R(T) = K(T) T − F(T): zero at free nodes of a solution, the heat the fixed
        temperatures put in at fixed nodes."""
        if not self.nonlinear:
            return self.K @ T - self.F
        return self.residual_and_jacobian(T)[0]

    def node_h(self, T: np.ndarray) -> np.ndarray:
        """Per exposed edge end (e, 2): the heat transfer coefficient of the tangent
        problem, h + 4εσT³ (kelvin), W/(m²·K)."""
        tk = T[self.mesh.edges] + KELVIN
        return self.edge["h"][:, None] + 4 * self.edge["emissivity"][:, None] * SIGMA * tk**3

    def edge_heat_out(self, T: np.ndarray) -> np.ndarray:
        """Heat leaving through each exposed edge by convection, radiation and imposed flux, W.

        Convection ∫ h (T − T∞) dS; radiation εσ Σ_ij M_ij (T_j⁴ − T_sur⁴) (the same
        interpolation as the residual); flux −∫ q″ dS.
        """
        L, e = self.layout, self.mesh.edges
        mass_sum = L.edge_mass.sum(axis=1)                               # (e, 2): Σ_i M_ij
        out = (self.edge["h"][:, None] * mass_sum * (T[e] - self.edge["ambient"][:, None])
               ).sum(axis=1)
        out -= self.edge["flux"] * L.edge_load.sum(axis=1)
        rad = self.edge["emissivity"] > 0
        if rad.any():
            tk = T[e[rad]] + KELVIN
            ts = (self.edge["surroundings"][rad] + KELVIN)[:, None]
            out[rad] += (self.edge["emissivity"][rad] * SIGMA
                         * (mass_sum[rad] * (tk**4 - ts**4)).sum(axis=1))
        return out

    def residual_and_jacobian(self, T: np.ndarray) -> tuple[np.ndarray, sp.csr_matrix]:
        """R(T) = K(T) T − F(T) and its Jacobian, for the Newton iteration.

        k(T): ∂(K_e T_e)_i/∂T_j = K_e,ij + (k'x (Kx_e T_e)_i + k'y (Ky_e T_e)_i)/3.
        Radiation, T⁴ interpolated between nodes: R_i += εσ Σ_j M_ij (T_j⁴ − T_sur⁴), kelvin.
        """
        L = self.layout
        kx, ky, dkx, dky = self.conductivity(T)
        ke = L.element_matrices(kx, ky)
        P = L.pattern
        K = P.matrix(self.other_data + P.data(L.tri_slots, ke.ravel()))
        if np.any(dkx) or np.any(dky):
            # (Kx_e T_e)_i = V b_i (b·T_e): the unit matrices times T_e without forming them.
            gx, gy = self.gradients(T).T
            v = L.volume / 3
            ke += (L.grad_b * (dkx * gx * v)[:, None]
                   + L.grad_c * (dky * gy * v)[:, None])[:, :, None]
            J = P.matrix(self.other_data + P.data(L.tri_slots, ke.ravel()))
        else:
            J = P.matrix(K.data.copy())
        del ke
        R = K @ T - self.F
        rad = self.edge["emissivity"] > 0
        if rad.any():
            e = self.mesh.edges[rad]
            M = L.edge_mass[rad] * (self.edge["emissivity"][rad] * SIGMA)[:, None, None]
            tk = T[e] + KELVIN
            ts = (self.edge["surroundings"][rad] + KELVIN)[:, None]
            # Remove the linearised radiation held in K and F, add the exact term.
            h0 = 4 * ts**3
            lin = np.einsum("eij,ej->ei", M * h0[:, :, None], T[e] + KELVIN - ts)
            exact = np.einsum("eij,ej->ei", M, tk**4 - ts**4)
            np.add.at(R, e.ravel(), (exact - lin).ravel())
            jac = M * (4 * tk**3)[:, None, :] - M * h0[:, :, None]
            J.data += P.data(L.edge_slots[np.repeat(rad, 4)], jac.ravel())
        return R, J


def assemble(mesh: Mesh, *, layout: Layout | None = None) -> System:
    """Assemble conduction, sources, boundary and interface terms of ``mesh`` (from
    :func:`~heat2d.mesh.build_mesh`), with a ``layout`` built earlier for this mesh
    (reused across variants) or a new one.

    Raises :class:`NoHeatPathError` where a connected body has neither a fixed-temperature
    nor a convection boundary.
    """
    model = mesh.model
    L = layout or build_layout(mesh)
    n, tri = len(mesh.points), mesh.triangles
    kx = np.array([mt.kx for mt in model.materials])[mesh.triangle_material]
    ky = np.array([mt.ky for mt in model.materials])[mesh.triangle_material]

    rows, cols = [_block_rows(mesh.edges, mesh.edges)], [_block_cols(mesh.edges, mesh.edges)]
    # F_i += ∫ q̇ φi dV
    qdot = _generation(mesh, L.volume)
    F = np.bincount(tri.ravel(), (qdot[:, None] * L.source).ravel(), minlength=n)

    edge = edge_values(mesh)
    # heat flux: F_i += ∫ q″ φi dS
    F += np.bincount(mesh.edges.ravel(), (edge["flux"][:, None] * L.edge_load).ravel(),
                     minlength=n)
    # convection + radiation linearised at T_sur: K += ∫ h φi φj dS, F += ∫ h T∞ φi dS,
    # with h_r = 4εσT_sur³ and the surroundings carried in F (Newton corrects it later).
    h_rad = 4 * edge["emissivity"] * SIGMA * (edge["surroundings"] + KELVIN) ** 3
    h_total = edge["h"] + h_rad
    values = [(h_total[:, None, None] * L.edge_mass).ravel()]
    t_far = (edge["h"] * edge["ambient"] + h_rad * edge["surroundings"])
    F += np.bincount(mesh.edges.ravel(), (t_far[:, None] * L.edge_load).ravel(), minlength=n)
    # interface: ∫ (T_a − T_b)(φ_a − φ_b)/R″ dS  →  [[M, −M], [−M, M]]/R″
    if len(mesh.interface_id):
        g = (1.0 / np.array([i.resistance for i in model.interfaces]))[mesh.interface_id]
        m = g[:, None, None] * L.iface_mass
        values.append(np.concatenate([m.ravel(), -m.ravel(), -m.ravel(), m.ravel()]))
        r, c = _iface_blocks(mesh.interface_a, mesh.interface_b)
        rows, cols = rows + [r], cols + [c]
    other = np.concatenate(values)
    # K_e = ∫ (kx ∂φi/∂x ∂φj/∂x + ky ∂φi/∂y ∂φj/∂y) dV
    if "pattern" in L.__dict__:
        # A layout that has its pattern already (a variant, a nonlinear model): refill.
        P = L.pattern
        slots = [L.edge_slots, L.iface_slots] if len(mesh.interface_id) else [L.edge_slots]
        K = P.matrix(P.data(L.tri_slots, L.element_matrices(kx, ky).ravel())
                     + P.data(np.concatenate(slots), other))
    else:
        # COO → CSR sums the contributions (scipy's compiled loop); the pattern with its
        # slots is built only when a later matrix of this mesh needs it.
        K = L.conduction(kx, ky, other, np.concatenate(rows), np.concatenate(cols))

    fixed, fixed_value, warnings = _fixed(mesh, edge)
    _check_heat_paths(mesh, K, fixed, h_total > 0)
    return System(mesh=mesh, layout=L, K=K, F=F, fixed=fixed, fixed_value=fixed_value,
                  kx=kx, ky=ky, qdot=qdot, edge=edge, warnings=tuple(warnings),
                  other_values=other)


BOUNDARY_VALUES = ("temperature", "heat_flux", "h", "ambient", "emissivity", "surroundings")


def edge_values(mesh: Mesh) -> dict[str, np.ndarray]:
    """Boundary values per exposed edge (0 where they do not apply; NaN temperature)."""
    out = {}
    for key in BOUNDARY_VALUES:
        fill = np.nan if key == "temperature" else 0.0
        table = [fill if getattr(bc, key) is None else getattr(bc, key)
                 for bc in mesh.model.boundaries]
        out[key] = np.array(table + [fill], dtype=float)[mesh.edge_boundary]
    out["flux"] = out.pop("heat_flux")
    return out


def _generation(mesh: Mesh, volume: np.ndarray) -> np.ndarray:
    """Generation W/m³ per triangle: ``power`` spread over the shape's meshed (visible) volume."""
    model = mesh.model
    shape_volume = np.bincount(mesh.triangle_shape, volume, minlength=len(model.shapes))
    per_shape = np.zeros(len(model.shapes))
    for i, shape in enumerate(model.shapes):
        if shape.power_density is not None:
            per_shape[i] = shape.power_density
        elif shape.power is not None and shape_volume[i] > 0:
            per_shape[i] = shape.power / shape_volume[i]
    return per_shape[mesh.triangle_shape]


def _fixed(mesh: Mesh, edge: dict) -> tuple[np.ndarray, np.ndarray, list[str]]:
    """Fixed-temperature nodes; the entry first in the file wins at a shared node."""
    n = len(mesh.points)
    sel = ~np.isnan(edge["temperature"])
    e, t, who = mesh.edges[sel], edge["temperature"][sel], mesh.edge_boundary[sel]
    order = np.argsort(-who, kind="stable")                  # later entries first, overwritten
    node_value = np.full(n, np.nan)
    node_value[e[order].ravel()] = np.repeat(t[order], 2)
    fixed = np.flatnonzero(~np.isnan(node_value))
    warnings = []
    differs = np.abs(node_value[e] - t[:, None]) > 0
    if differs.any():
        x, y = mesh.points[e[differs][0]]
        warnings.append(f"fixed temperatures of different value meet at ({x:.6g}, {y:.6g}) and "
                        f"{int(differs.any(axis=1).sum()) - 1} other place(s); the entry first "
                        "in the file sets the shared node")
    return fixed, node_value[fixed], warnings


def _check_heat_paths(mesh: Mesh, K: sp.csr_matrix, fixed: np.ndarray,
                      cooled: np.ndarray) -> None:
    """Each connected body needs a way to lose heat, or no steady state exists."""
    count, label = connected_components(K, directed=False)
    anchored = np.zeros(count, dtype=bool)
    anchored[label[fixed]] = True
    anchored[label[mesh.edges[cooled].ravel()]] = True
    if anchored.all():
        return
    body = int(np.flatnonzero(~anchored)[0])
    in_body = label[mesh.triangles[:, 0]] == body
    names = [mesh.model.shapes[i].name for i in np.unique(mesh.triangle_shape[in_body])]
    where = "the body" if count == 1 else f"body {body + 1} of {count}"
    raise NoHeatPathError(
        f"{where} (shapes: {', '.join(names)}) has no fixed-temperature, convection or "
        "radiation boundary, so it has no steady temperature; give it a heat path",
        file=mesh.model.source, entry="[[boundary]]")
