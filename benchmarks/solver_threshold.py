"""Direct against multigrid solve time over node count: where should ``auto`` switch?

For each node count the board model of run_vs_floor.py (or, with ``--model
plate``, the plate of profile_run.py) is meshed and assembled through heat2d's
own stages (build_geometry, build_mesh, assemble; not timed), then
``heat2d.fem.solver.solve(system, method=...)`` is timed for ``direct`` with
SuperLU, ``direct`` with MKL PARDISO (where pypardiso is installed) and
``multigrid`` (pyamg SA + CG). A run also reuses the solve's factor once per powered shape (the
°C/W matrix of the results stage), so the time of one extra right-hand side
(unit power in the die, homogeneous boundary values) is timed too.

The crossover is the smallest node count from which multigrid stays faster than
SuperLU; compare it with ``heat2d.fem.solver.AUTO_DIRECT_LIMIT``. The last
column is what ``auto`` picks (``heat2d.fem.solver.choose_method``).

    python benchmarks/solver_threshold.py [--nodes 5000,10000,...] [--repeat 1] [--blas-threads N]
"""

from __future__ import annotations

import argparse
import os
import sys
import time
from pathlib import Path

DEFAULT_NODES = (5_000, 10_000, 20_000, 40_000, 80_000, 160_000, 320_000)
METHODS = ("superlu", "pardiso", "multigrid")


def build_system(nodes: int, model_name: str = "board"):
    import heat2d
    from heat2d.fem.assembly import assemble
    from heat2d.fem.geometry import build_geometry
    from heat2d.fem.mesh import build_mesh

    if model_name == "plate":
        from profile_run import plate_model, plate_size_for

        text = plate_model(plate_size_for(nodes))
    else:
        from run_vs_floor import board_model, size_for_nodes

        text = board_model(size_for_nodes(nodes))
    model = heat2d.parse(text, source=f"{model_name}.toml")
    return assemble(build_mesh(build_geometry(model)))


def unit_power_rhs(system, free):
    """Reduced load of 1 W spread over the die, zero boundary values."""
    import numpy as np

    mesh = system.mesh
    die = next(s.index for s in mesh.model.shapes if s.power)
    p = mesh.points[mesh.triangles]
    d1, d2 = p[:, 1] - p[:, 0], p[:, 2] - p[:, 0]
    area = 0.5 * np.abs(d1[:, 0] * d2[:, 1] - d1[:, 1] * d2[:, 0])
    w = np.where(mesh.triangle_shape == die, area, 0.0)
    f = np.bincount(mesh.triangles.ravel(), np.repeat(w / (3 * w.sum()), 3),
                    minlength=len(mesh.points))
    return f[free]


def time_method(system, method: str, repeat: int) -> dict:
    import numpy as np

    from heat2d.fem import solver
    from heat2d.fem.solver import solve, use_pardiso

    best = None
    limit = solver.PARDISO_ABOVE
    for _ in range(repeat):
        use_pardiso(method == "pardiso")
        solver.PARDISO_ABOVE = 0            # the column's back-end at every size
        start = time.perf_counter()
        sol = solve(system, method="multigrid" if method == "multigrid" else "direct")
        t_solve = time.perf_counter() - start
        free = sol.free
        if free is None:
            free = np.ones(len(sol.temperature), dtype=bool)
            free[system.fixed] = False
        extra = {"t": float("nan"), "iterations": 0, "residual": float("nan")}
        if sol.factor is not None:
            b = unit_power_rhs(system, free)
            start = time.perf_counter()
            x = sol.factor(b)
            extra["t"] = time.perf_counter() - start
            extra["iterations"] = getattr(sol.factor, "iterations", 0)
            A = system.K.tocsr()[free][:, free]
            extra["residual"] = float(np.linalg.norm(b - A @ x) / np.linalg.norm(b))
        solver.PARDISO_ABOVE = limit
        row = {"t": t_solve, "method": sol.method, "iterations": sol.iterations,
               "residual": sol.residual, "extra": extra}
        del sol
        if best is None or row["t"] < best["t"]:
            best = row
    return best


