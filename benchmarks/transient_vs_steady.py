"""A whole transient march against one steady solve of the same mesh.

The board of run_vs_floor.py (about 100 000 nodes by default) with heat capacities
(fr4 1850 kg/m³ · 1100 J/(kg·K), copper 8933 · 385, silicon 2330 · 712, solder 7400 ·
230; handbook values, from memory), the die's 3 W switched on at t = 0 from the
unpowered steady state (found inside the march, so timed with it), reported from 1 µs
to 100 s at 10 times per decade (81 report times). Meshing and assembly are not
timed; one steady solve (``heat2d.fem.solver.solve``) and the march
(``heat2d.transient.march``, tolerance 0.01 K) are, in one run, and the ratio printed
with the steps, factorizations, back-substitutions and CG iterations the march used.
``--check`` also times the march with its time-step error check (a second march on the
halved steps); ``--between`` lets the steps follow the error control alone, the report
times filled by interpolation inside the steps.

    python benchmarks/transient_vs_steady.py [--nodes 100000] [--tolerance 0.01] [--check]
"""

from __future__ import annotations

import argparse
import sys
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).parent))

CAPACITY = {"fr4": (1850, 1100), "copper": (8933, 385), "silicon": (2330, 712),
            "solder": (7400, 230)}


def transient_board(nodes: int) -> str:
    from run_vs_floor import board_model, size_for_nodes

    text = board_model(size_for_nodes(nodes))
    for name, (rho, c) in CAPACITY.items():
        head = f"[materials.{name}]\n"
        text = text.replace(head, f"{head}density = {rho}\nspecific_heat = {c}\n")
    return text


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--nodes", type=int, default=100_000)
    parser.add_argument("--tolerance", type=float, default=0.01)
    parser.add_argument("--method", default="auto")
    parser.add_argument("--check", action="store_true")
    parser.add_argument("--between", action="store_true",
                        help="report times by interpolation, steps landing only at the end")
    args = parser.parse_args(argv)

    import numpy as np

    import heat2d
    from heat2d.fem.assembly import assemble
    from heat2d.fem.geometry import build_geometry
    from heat2d.fem.mesh import build_mesh
    from heat2d.fem.solver import solve
    from heat2d.model.timeline import Schedule
    from heat2d.transient import march

    model = heat2d.parse(transient_board(args.nodes), source="board.toml")
    system = assemble(build_mesh(build_geometry(model)))
    n = system.K.shape[0]
    start = time.perf_counter()
    steady = solve(system, method=args.method)
    t_steady = time.perf_counter() - start
    times = 1e-6 * 10 ** (np.arange(0, 81) / 10)
    die = next(s.name for s in model.shapes if s.power)
    start = time.perf_counter()
    on = Schedule(kind="pulse", amplitude=3.0, width=1e9)      # 0 W before t = 0, then 3 W
    hist = march(system, times=times, initial="steady", power={die: on},
                 tolerance=args.tolerance, method=args.method, check=args.check,
                 land_reports=not args.between)
    t_march = time.perf_counter() - start
    s = hist.stats
    print(f"nodes {n}, steady solve {t_steady:.3f} s ({steady.method})")
    print(f"march 1e-6..100 s, {len(times)} report times: {t_march:.3f} s, "
          f"{s['steps']} steps ({s['rejected']} rejected), {s['factorizations']} "
          f"factorizations ({s['solver']}), {s.get('jacobi_rungs', 0)} Jacobi-CG rungs, "
          f"{s.get('back_solves', 0)} back-substitutions, {s.get('cg_iterations', 0)} CG "
          f"iterations")
    if args.check:
        c = s["coarse"]
        print(f"  with the check march: coarse {c['steps']} steps + fine {s['steps']} steps")
    print(f"smallest step {hist.steps.min():.3g} s, largest {hist.steps.max():.3g} s; "
          f"energy balance relative error {hist.energy['relative_error']:.1e}")
    peak = hist.peaks()[die]
    nodes = np.unique(system.mesh.triangles[system.mesh.triangle_shape
                                            == model.shape(die).index])
    print(f"die peak {peak['max']:.4f} °C at {peak['time_s']:.3g} s "
          f"(± {peak['max_error']:.2g} K); steady die max "
          f"{steady.temperature[nodes].max():.4f} °C")
    print(f"ratio march / steady solve: {t_march / t_steady:.1f}")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
