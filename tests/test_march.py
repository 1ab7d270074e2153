"""The TR-BDF2 march against published transient solutions and scipy's ODE solvers."""

from __future__ import annotations

import numpy as np
import pytest
from scipy.integrate import solve_ivp
from scipy.optimize import brentq

import heat2d
from heat2d.fem.assembly import assemble
from heat2d.fem.capacity import capacity
from heat2d.fem.geometry import build_geometry
from heat2d.fem.mesh import build_mesh
from heat2d.model.timeline import Schedule
from heat2d.transient import march

RHO, CP, K = 1000.0, 1000.0, 10.0          # slab material: α = 1e-5 m²/s
ALPHA = K / (RHO * CP)


def slab(length: float = 10, height: float = 0.5, size: float = 0.125, *,
         left: str = "heat_flux = 1000", right: str = "temperature = 0",
         material: str = "", shape_extra: str = "", extra: str = "") -> heat2d.Model:
    """A 1-D-like slab along x (mm): ``left`` and ``right`` faces, top and bottom
    insulated."""
    return heat2d.parse(f"""
[model]
length_unit = "mm"
depth = 1
[materials.m]
{material or f"k = {K}"}
density = {RHO}
specific_heat = {CP}
[[shape]]
name = "slab"
material = "m"
rect = {{ x = 0, y = 0, width = {length}, height = {height} }}
{shape_extra}
[[boundary]]
name = "left"
on = "slab.left"
{left}
[[boundary]]
name = "right"
on = "slab.right"
{right}
[mesh]
size = {size}
{extra}
""")


def system_of(model):
    return assemble(build_mesh(build_geometry(model)))


@pytest.fixture(scope="module")
def flux_slab():
    return system_of(slab())


def test_slab_flux_face_rise_matches_carslaw_jaeger(flux_slab):
    # Carslaw & Jaeger, Conduction of Heat in Solids, 2nd ed., §3.3 (slab 0 < x < L,
    # flux q into x = 0, x = L held): heated-face rise / (qL/k) at Fourier numbers αt/L²
    # (the series' values as tabulated for this check).
    L, A, q = 0.01, 0.5e-3 * 1e-3, 1000.0
    fo = np.array([0.01, 0.1, 0.40528, 1.0, 3.0])
    ref = np.array([0.11284, 0.35682, 0.70179, 0.93126, 0.99951])
    t = fo * L**2 / ALPHA
    times = np.unique(np.concatenate([np.geomspace(t[0] / 10, t[-1], 30), t]))
    hist = march(flux_slab, times=times, initial=0.0, tolerance=1e-3, land_reports=True)
    rise = hist.shape_max[1:, 0][np.searchsorted(times, t)]
    z_over_r = rise / (q * A) / (L / (K * A))
    assert np.abs(z_over_r / ref - 1).max() < 0.01          # measured: 4.0e-4
    # the default: steps free of the report times (figures interpolated inside steps)
    free = march(flux_slab, times=times, initial=0.0, tolerance=1e-3)
    rise_free = free.shape_max[1:, 0][np.searchsorted(times, t)]
    assert np.abs(rise_free / (q * A) / (L / (K * A)) / ref - 1).max() < 0.01
    assert len(free.steps) < len(hist.steps)
    # the hottest moment: the end (the face only heats), its field the final one, its
    # largest value the heated face's rise at Fo = 3 (0.99951 qL/k)
    assert free.hottest_time == times[-1]
    assert np.array_equal(free.hottest, free.final)
    assert free.hottest.max() / (q * A) / (L / (K * A)) == pytest.approx(ref[-1], rel=0.01)
    # the heated face is the hottest point; the heat through the held face lags
    assert hist.heat_out[-1, 0] == pytest.approx(-q * A, rel=1e-9)   # flux in, negative out
    assert hist.heat_out[-1, 1] == pytest.approx(q * A * 0.99, rel=0.01)


