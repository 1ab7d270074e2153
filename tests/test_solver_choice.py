"""The linear solver back-ends and the choice ``auto`` makes.

References: every back-end must agree with scipy's own sparse direct solver
(``scipy.sparse.linalg.spsolve``, SuperLU) on the same reduced system, to the
solver tolerance heat2d accepts (``ACCEPT_RESIDUAL``); the conduction matrix of a
plane wall with fixed ends is checked against the linear profile of Incropera et
al., Fundamentals of Heat and Mass Transfer, 6th ed., §3.1.1, eq. 3.3.
"""

from __future__ import annotations

import copy

import numpy as np
import pytest
import scipy.sparse as sp
import scipy.sparse.linalg as spla

import heat2d
from heat2d.fem import solver
from heat2d.fem.assembly import assemble
from heat2d.fem.geometry import build_geometry
from heat2d.fem.mesh import build_mesh

WALL = """
[model]
length_unit = "mm"
depth = 10
[materials.steel]
k = 16
[[shape]]
name = "wall"
material = "steel"
rect = { x = 0, y = 0, width = 20, height = 10 }
[[shape]]
name = "heater"
material = "steel"
rect = { x = 8, y = 3, width = 4, height = 4 }
power = 2
[[boundary]]
name = "hot"
on = "wall.left"
temperature = 80
[[boundary]]
name = "cold"
on = "wall.right"
temperature = 20
[mesh]
size = 0.6
"""


def reduced(text: str = WALL, power: float | None = None):
    if power is not None:
        text = text.replace("power = 2", f"power = {power:g}")
    system = assemble(build_mesh(build_geometry(heat2d.parse(text))))
    n = system.K.shape[0]
    free = np.ones(n, dtype=bool)
    free[system.fixed] = False
    K = system.K.tocsr()
    A = K[free][:, free].tocsr()
    b = system.F[free] - K[free][:, system.fixed] @ system.fixed_value
    return system, A, b, free


def backends():
    names = ["superlu"]
    if solver.pardiso_available():
        names.append("pardiso")
    return names


@pytest.fixture
def no_pardiso():
    was = solver.use_pardiso(False)
    yield
    solver.use_pardiso(was)


def test_wall_without_source_is_linear():
    # Incropera §3.1.1 eq. 3.3: T(x) = T1 + (T2 − T1) x / L for a plane wall, no source.
    system, A, b, free = reduced(power=0)
    sol = solver.solve(system)
    x = system.mesh.points[:, 0]
    assert np.allclose(sol.temperature, 80 + (20 - 80) * x / 20, atol=1e-9)


