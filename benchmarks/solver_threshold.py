"""Direct against multigrid solve time over node count: where should ``auto`` switch?

For each node count the board model of run_vs_floor.py is meshed and assembled
through heat2d's own stages (build_geometry, build_mesh, assemble; not timed),
then ``heat2d.fem.solver.solve(system, method=...)`` is timed for ``direct`` and
``multigrid``. A run also reuses the solve's factor once per powered shape (the
°C/W matrix of the results stage), so the time of one extra right-hand side
(unit power in the die, homogeneous boundary values) is timed too.

The crossover is the smallest node count from which multigrid stays faster;
compare it with ``heat2d.fem.solver.AUTO_DIRECT_LIMIT``.

    python benchmarks/solver_threshold.py [--nodes 5000,10000,...] [--repeat 1] [--blas-threads N]
"""

from __future__ import annotations

import argparse
import os
import sys
import time
from pathlib import Path

DEFAULT_NODES = (5_000, 10_000, 20_000, 40_000, 80_000, 160_000, 320_000)
METHODS = ("direct", "multigrid")


def build_system(nodes: int):
    from run_vs_floor import board_model, size_for_nodes

    import heat2d
    from heat2d.fem.assembly import assemble
    from heat2d.fem.geometry import build_geometry
    from heat2d.fem.mesh import build_mesh

    model = heat2d.parse(board_model(size_for_nodes(nodes)), source="board.toml")
    return assemble(build_mesh(build_geometry(model)))


def unit_power_rhs(system, free):
    """Reduced load of 1 W spread over the die, zero boundary values."""
    import numpy as np

    mesh = system.mesh
    die = next(s.index for s in mesh.model.shapes if s.name == "die")
    p = mesh.points[mesh.triangles]
    d1, d2 = p[:, 1] - p[:, 0], p[:, 2] - p[:, 0]
    area = 0.5 * np.abs(d1[:, 0] * d2[:, 1] - d1[:, 1] * d2[:, 0])
    w = np.where(mesh.triangle_shape == die, area, 0.0)
    f = np.bincount(mesh.triangles.ravel(), np.repeat(w / (3 * w.sum()), 3),
                    minlength=len(mesh.points))
    return f[free]


def time_method(system, method: str, repeat: int) -> dict:
    import numpy as np

    from heat2d.fem.solver import solve

    best = None
    for _ in range(repeat):
        start = time.perf_counter()
        sol = solve(system, method=method)
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
        row = {"t": t_solve, "method": sol.method, "iterations": sol.iterations,
               "residual": sol.residual, "extra": extra}
        if best is None or row["t"] < best["t"]:
            best = row
    return best


def crossover(rows: list[dict], key) -> int | None:
    """Smallest unknown count from which multigrid is faster at every larger size."""
    found = None
    for row in reversed(rows):
        if key(row, "multigrid") < key(row, "direct"):
            found = row["unknowns"]
        else:
            break
    return found


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--nodes", default=",".join(str(n) for n in DEFAULT_NODES),
                        help="comma-separated target node counts")
    parser.add_argument("--repeat", type=int, default=1, help="repeats; the minimum is kept")
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

    from heat2d.fem.solver import AUTO_DIRECT_LIMIT

    targets = [int(n) for n in args.nodes.split(",") if n.strip()]
    print(f"machine: {os.cpu_count()} cores, load average "
          f"{', '.join(f'{v:.2f}' for v in os.getloadavg())}; {blas_info()}")
    print(f"AUTO_DIRECT_LIMIT = {AUTO_DIRECT_LIMIT} unknowns; times in s, min of {args.repeat}")
    header = (f"{'nodes':>8} {'unknowns':>9} | {'direct':>7} {'+rhs':>6} | {'multigrid':>9} "
              f"{'iters':>5} {'+rhs':>6} {'iters':>5} | {'mg/direct':>9} {'with rhs':>8}")
    print(header)
    print("-" * len(header))
    rows = []
    for target in targets:
        system = build_system(target)
        n = system.K.shape[0]
        row = {"nodes": n, "unknowns": n - len(system.fixed)}
        for method in METHODS:
            row[method] = time_method(system, method, args.repeat)
        d, m = row["direct"], row["multigrid"]
        ratio = m["t"] / d["t"]
        ratio_rhs = (m["t"] + m["extra"]["t"]) / (d["t"] + d["extra"]["t"])
        flag = "" if m["extra"]["residual"] <= 1e-8 else (
            f"  (multigrid extra rhs residual {m['extra']['residual']:.1e})")
        print(f"{n:>8} {row['unknowns']:>9} | {d['t']:>7.2f} {d['extra']['t']:>6.2f} | "
              f"{m['t']:>9.2f} {m['iterations']:>5} {m['extra']['t']:>6.2f} "
              f"{m['extra']['iterations']:>5} | {ratio:>9.2f} {ratio_rhs:>8.2f}{flag}", flush=True)
        rows.append(row)
        del system

    solve_only = crossover(rows, lambda r, k: r[k]["t"])
    with_rhs = crossover(rows, lambda r, k: r[k]["t"] + r[k]["extra"]["t"])
    largest = rows[-1]["unknowns"] if rows else 0

    def say(value):
        return (f"multigrid faster from about {value} unknowns" if value is not None
                else f"direct faster up to the largest size measured ({largest} unknowns)")

    print(f"\ncrossover, solve only:              {say(solve_only)}")
    print(f"crossover, solve + one extra rhs:   {say(with_rhs)}")
    print(f"heat2d.fem.solver.AUTO_DIRECT_LIMIT:    {AUTO_DIRECT_LIMIT} unknowns")
    print(f"peak RSS {peak_rss_mb():.0f} MB")
    return 0


if __name__ == "__main__":
    sys.exit(main())