def test_early_time_follows_the_semi_infinite_law():
    # Carslaw & Jaeger §2.9: constant flux into a semi-infinite solid, surface rise
    # 2 q sqrt(αt/π)/k, i.e. Z = 2 sqrt(t/π) / (A sqrt(kρc)); valid while αt/L² < 0.01.
    system = system_of(slab(length=4, height=0.05, size=0.01))
    L, A, q = 0.004, 0.05e-3 * 1e-3, 1000.0
    fo = np.array([0.002, 0.005, 0.01])
    t = fo * L**2 / ALPHA
    hist = march(system, times=t, initial=0.0, tolerance=1e-5)
    z = hist.shape_max[1:, 0] / (q * A)
    law = 2 * np.sqrt(t / np.pi) / (A * np.sqrt(K * RHO * CP))
    assert np.abs(z / law - 1).max() < 0.002                # measured: 8.3e-5


def test_lumped_capacitance_of_a_copper_block():
    # Incropera et al., Fundamentals of Heat and Mass Transfer, 6th ed., §5.1 eq. 5.6:
    # Bi = h(V/A)/k << 1, θ/θi = exp(−t hA/(ρcV)). Copper 8933 kg/m³, 385 J/(kg·K),
    # 401 W/(m·K) (Incropera Table A.1, 300 K); 10 mm × 10 mm section, h = 10 on all faces.
    model = heat2d.parse("""
[model]
length_unit = "mm"
depth = 1
[materials.cu]
k = 401
density = 8933
specific_heat = 385
[[shape]]
name = "block"
material = "cu"
rect = { x = 0, y = 0, width = 10, height = 10 }
[[boundary]]
name = "air"
on = "exterior"
h = 10
ambient = 25
[mesh]
size = 2
""")
    system = system_of(model)
    tau = 8933 * 385 * (0.01 * 0.01) / (10 * 0.04)        # ρcV/(hA), s
    times = tau * np.array([0.1, 0.5, 1.0, 2.0, 4.0])
    hist = march(system, times=times, initial=100.0, tolerance=1e-4)
    theta = (hist.shape_mean[1:, 0] - 25) / 75
    assert np.abs(theta - np.exp(-times / tau)).max() < 1e-4      # Bi = 1.2e-4; measured 5.9e-6
    # the heat the air takes equals the stored heat released (energy balance)
    assert hist.energy["relative_error"] < 1e-8
    assert hist.stored[-1] == pytest.approx(capacity(system)[0].sum() * 75
                                            * (np.exp(-4) - 1), rel=1e-3)


def _wall_series(bi: float, fo: float, x: float, terms: int = 30) -> float:
    """Incropera §5.5.1 eq. 5.39: θ* = Σ C_n exp(−ζ_n² Fo) cos(ζ_n x*), ζ_n tan ζ_n = Bi,
    C_n = 4 sin ζ_n / (2ζ_n + sin 2ζ_n)."""
    out = 0.0
    for n in range(terms):
        lo, hi = n * np.pi + 1e-12, n * np.pi + np.pi / 2 - 1e-12
        z = brentq(lambda z: z * np.tan(z) - bi, lo, hi)
        out += 4 * np.sin(z) / (2 * z + np.sin(2 * z)) * np.exp(-z * z * fo) * np.cos(z * x)
    return out


def test_plane_wall_with_convection_matches_the_series():
    # Incropera §5.5: wall of half-thickness L (insulated mid-plane x = 0, convection at
    # x = L), Bi = hL/k = 1, T_i = 100 °C, T∞ = 0 °C.
    system = system_of(slab(length=10, height=0.5, size=0.1, left="heat_flux = 0",
                            right="h = 1000\nambient = 0"))
    L = 0.01
    fo = np.array([0.05, 0.2, 0.5, 1.0])
    times = fo * L**2 / ALPHA
    mesh = system.mesh
    hist = march(system, times=times, initial=100.0, tolerance=1e-4,
                 store_at=times)
    x = mesh.points[:, 0] / 10
    for row, f in enumerate(fo):
        T = hist.snapshots[row]
        for xs in (0.0, 1.0):
            node = np.argmin(np.abs(x - xs))
            ref = 100 * _wall_series(1.0, f, xs)
            assert T[node] == pytest.approx(ref, abs=0.01), (f, xs)   # measured ≤ 6.0e-4 K


