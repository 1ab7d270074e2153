"""A whole transient run and its march against one steady solve of the same mesh.

The board of run_vs_floor.py (about 100 000 nodes by default) with heat capacities
(fr4 1850 kg/m³ · 1100 J/(kg·K), copper 8933 · 385, silicon 2330 · 712, solder 7400 ·
230; handbook values, from memory), the die's 3 W switched on at t = 0 from the
unpowered steady state (found inside the march, so timed with it), reported from 1 µs
to 100 s at 10 times per decade (81 report times). In one run it times
one steady solve (``heat2d.fem.solver.solve``, the fastest of three), the history march alone
(``heat2d.transient.march``, tolerance 0.01 K, report times from the steps' stage states,
with its error estimate)
and the whole ``run_transient`` of the model with that ``[transient]`` section (the
history march with its time-step error estimate (transported in the march's own
factorizations), the die's impedance (read from the history, itself a step of the
die's power), its RC networks and modal check), and prints both ratios with the
steps, factorizations, back-substitutions and CG iterations. ``--land`` lands a step on
every report time instead; ``--no-check`` times the march without its error estimate.

    python benchmarks/transient_vs_steady.py [--nodes 100000] [--tolerance 0.01] [--land]
"""

from __future__ import annotations

import argparse
import sys
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).parent))

CAPACITY = {"fr4": (1850, 1100), "copper": (8933, 385), "silicon": (2330, 712),
            "solder": (7400, 230)}


def transient_board(nodes: int, tolerance: float = 0.01) -> str:
    """The board with heat capacities, the die's 3 W on from t = 0 (0 W before) and a
    ``[transient]`` section: 1 µs to 100 s at 10 report times per decade."""
    from run_vs_floor import board_model, size_for_nodes

    text = board_model(size_for_nodes(nodes))
    for name, (rho, c) in CAPACITY.items():
        head = f"[materials.{name}]\n"
        text = text.replace(head, f"{head}density = {rho}\nspecific_heat = {c}\n")
    text = text.replace("power = 3.0\n", "power_pulse = { power = 3.0, width = 1000 }\n")
    return text + (f"\n[transient]\nend = 100\nfirst = 1e-6\nper_decade = 10\n"
                   f"tolerance = {tolerance}\nsnapshots = [100]\n")


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--nodes", type=int, default=100_000)
    parser.add_argument("--tolerance", type=float, default=0.01)
    parser.add_argument("--method", default="auto")
    parser.add_argument("--land", action="store_true",
                        help="land a step on every report time")
    parser.add_argument("--no-check", action="store_true",
                        help="the history march without its check march")
    args = parser.parse_args(argv)

    import heat2d
    from heat2d.fem.assembly import assemble
    from heat2d.fem.geometry import build_geometry
    from heat2d.fem.mesh import build_mesh
    from heat2d.fem.solver import solve
    from heat2d.transient import march
    from heat2d.transient.run import report_times, run_transient

    model = heat2d.parse(transient_board(args.nodes, args.tolerance), source="board.toml")
    system = assemble(build_mesh(build_geometry(model)))
    n = system.K.shape[0]
    t_steady = float("inf")
    for _ in range(3):          # the fastest of three (the machine may be shared)
        start = time.perf_counter()
        steady = solve(system, method=args.method)
        t_steady = min(t_steady, time.perf_counter() - start)
    print(f"nodes {n}, steady solve {t_steady:.3f} s ({steady.method})")

    times = report_times(system, model.transient)
    die = next(s.name for s in model.shapes if s.schedule is not None)
    start = time.perf_counter()
    hist = march(system, times=times, initial="steady", tolerance=args.tolerance,
                 method=args.method, land_reports=args.land, check=not args.no_check)
    t_march = time.perf_counter() - start
    s = hist.stats
    c = s.get("coarse", s)
    print(f"history march 1e-6..100 s, {len(times)} report times"
          f"{'' if args.no_check else ', with its error estimate'}: {t_march:.3f} s, "
          f"ratio {t_march / t_steady:.1f}")
    for label, st in (("march", c), ("check march", s if "coarse" in s else None)):
        if st is None:
            continue
        print(f"  {label}: {st['steps']} steps ({st['rejected']} rejected), "
              f"{st['factorizations']} factorizations ({st['solver']}; "
              f"+{st.get('landing_factorizations', 0)} of landing steps), "
              f"{st.get('jacobi_rungs', 0)} Jacobi-CG rungs, {st.get('back_solves', 0)} "
              f"back-substitutions, {st.get('cg_iterations', 0)} CG iterations")
    print(f"  smallest step {hist.steps.min():.3g} s, largest {hist.steps.max():.3g} s; "
          f"energy balance relative error {hist.energy['relative_error']:.1e}")
    peak = hist.peaks()[die]
    print(f"  die peak {peak['max']:.4f} °C at {peak['time_s']:.3g} s "
          f"(± {peak['max_error']:.2g} K)")

    start = time.perf_counter()
    result = run_transient(model, method=args.method)
    t_run = time.perf_counter() - start
    tim = result.summary["timings_s"]
    solver = result.summary["transient"]["solver"]
    meshing = sum(tim.get(k, 0.0) for k in ("geometry", "mesh", "assembly"))
    marching = sum(tim.get(k, 0.0) for k in ("march", "impedance", "periodic"))
    print(f"whole run_transient: {t_run:.3f} s, ratio {t_run / t_steady:.1f} "
          f"(march {tim.get('march', 0):.2f} s, impedance {tim.get('impedance', 0):.2f} s, "
          f"meshing and assembly {meshing:.2f} s; "
          f"without meshing: ratio {marching / t_steady:.1f})")
    print(f"  its history march: {solver.get('steps')} steps, "
          f"{solver.get('factorizations')} factorizations, {solver.get('back_solves')} "
          f"back-substitutions; die peak {result.peak(die):.4f} °C")
    print(f"ratio history march / steady solve: {t_march / t_steady:.1f}")
    print(f"ratio whole run / steady solve: {t_run / t_steady:.1f}")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
