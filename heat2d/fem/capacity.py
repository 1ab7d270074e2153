"""Heat capacity of the discrete system: the lumped (row-sum) capacity per node.

C_i = Σ_e ρc_e ∫ φ_i dV in J/K, with ``Layout.source`` holding ∫ φ_i dV per triangle
(the depth or the 2πr weight included). Lumping keeps C diagonal, so the time
integrator's matrices C + s K keep the pattern of K, and the discrete maximum principle
of backward differences holds on meshes whose K has no positive off-diagonal entry.

A material whose ρc follows a table is evaluated at the *node's* temperature (each
triangle's share of node i carries the material of that triangle at T_i), so the stored
heat of node i is an exact integral Σ_e ∫φ_i dV ∫ ρc_e(τ) dτ and the time integrator
conserves energy exactly in enthalpy form.
"""

from __future__ import annotations

import numpy as np

from ..errors import ModelError

_GAUSS_X, _GAUSS_W = np.polynomial.legendre.leggauss(3)


def _per_triangle(system, rho_c) -> np.ndarray | None:
    """Constant ρc per triangle (J/(m³·K)), or None when some material has a table."""
    m = len(system.mesh.triangles)
    if rho_c is not None:
        return np.broadcast_to(np.asarray(rho_c, dtype=float), (m,)).copy()
    model = system.model
    values = np.zeros(len(model.materials))
    for i, mt in enumerate(model.materials):
        if getattr(mt, "varies_capacity", False):
            return None
        if not getattr(mt, "has_capacity", False):
            continue
        values[i] = float(mt.capacity_at(np.array([25.0]))[0][0])
    _check_covered(system, values)
    return values[system.mesh.triangle_material]


def _check_covered(system, values: np.ndarray) -> None:
    used = np.unique(system.mesh.triangle_material)
    missing = [i for i in used if not values[i] > 0]
    if missing:
        mt = system.model.materials[int(missing[0])]
        raise ModelError("a transient model needs density and specific_heat",
                         file=system.model.source, entry=f"material \"{mt.name}\"")


def varies(system, rho_c=None) -> bool:
    """True when some used material's ρc follows a temperature table."""
    return rho_c is None and any(getattr(mt, "varies_capacity", False)
                                 for mt in system.model.materials)


def capacity(system, T: np.ndarray | None = None, rho_c=None
             ) -> tuple[np.ndarray, np.ndarray]:
    """Lumped nodal capacity C (J/K) and its slope dC_i/dT_i (J/K²).

    Parameters
    ----------
    system
        The assembled :class:`~heat2d.fem.assembly.System`.
    T
        Nodal temperatures (°C) where ρc follows a table; None: at 25 °C.
    rho_c
        Volumetric capacity ρc per triangle (J/(m³·K)) or one number for all, instead of
        the materials' density and specific heat.

    Raises
    ------
    ModelError
        A material in use has no density and specific heat.
    """
    L = system.layout
    tri = system.mesh.triangles
    n = L.n
    constant = _per_triangle(system, rho_c)
    if constant is not None:
        C = np.bincount(tri.ravel(), (constant[:, None] * L.source).ravel(), minlength=n)
        return C, np.zeros(n)
    T = np.full(n, 25.0) if T is None else np.asarray(T, dtype=float)
    C, slope_sum = np.zeros(n), np.zeros(n)
    for i, mt in enumerate(system.model.materials):
        sel = system.mesh.triangle_material == i
        if not sel.any():
            continue
        if not getattr(mt, "has_capacity", False):
            _check_covered(system, np.zeros(len(system.model.materials)))
        nodes = tri[sel].ravel()
        w = L.source[sel].ravel()
        value, slope = mt.capacity_at(T[nodes])
        C += np.bincount(nodes, value * w, minlength=n)
        slope_sum += np.bincount(nodes, slope * w, minlength=n)
    return C, slope_sum


def _enthalpy(material, T: np.ndarray) -> np.ndarray:
    """∫ ρc dτ from the material's first table corner to T (J/m³), exact: ρc is a
    product of two piecewise-linear tables, quadratic between corners, so 3-point
    Gauss–Legendre on each piece is exact; held constant beyond the ends."""
    corners = sorted({t for table in (material.density_table, material.specific_heat_table)
                      if table is not None for t, _ in table}) or [25.0]
    c = np.array(corners, dtype=float)

    def rho_c(x):
        return material.capacity_at(np.asarray(x, dtype=float))[0]

    def gauss(a, b):
        half, mid = 0.5 * (b - a), 0.5 * (b + a)
        return half * sum(w * rho_c(mid + x * half) for x, w in zip(_GAUSS_X, _GAUSS_W,
                                                                     strict=True))

    cum = np.concatenate([[0.0], np.cumsum(gauss(c[:-1], c[1:]))]) if len(c) > 1 \
        else np.zeros(1)
    k = np.clip(np.searchsorted(c, T, side="right") - 1, 0, len(c) - 1)
    inside = np.clip(T, c[0], c[-1])
    out = cum[k] + gauss(c[k], inside)
    return out + rho_c(c[0]) * np.minimum(T - c[0], 0) + rho_c(c[-1]) * np.maximum(
        T - c[-1], 0)


def enthalpy(system, T: np.ndarray, rho_c=None) -> np.ndarray:
    """Heat content per node (J) relative to each material's reference temperature (its
    first table corner): Σ_e ∫φ_i dV ∫ ρc_e dτ up to T_i; differences of it are
    :func:`stored_heat`."""
    if not varies(system, rho_c):
        return capacity(system, None, rho_c)[0] * T
    L, tri = system.layout, system.mesh.triangles
    out = np.zeros(L.n)
    for i, mt in enumerate(system.model.materials):
        sel = system.mesh.triangle_material == i
        if sel.any():
            nodes = tri[sel].ravel()
            out += np.bincount(nodes, L.source[sel].ravel() * _enthalpy(mt, T[nodes]),
                               minlength=L.n)
    return out


def stored_heat(system, T: np.ndarray, start: np.ndarray, rho_c=None) -> np.ndarray:
    """Heat stored at each node between ``start`` and T (J): C_i (T_i − start_i), or with
    ρc tables Σ_e ∫φ_i dV ∫ ρc_e dτ from start_i to T_i (exact; its derivative is the
    capacity of :func:`capacity` at T)."""
    if not varies(system, rho_c):
        return capacity(system, None, rho_c)[0] * (T - start)
    return enthalpy(system, T, rho_c) - enthalpy(system, start, rho_c)