def _ivp_reference(system, start, power_shape, t_end):
    """scipy solve_ivp (Radau, rtol 1e-12) on the same semi-discrete system."""
    C = capacity(system)[0]
    free = np.ones(len(C), dtype=bool)
    free[system.fixed] = False
    k_dense = system.K.toarray()
    Kff = k_dense[np.ix_(free, free)]
    mesh = system.mesh
    vol = system.layout.volume
    sel = mesh.triangle_shape == power_shape
    f = np.bincount(mesh.triangles[sel].ravel(),
                    (system.layout.source[sel] / vol[sel].sum()).ravel(), minlength=len(C))
    b0 = system.F - np.bincount(mesh.triangles.ravel(),
                                (system.qdot[:, None] * system.layout.source).ravel(),
                                minlength=len(C))
    b0 = b0[free] - k_dense[np.ix_(free, ~free)] @ system.fixed_value
    cf = C[free]

    def rhs(t, y):
        return (b0 + min(t / 0.02, 1.0) * f[free] - Kff @ y) / cf

    sol = solve_ivp(rhs, (0, t_end), start[free], method="Radau", rtol=1e-12, atol=1e-12,
                    jac=-Kff / cf[:, None])
    out = start.copy()
    out[free] = sol.y[:, -1]
    return out


def test_second_order_in_time_at_fixed_steps():
    # Hosea & Shampine (1996): TR-BDF2 is second order; against scipy's Radau solution of
    # the same semi-discrete system, halving a fixed step divides the error by about 4.
    system = system_of(slab(length=4, height=1, size=0.5, left="heat_flux = 0",
                            right="temperature = 0"))
    ramp = Schedule(kind="linear", points=((0.0, 0.0), (0.02, 1.0)))   # a grid point
    start = np.zeros(len(system.mesh.points))
    t_end = 0.2
    ref = _ivp_reference(system, start, 0, t_end)
    errors = []
    for n in (10, 20, 40, 80):
        ends = np.linspace(0, t_end, n + 1)[1:]
        hist = march(system, times=[t_end], initial=start, power={"slab": ramp},
                     plan=(ends, np.zeros(len(ends), dtype=bool)))
        errors.append(np.abs(hist.final - ref).max())
    ratios = np.array(errors[:-1]) / np.array(errors[1:])
    assert np.all((ratios > 3.8) & (ratios < 4.2)), ratios     # measured 4.03, 4.01, 4.00


def test_step_input_is_monotone_even_with_a_large_first_step(flux_slab):
    # The exact response to a step of flux or of a face temperature from a uniform state
    # rises monotonically at every point (maximum principle; Carslaw & Jaeger §3.3, §3.4
    # series); the discrete one must too, with no undershoot below the start.
    times = np.geomspace(0.1, 30, 25)
    held = system_of(slab(left="heat_flux = 0", right="temperature = 100"))
    for system in (flux_slab, held):
        hist = march(system, times=times, initial=0.0, first_step=1.0, store_at=times,
                     tolerance=10.0)
        assert np.diff(hist.snapshots, axis=0).min() >= -1e-9
        assert hist.snapshots.min() >= -1e-9
    # Steps of 1 s and more (αh/Δx² = 640) after the face jumps to 100 °C: TR-BDF2 alone
    # oscillates (its amplification is negative for hλ > 2.41; measured: a node falls by
    # 9.5 K); the two backward-Euler steps the march starts with keep it monotone.
    ends = np.array([1.0, 2, 4, 8, 16, 30])
    plain = march(held, times=ends, initial=0.0, store_at=ends,
                  plan=(ends, np.zeros(6, dtype=bool)))
    started = march(held, times=ends, initial=0.0, store_at=ends,
                    plan=(ends, np.array([True, True, False, False, False, False])))
    assert np.diff(plain.snapshots, axis=0).min() < -1.0
    assert np.diff(started.snapshots, axis=0).min() >= -1e-9