def crossover(rows: list[dict], key, direct: str = "superlu") -> int | None:
    """Smallest unknown count from which multigrid is faster at every larger size."""
    found = None
    for row in reversed(rows):
        if key(row, "multigrid") < key(row, direct):
            found = row["unknowns"]
        else:
            break
    return found


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--nodes", default=",".join(str(n) for n in DEFAULT_NODES),
                        help="comma-separated target node counts")
    parser.add_argument("--repeat", type=int, default=1, help="repeats; the minimum is kept")
    parser.add_argument("--model", default="board", choices=("board", "plate"),
                        help="board cross-section (run_vs_floor.py) or plate (profile_run.py)")
    parser.add_argument("--blas-threads", type=int, metavar="N",
                        help="set OPENBLAS/OMP/MKL_NUM_THREADS=N before numpy is loaded")
    args = parser.parse_args(argv)
    if args.blas_threads is not None:
        for name in ("OPENBLAS_NUM_THREADS", "OMP_NUM_THREADS", "MKL_NUM_THREADS"):
            os.environ[name] = str(args.blas_threads)
    sys.path.insert(0, str(Path(__file__).resolve().parent))

    import pyamg  # noqa: F401
    import scipy.sparse.linalg  # noqa: F401
    from run_vs_floor import blas_info, peak_rss_mb

    from heat2d.fem.solver import AUTO_DIRECT_LIMIT, choose_method, pardiso_available

    methods = [m for m in METHODS if m != "pardiso" or pardiso_available()]
    targets = [int(n) for n in args.nodes.split(",") if n.strip()]
    print(f"machine: {os.cpu_count()} cores, load average "
          f"{', '.join(f'{v:.2f}' for v in os.getloadavg())}; {blas_info()}; model {args.model}")
    print(f"AUTO_DIRECT_LIMIT = {AUTO_DIRECT_LIMIT} unknowns; PARDISO "
          f"{'available' if 'pardiso' in methods else 'not installed'}; "
          f"times in s (solve, then one extra right-hand side), min of {args.repeat}")
    header = f"{'nodes':>8} {'unknowns':>9} |" + "".join(
        f" {m:>9} {'+rhs':>6} |" for m in methods) + f" {'CG it':>5} {'mg/slu':>6} | auto"
    print(header)
    print("-" * len(header))
    rows = []
    for target in targets:
        system = build_system(target, args.model)
        n = system.K.shape[0]
        row = {"nodes": n, "unknowns": n - len(system.fixed)}
        for method in methods:
            row[method] = time_method(system, method, args.repeat)
        m = row["multigrid"]
        ratio_rhs = (m["t"] + m["extra"]["t"]) / (row["superlu"]["t"]
                                                  + row["superlu"]["extra"]["t"])
        flag = "" if m["extra"]["residual"] <= 1e-8 else (
            f"  (multigrid extra rhs residual {m['extra']['residual']:.1e})")
        print(f"{n:>8} {row['unknowns']:>9} |" + "".join(
            f" {row[k]['t']:>9.2f} {row[k]['extra']['t']:>6.2f} |" for k in methods)
            + f" {m['iterations']:>5} {ratio_rhs:>6.2f} | {choose_method(row['unknowns'])}"
            + flag, flush=True)
        rows.append(row)
        del system

    with_rhs = crossover(rows, lambda r, k: r[k]["t"] + r[k]["extra"]["t"])
    largest = rows[-1]["unknowns"] if rows else 0

    def say(value, direct="SuperLU"):
        return (f"multigrid faster from about {value} unknowns" if value is not None
                else f"{direct} faster up to the largest size measured ({largest} unknowns)")

    print(f"\ncrossover SuperLU / multigrid, solve + one extra rhs: {say(with_rhs)}")
    if "pardiso" in methods:
        pardiso = crossover(rows, lambda r, k: r[k]["t"] + r[k]["extra"]["t"], "pardiso")
        print(f"crossover PARDISO / multigrid, solve + one extra rhs: "
              f"{say(pardiso, 'PARDISO')}")
    print(f"heat2d.fem.solver.AUTO_DIRECT_LIMIT: {AUTO_DIRECT_LIMIT} unknowns")
    print(f"peak RSS {peak_rss_mb():.0f} MB")
    return 0


if __name__ == "__main__":
    sys.exit(main())