@pytest.mark.parametrize("backend", backends())
def test_direct_backends_match_scipy(backend, monkeypatch):
    system, A, b, free = reduced()
    reference = spla.spsolve(A.tocsc(), b)
    was = solver.use_pardiso(backend == "pardiso")
    monkeypatch.setattr(solver, "PARDISO_ABOVE", 0)          # this small system too
    try:
        factor = solver.Factor("direct", A, keep_order=True)
        assert factor.backend == backend
        x = factor(b)
        assert factor.method == "direct" and factor.iterations == 1
        assert np.linalg.norm(x - reference) <= 1e-10 * np.linalg.norm(reference)
        # A second right-hand side with the same factorization (the °C/W solves).
        b2 = np.zeros_like(b)
        b2[len(b) // 2] = 1.0
        assert np.allclose(factor(b2), spla.spsolve(A.tocsc(), b2), rtol=1e-10, atol=1e-14)
        # A later matrix of the same pattern (a Newton step, a time step's C + sK).
        shifted = (A + sp.diags(np.full(A.shape[0], 0.5 * A.diagonal().mean()))).tocsr()
        later = copy.copy(factor)
        later.update(shifted)
        assert np.allclose(later(b), spla.spsolve(shifted.tocsc(), b), rtol=1e-10)
        assert np.allclose(factor(b), reference, rtol=1e-10)   # the copy left it intact
        factor.release()
        assert np.allclose(factor(b), reference, rtol=1e-10)   # refactors after release
    finally:
        solver.use_pardiso(was)


def test_multigrid_matches_scipy():
    system, A, b, free = reduced()
    factor = solver.Factor("multigrid", A)
    x = factor(b)
    reference = spla.spsolve(A.tocsc(), b)
    assert factor.method == "multigrid" and factor.iterations > 0
    assert np.linalg.norm(A @ x - b) <= solver.ACCEPT_RESIDUAL * np.linalg.norm(b)
    assert np.allclose(x, reference, rtol=1e-7)


def test_unsymmetric_matrix_direct(monkeypatch):
    # A Newton Jacobian need not be symmetric: every back-end solves it as scipy does.
    system, A, b, free = reduced()
    skew = sp.random(A.shape[0], A.shape[0], density=2 / A.shape[0], random_state=3,
                     format="csr") * 1e-3 * A.diagonal().mean()
    J = (A + skew.multiply(A != 0)).tocsr()
    reference = spla.spsolve(J.tocsc(), b)
    for backend in backends():
        was = solver.use_pardiso(backend == "pardiso")
        monkeypatch.setattr(solver, "PARDISO_ABOVE", 0)
        try:
            assert np.allclose(solver.Factor("direct", J)(b), reference, rtol=1e-10)
        finally:
            solver.use_pardiso(was)


def test_auto_choice_by_size(no_pardiso, monkeypatch):
    # Without PARDISO: SuperLU below the measured crossover, multigrid CG from it on.
    limit = solver.AUTO_DIRECT_LIMIT
    assert solver.choose_method(limit - 1) == "direct"
    assert solver.choose_method(limit) == "multigrid"
    monkeypatch.setattr(solver, "_PARDISO", True)             # as if installed
    assert solver.choose_method(10 * limit) == "direct"
    assert solver._direct_backend(solver.PARDISO_ABOVE - 1) == "superlu"
    assert solver._direct_backend(solver.PARDISO_ABOVE) == "pardiso"


def test_auto_is_used_by_solve(no_pardiso, monkeypatch):
    system, A, b, free = reduced()
    monkeypatch.setattr(solver, "AUTO_DIRECT_LIMIT", 10)
    sol = solver.solve(system)
    assert sol.method == "multigrid"
    direct = solver.solve(system, method="direct")
    assert direct.method == "direct"
    assert np.allclose(sol.temperature, direct.temperature, rtol=1e-7)


def test_nested_dissection_order_cuts_the_fill_and_keeps_the_solution():
    # The wall meshed to about 30 000 unknowns: SuperLU in the geometric nested-dissection
    # order (heat2d.fem.ordering; George 1973) against scipy's own orders on the same
    # reduced matrix, COLAMD (spsolve's default) and minimum degree on AᵀA + A, and the
    # solution against spsolve's to round-off.
    from heat2d.fem.ordering import ABOVE, nested_dissection

    model = heat2d.parse(WALL.replace("[mesh]\nsize = 0.6", "[mesh]\nsize = 0.12"))
    system = assemble(build_mesh(build_geometry(model)))
    free = np.ones(system.K.shape[0], dtype=bool)
    free[system.fixed] = False
    K = system.K.tocsr()[free][:, free].tocsr()
    assert K.shape[0] > ABOVE
    q = nested_dissection(system.mesh.points[free], K)
    np.testing.assert_array_equal(np.sort(q), np.arange(K.shape[0]))
    nd = spla.splu(K[q][:, q].tocsc(), permc_spec="NATURAL", options={"SymmetricMode": True})
    colamd = spla.splu(K.tocsc())
    mmd = spla.splu(K.tocsc(), permc_spec="MMD_AT_PLUS_A", options={"SymmetricMode": True})
    # (at this size its fill is near minimum degree's, its factorization as fast or
    # faster; at 300 000 unknowns it has 0.77× MMD's fill, factorized 3.5× faster:
    # benchmarks/README.md)
    assert nd.nnz < 0.75 * colamd.nnz and nd.nnz < 1.15 * mmd.nnz
    b = np.random.default_rng(3).random(K.shape[0])
    x = np.empty_like(b)
    x[q] = nd.solve(b[q])
    ref = spla.spsolve(K.tocsc(), b)
    assert np.abs(x - ref).max() <= 1e-10 * np.abs(ref).max()
    # and heat2d's solve, which orders this system so, agrees with spsolve on the model
    sol = solver.solve(system, method="direct")
    assert sol.factor.order is not None and sol.factor.permuted
    rhs = system.F[free] - system.K.tocsr()[free][:, ~free] @ system.fixed_value
    T = spla.spsolve(K.tocsc(), rhs)
    assert np.abs(sol.temperature[free] - T).max() <= 1e-9 * np.abs(T).max()