def test_long_march_reaches_the_steady_solve():
    # The steady state is the t → ∞ limit; heat2d.solve on the same model and mesh.
    model = slab(length=10, height=2, size=0.5, left="h = 50\nambient = 20",
                 shape_extra="power = 0.5")
    system = system_of(model)
    tau = (0.01**2) / ALPHA                       # L²/α = 10 s
    hist = march(system, times=np.geomspace(0.01, 40 * tau, 20), initial=20.0)
    steady = heat2d.solve(model, estimate=False, resistances=False).temperature
    rise = steady - 20
    assert np.abs(hist.final - steady).max() / rise.max() < 1e-6     # measured 1.9e-13


def test_energy_balance_over_a_pulsed_run():
    # ∫P dt = stored + ∫Q_out dt (first law) with convection, a held face and a pulse.
    model = slab(length=10, height=2, size=0.5, left="h = 50\nambient = 20",
                 right="temperature = 30",
                 shape_extra="power_pulse = { power = 2, width = 0.5, period = 2, count = 3 }",
                 extra="[transient]\nend = 10\n")
    system = system_of(model)
    hist = march(system, times=np.geomspace(0.01, 10, 31), initial="steady")
    e = hist.energy
    assert e["input_j"] == pytest.approx(2 * 0.5 * 3, rel=1e-12)
    assert e["relative_error"] < 1e-8
    assert e["stored_j"] + e["out_j"] == pytest.approx(e["input_j"], rel=1e-8)
    # the pulses lift the slab; the steady start has only the held face and air
    assert hist.peaks()["slab"]["max"] > hist.shape_max[0, 0]
    # the hottest moment is the end of a pulse (heating only while one is on), and its
    # field holds the run's largest step-end temperature
    assert min(abs(hist.hottest_time - (0.5 + 2 * j)) for j in range(3)) < 1e-12
    assert hist.hottest.max() == pytest.approx(hist.peaks()["slab"]["max"], abs=1e-12)


def test_report_times_a_hair_from_a_pulse_edge_are_one_target():
    # The fifth pulse ends at 0.01 + 4·0.05 = 0.21000000000000002 in binary floating point
    # (IEEE 754 double), a report and snapshot time at 0.21: one landing, no step of
    # 1e-17 s; the first law still holds (∫P dt = 6 W · 0.01 s · 5 pulses).
    from heat2d.transient.march import merge_times

    edge = 0.01 + 4 * 0.05
    assert edge != 0.21
    assert np.array_equal(merge_times([0.21, edge, 0.3], prefer=[edge]), [edge, 0.3])
    model = slab(length=10, height=2, size=0.5, left="h = 50\nambient = 20",
                 right="temperature = 30",
                 shape_extra="power_pulse = { power = 6, width = 0.01, period = 0.05, "
                             "count = 5 }",
                 extra="[transient]\nend = 1\n")
    system = system_of(model)
    times = np.union1d(np.geomspace(1e-5, 1, 51), [0.21])
    for land in (True, False):
        hist = march(system, times=times, initial="steady", store_at=[0.21],
                     land_reports=land)
        assert (hist.steps / hist.step_ends).min() > 1e-6
        assert len(hist.times) == len(times) + 1
        assert hist.snapshot_times[0] == pytest.approx(0.21, rel=1e-15)
        assert hist.energy["input_j"] == pytest.approx(6 * 0.01 * 5, rel=1e-12)
        assert hist.energy["relative_error"] < 1e-8


def test_nonlinear_step_response_reaches_the_nonlinear_steady_state():
    # k falls with temperature (a table): the march from a uniform state converges to the
    # nonlinear steady solution of heat2d.solve (Newton, tolerance 1e-6 K).
    model = slab(length=10, height=2, size=0.5, left="heat_flux = 100000",
                 material="k = [[0, 20], [100, 5]]")
    system = system_of(model)
    hist = march(system, times=np.geomspace(0.01, 200, 15), initial=0.0)
    steady = heat2d.solve(model, estimate=False, resistances=False).temperature
    assert np.abs(hist.final - steady).max() < 1e-6 * steady.max()   # measured 4.6e-10
    assert steady.max() > 50          # far from linear: k drops by half across the slab


def _pulsed_slab_marches(material: str):
    """A 0.3 s pulse of 1 W into a slab (convection left, held right), marched to 2 s
    with its error estimate at tolerance 0.05 K, and again at 1e-5 K (the reference)."""
    model = slab(length=4, height=0.5, size=0.25, left="h = 100\nambient = 0",
                 right="temperature = 0", material=material,
                 shape_extra="power_pulse = { power = 1, width = 0.3 }",
                 extra="[transient]\nend = 2\n")
    system = system_of(model)
    times = np.geomspace(1e-3, 2, 30)
    rough = march(system, times=times, initial="steady", tolerance=0.05, check=True)
    return rough, march(system, times=times, initial="steady", tolerance=1e-5)


def test_peak_error_estimate_brackets_the_time_step_error():
    # A pulse's peak at tolerance 0.05 K against the same march at 1e-5 K (its own error
    # about 1e-5 K): the transported local errors (e_n+1 = R e_n + l_n, the global error
    # equation of a linear one-step scheme; Lang & Verwer, SIAM J. Sci. Comput. 29, 2007,
    # from memory) are within a factor 2 of the march's true error (measured 6.10e-3 K
    # against 6.34e-3 K; over the report rows 5.37e-2 against 5.28e-2 K; at 0.01 K and
    # 0.2 K within 4 % too).
    rough, exact = _pulsed_slab_marches("")
    true = abs(rough.peaks()["slab"]["max"] - exact.peaks()["slab"]["max"])
    estimate = rough.peaks()["slab"]["max_error"]
    assert estimate / 2 <= true <= 2 * estimate
    rows = np.abs(np.nanmax(rough.shape_max, axis=1) - np.nanmax(exact.shape_max, axis=1))
    assert rough.error.max() / 2 <= rows.max() <= 2 * rough.error.max()


@pytest.mark.parametrize("left, right, material", [
    ("h = 50\nambient = 20", "temperature = 30\ntemperature_table = [[0, 30], [2, 60], [5, 40]]",
     ""),
    ("h = 50\nambient = 20\nh_table = [[0, 50], [3, 500]]\nambient_table = [[0, 20], [4, 0]]",
     "temperature = 30", ""),
    ("h = 50\nambient = 20", "temperature = 30",
     "k = 10\ndensity = [[0, 1000], [100, 3000]]\nspecific_heat = 1000"),
    ("h = 5\nambient = 20\nemissivity = 0.9\nsurroundings = 20", "temperature = 30", ""),
], ids=["temperature_table", "h_and_ambient_tables", "capacity_table", "radiation"])
def test_energy_balance_with_schedules_and_nonlinear_terms(left, right, material):
    # First law over the run, ∫P dt = stored + ∫Q_out dt, where boundary values follow
    # tables (the held face's reservoir heat includes its changing temperature), where ρc
    # follows a table (stored heat ∫ρc dT) and where the face radiates (εσ(T⁴ − T_sur⁴)).
    model = slab(length=10, height=2, size=1.0, left=left, right=right,
                 material=material.replace("density = [[0, 1000], [100, 3000]]\n"
                                           "specific_heat = 1000", ""),
                 shape_extra="power_pulse = { power = 2, width = 1, period = 3, count = 2 }",
                 extra="[transient]\nend = 10\n")
    if material:
        model = model.with_material("m", k=10, density=[[0, 1000], [100, 3000]],
                                    specific_heat=1000)
        assert model.material("m").varies_capacity
    hist = march(system_of(model), times=np.geomspace(0.01, 10, 16), initial="steady",
                 tolerance=0.05)
    e = hist.energy
    assert e["input_j"] == pytest.approx(2 * 1 * 2, rel=1e-12)
    assert e["relative_error"] < 1e-7
    assert hist.stored[-1] == pytest.approx(e["stored_j"], rel=1e-12)


def test_stored_heat_with_capacity_tables_matches_quadrature():
    # ∫ρc dT with ρ and c piecewise-linear tables (held beyond their ends), against
    # scipy.integrate.quad of the same ρ(T)·c(T); the slope of the stored heat is C(T).
    from scipy.integrate import quad

    from heat2d.fem.capacity import stored_heat

    model = slab(length=2, height=1, size=1.0, material="k = 10").with_material(
        "m", k=10, density=[[0, 1000], [100, 3000], [150, 2000]],
        specific_heat=[[20, 800], [120, 1200]])
    system = system_of(model)
    mt = model.material("m")
    n = len(system.mesh.points)
    start = np.full(n, 10.0)
    T = np.linspace(-50, 200, n)
    heat = stored_heat(system, T, start)
    volume = capacity(system, None, 1.0)[0]          # ∫φ_i dV per node

    def rho_c(x):
        return float(mt.capacity_at(np.array([x]))[0][0])

    ref = np.array([quad(rho_c, 10, t, points=[20, 100, 120, 150], limit=200)[0]
                    for t in T]) * volume
    assert np.abs(heat - ref).max() <= 1e-9 * np.abs(ref).max()
    step = 1e-3
    slope = (stored_heat(system, T + step, start) - stored_heat(system, T - step, start)) / (2 * step)
    corner = np.min(np.abs(T[:, None] - np.array([0, 20, 100, 120, 150])), axis=1) < 2 * step
    assert np.allclose(slope[~corner], capacity(system, T)[0][~corner], rtol=1e-6)


def test_unit_step_rise_tends_to_the_steady_self_resistance():
    # Z(t) of 1 W with every boundary value zeroed: its limit is the steady °C/W of the
    # shape on itself (heat2d.solve's thermal_resistance, by superposition; Incropera
    # §3.1 resistance as rise per heat rate).
    model = slab(length=10, height=2, size=0.5, left="h = 50\nambient = 20",
                 right="temperature = 30", shape_extra="power = 0.5")
    result = heat2d.solve(model, estimate=False)
    hist = march(result.solution.system, times=np.geomspace(1e-3, 400, 30), initial=0.0,
                 power={"slab": 1.0}, boundary="zero")
    z = hist.shape_max[:, 0]
    r = result.summary["thermal_resistance"]["max_rise_k_per_w"]["slab"]["slab"]
    assert z[-1] == pytest.approx(r, rel=1e-9)                   # measured 1e-14
    # rising (dθ/dt solves the source-free problem from q ≥ 0: maximum principle) to
    # within the time-step tolerance, 0.01 K (measured: 2.2e-5 K above the limit once)
    assert np.diff(z).min() > -0.01
    assert hist.energy["input_j"] == pytest.approx(400.0, rel=1e-12)
    # a second march sharing the first's factorizations (FactorCache) makes none and
    # gives the same curve (to the CG tolerance of its off-rung steps)
    from heat2d.transient.linear import FactorCache

    cache = FactorCache()
    first = march(result.solution.system, times=np.geomspace(1e-3, 400, 30), initial=0.0,
                  power={"slab": 1.0}, boundary="zero", cache=cache)
    again = march(result.solution.system, times=np.geomspace(1e-3, 400, 30), initial=0.0,
                  power={"slab": 1.0}, boundary="zero", cache=cache)
    assert again.stats["factorizations"] == 0 < first.stats["factorizations"]
    assert np.abs(again.shape_max - z[:, None]).max() < 1e-6 * r
    # a cache of 3 factorizations keeps the first rung for the next march's sweep (the
    # least recently used ones would be exactly those it needs first); to 4e4 s the
    # march climbs six factorized rungs
    small = FactorCache(keep=3)
    longer = np.geomspace(1e-5, 4e4, 40)
    first = march(result.solution.system, times=longer, initial=0.0,
                  power={"slab": 1.0}, boundary="zero", cache=small)
    again = march(result.solution.system, times=longer, initial=0.0,
                  power={"slab": 1.0}, boundary="zero", cache=small)
    assert first.stats["factorizations"] > 3
    assert again.stats["factorizations"] < first.stats["factorizations"]


def test_error_transport_with_the_multigrid_solver():
    # The error transport rides as a second column of the stages' solves; multigrid CG
    # solves one column at a time. Both solvers give the same march and estimate (to
    # the CG tolerance), for a step of face flux (Carslaw & Jaeger §3.3's slab).
    system = system_of(slab(size=0.25))
    times = [10, 1000, 1e5]
    direct = march(system, times=times, initial=0.0, check=True, method="direct")
    mg = march(system, times=times, initial=0.0, check=True, method="multigrid")
    assert np.abs(mg.shape_max - direct.shape_max).max() < 1e-6 * np.abs(direct.shape_max).max()
    assert np.all(np.isfinite(mg.peak_error)) and mg.peak_error.max() > 0
    assert mg.peak_error == pytest.approx(direct.peak_error, rel=1e-3)


def test_nonlinear_peak_error_estimate_by_halved_steps():
    # k falls with temperature (a table): no error transport (the scheme is not linear);
    # the march is repeated on halved steps and |coarse − fine|/3 (Richardson, second
    # order) is within a factor 2 of the finer march's true error, against the same
    # march at 1e-5 K (measured 9.6e-3 K estimated against 8.5e-3 K).
    from heat2d.transient.march import HALVED

    rough, exact = _pulsed_slab_marches("k = [[0, 20], [100, 10]]")
    assert rough.stats["error_estimate"] == HALVED
    true = abs(rough.peaks()["slab"]["max"] - exact.peaks()["slab"]["max"])
    estimate = rough.peaks()["slab"]["max_error"]
    assert estimate / 2 <= true <= 2 * estimate


def test_a_huge_power_is_marched_to_a_relative_tolerance():
    # 1e9 W by a slip of units (found by the long property run: 0.01 K allowed on a rise
    # of 1e10 K took steps of 2e-7 s, past any time limit). Past a span of 1000 K the
    # tolerance is raised to 1e-4 of the span; the march is linear, so its figures are those of 1 W times 1e9
    # (superposition), within the time-step error of a march held to 1e-4 of its span.
    system = system_of(slab(length=10, height=0.5, size=0.5, left="h = 50\nambient = 0"))
    times = np.geomspace(0.01, 100, 13)
    one = march(system, times=times, initial=0.0, power={"slab": 1.0}, boundary="zero",
                tolerance=0.01, plausible=1e-3)     # the same rule at 1 W
    count = iter(range(1000))               # without the relative floor: millions of steps

    def bounded(t, end):
        next(count)                         # StopIteration past 1000 steps

    huge = march(system, times=times, initial=0.0, power={"slab": 1e9}, boundary="zero",
                 tolerance=0.01, check=True, progress=bounded)
    span = float(np.abs(huge.final).max())
    assert huge.stats["tolerance_used_k"] == pytest.approx(1e-4 * span, rel=1e-4)
    assert len(huge.steps) <= 3 * len(one.steps)
    scaled = huge.shape_max[:, 0] / 1e9
    assert np.abs(scaled - one.shape_max[:, 0]).max() <= 1e-4 * span / 1e9     # measured 2e-6 K
