"""Whole ``heat2d run`` against the bare floor on the same mesh, in one process.

The model is the 100 × 100 mm orthotropic plate with an aluminium spreader and a
5 W part of profile_run.py (``--model board``: a board cross-section, orthotropic
FR4, four copper layers, a via, a mounting hole, a powered die), its ``[mesh]
size`` chosen for each node count of the sweep.

Measured in the same run, at each node count (default 10k, 30k, 100k, 300k, 1M, 2M):

* whole: ``heat2d.cli.main(["run", MODEL, "--out", DIR, "--quiet"])``, wall
  clock from the model file to the last file written (VTU, summary.json,
  summary.txt, PNG), with heat2d's own stage and writer timings (summary.json
  ``timings_s``), and the peak RSS of the process during it (VmHWM, reset before);
* floor, at 300k and 1M nodes: ``triangle.triangulate`` alone on the same planar
  straight-line graph with the same switches as heat2d/fem/mesh.py, a minimal
  vectorized P1 assembly (orthotropic conduction, source, convection edges,
  Dirichlet elimination), and the fastest of ``spsolve``, ``splu`` (both skipped
  above 500 000 unknowns unless ``--full-floor``), pyamg SA + CG at rtol 1e-10 and,
  where pypardiso is installed, MKL PARDISO (SPD).

Printed: whole / floor at 300k and 1M nodes (targets 1.5 and 1.3), time per node
over the sweep (target: flat within 1.5x) and peak RSS per node at 1M (target
< 1.5 kB).

    python benchmarks/run_vs_floor.py [--model plate] [--nodes 10000,...] [--floor-at N,...]
"""

from __future__ import annotations

import argparse
import os
import resource
import shutil
import sys
import tempfile
import time
from pathlib import Path

BOARD_LENGTH = 30.0
"""Board length in mm; the copper layers set a floor of about 4 700 nodes."""



EXTRA: list[str] = []
"""Extra options for the whole `heat2d run` (set from the command line)."""

def board_model(size: float, *, length: float = BOARD_LENGTH) -> str:
    """A board cross-section in mm with target mesh edge length ``size``."""
    half = length / 2
    return f"""\
[model]
title = "benchmark board"
length_unit = "mm"
depth = 20

[materials.fr4]
kx = 0.8
ky = 0.35
[materials.copper]
k = 390
[materials.silicon]
k = 148
[materials.solder]
k = 50

[[shape]]
name = "board"
material = "fr4"
rect = {{ x = 0, y = 0, width = {length}, height = 1.6 }}

[[shape]]
name = "bottom_cu"
material = "copper"
rect = {{ x = 0, y = 0, width = {length}, height = 0.07 }}

[[shape]]
name = "gnd_plane"
material = "copper"
rect = {{ x = 0, y = 0.5, width = {length}, height = 0.07 }}

[[shape]]
name = "pwr_plane"
material = "copper"
rect = {{ x = 0, y = 1.03, width = {0.75 * length}, height = 0.07 }}

[[shape]]
name = "top_cu"
material = "copper"
rect = {{ x = 0, y = 1.53, width = {half + 4}, height = 0.07 }}

[[shape]]
name = "via"
material = "copper"
rect = {{ x = {half + 1.5}, y = 0, width = 0.3, height = 1.6 }}

[[shape]]
name = "mount_hole"
void = true
circle = {{ x = {0.8 * length}, y = 0.8, r = 0.4 }}

[[shape]]
name = "solder"
material = "solder"
rect = {{ x = {half}, y = 1.6, width = 4, height = 0.05 }}

[[shape]]
name = "die"
material = "silicon"
rect = {{ x = {half + 0.5}, y = 1.65, width = 3, height = 0.4 }}
power = 3.0

[[boundary]]
name = "rail"
on = "board.left"
temperature = 40

[[boundary]]
name = "air"
on = "exterior"
h = 12
ambient = 25

[[probe]]
name = "junction"
at = [{half + 2}, 1.9]

[mesh]
size = {size:.6g}
"""


def count_nodes(size: float, **kwargs) -> int:
    import heat2d
    from heat2d.fem.geometry import build_geometry
    from heat2d.fem.mesh import build_mesh

    return len(build_mesh(build_geometry(heat2d.parse(board_model(size, **kwargs)))).points)


def size_for_nodes(nodes: int, *, pilot_limit: int = 60_000, **kwargs) -> float:
    """Mesh size giving about ``nodes`` nodes.

    Secant steps on log(nodes) against log(size), meshing pilots of at most
    ``pilot_limit`` nodes; beyond that the last local slope is extrapolated.
    """
    import math

    s1, s2 = 0.2, 0.1
    n1, n2 = count_nodes(s1, **kwargs), count_nodes(s2, **kwargs)
    for _ in range(8):
        slope = math.log(n2 / n1) / math.log(s1 / s2)
        s3 = s2 * (n2 / min(nodes, pilot_limit)) ** (1 / max(slope, 0.5))
        if nodes > pilot_limit and n2 > 0.9 * pilot_limit:
            return s2 * (n2 / nodes) ** (1 / max(slope, 0.5))
        n3 = count_nodes(s3, **kwargs)
        s1, n1, s2, n2 = s2, n2, s3, n3
        if nodes <= pilot_limit and abs(n3 - nodes) < 0.02 * nodes:
            break
    return s2


def blas_info() -> str:
    for name in ("OPENBLAS_NUM_THREADS", "OMP_NUM_THREADS", "MKL_NUM_THREADS"):
        if name in os.environ:
            return f"{name}={os.environ[name]}"
    return "BLAS threads: library default"


def peak_rss_mb() -> float:
    return resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024


# ---------------------------------------------------------------------------- whole run

def whole_run(model_path: Path, out_dir: Path, method: str = "auto") -> dict:
    """Time ``heat2d run`` in-process; heat2d's own stage and writer times from its
    summary.json."""
    import json

    import heat2d.cli

    start, cpu = time.perf_counter(), time.process_time()
    argv = ["run", str(model_path), "--out", str(out_dir), "--quiet", *EXTRA]
    status = heat2d.cli.main(argv + ([] if method == "auto" else ["--method", method]))
    whole = time.perf_counter() - start
    cpu = time.process_time() - cpu
    if status != 0:
        raise SystemExit(f"heat2d run exited with status {status}")
    summary = json.loads((out_dir / "summary.json").read_text(encoding="utf-8"))
    return {"whole": whole, "cpu": cpu, "stages": summary["timings_s"],
            "nodes": summary["mesh"]["nodes"], "triangles": summary["mesh"]["triangles"],
            "t_max": summary["temperature"]["max"], "solver": summary["solver"]}


# ---------------------------------------------------------------------------- floor

def floor_mesh(geometry):
    """``triangle.triangulate`` on heat2d's graph with heat2d's switches and area bounds."""
    import numpy as np
    import triangle

    from heat2d.fem.mesh import EQUILATERAL_AREA

    regions = geometry.seeds.copy()
    regions[:, 2] = np.arange(len(regions))
    regions[:, 3] = EQUILATERAL_AREA * regions[:, 3] ** 2
    data = {"vertices": geometry.vertices, "segments": geometry.segments,
            "segment_markers": (np.arange(len(geometry.segments)) + 2)[:, None],
            "regions": regions}
    if len(geometry.holes):
        data["holes"] = geometry.holes
    return triangle.triangulate(data, f"pq{geometry.model.mesh.min_angle:g}aAQ")


def floor_assemble(geometry, out):
    """Minimal P1 assembly: orthotropic K, source, convection edges, Dirichlet elimination.

    Returns the reduced SPD system (A, b) and what is needed to rebuild T.
    """
    import numpy as np
    import scipy.sparse as sp

    model = geometry.model
    s, depth = model.unit_m, model.depth_m
    pts = out["vertices"]
    tri = out["triangles"]
    n = len(pts)
    face = out["triangle_attributes"][:, 0].astype(np.int64)
    shape = geometry.seeds[:, 2].astype(np.int64)[face]
    mats = {m.name: m for m in model.materials}
    kx = np.array([mats[sh.material].kx if sh.material else 0.0 for sh in model.shapes])[shape]
    ky = np.array([mats[sh.material].ky if sh.material else 0.0 for sh in model.shapes])[shape]

    x, y = pts[tri, 0], pts[tri, 1]
    b = np.stack([y[:, 1] - y[:, 2], y[:, 2] - y[:, 0], y[:, 0] - y[:, 1]], axis=1)
    c = np.stack([x[:, 2] - x[:, 1], x[:, 0] - x[:, 2], x[:, 1] - x[:, 0]], axis=1)
    area2 = b[:, 0] * c[:, 1] - b[:, 1] * c[:, 0]          # signed 2A
    w = depth / (2 * np.abs(area2))
    ke = ((kx * w)[:, None, None] * b[:, :, None] * b[:, None, :]
          + (ky * w)[:, None, None] * c[:, :, None] * c[:, None, :])
    rows = [np.repeat(tri, 3, axis=1).ravel()]
    cols = [np.tile(tri, 3).ravel()]
    vals = [ke.ravel()]

    area_m2 = 0.5 * np.abs(area2) * s * s
    q_shape = np.zeros(len(model.shapes))
    shape_area = np.bincount(shape, area_m2, minlength=len(model.shapes))
    for i, sh in enumerate(model.shapes):
        if sh.power is not None and shape_area[i] > 0:
            q_shape[i] = sh.power / (shape_area[i] * depth)
        elif sh.power_density is not None:
            q_shape[i] = sh.power_density
    F = np.bincount(tri.ravel(), np.repeat(q_shape[shape] * area_m2 * depth / 3, 3),
                    minlength=n)

    seg = out["segments"]
    owner = geometry.segment_boundary[out["segment_markers"].ravel() - 2]
    seg, owner = seg[owner >= 0], owner[owner >= 0]
    bcs = model.boundaries
    d = pts[seg[:, 1]] - pts[seg[:, 0]]
    surface = np.hypot(d[:, 0], d[:, 1]) * s * depth
    h = np.array([bc.h or 0.0 for bc in bcs])[owner]
    amb = np.array([bc.ambient or 0.0 for bc in bcs])[owner]
    flux = np.array([bc.heat_flux or 0.0 for bc in bcs])[owner]
    hl = h * surface
    rows += [seg[:, 0], seg[:, 1], seg[:, 0], seg[:, 1]]
    cols += [seg[:, 0], seg[:, 1], seg[:, 1], seg[:, 0]]
    vals += [hl / 3, hl / 3, hl / 6, hl / 6]
    F += np.bincount(seg.ravel(), np.repeat((hl * amb + flux * surface) / 2, 2), minlength=n)
    K = sp.coo_matrix((np.concatenate(vals), (np.concatenate(rows), np.concatenate(cols))),
                      shape=(n, n)).tocsr()

    fixed_t = np.array([bc.temperature if bc.temperature is not None else np.nan
                        for bc in bcs])[owner]
    held = np.flatnonzero(~np.isnan(fixed_t))
    held = held[np.argsort(-owner[held], kind="stable")]      # first entry in the file wins
    T = np.full(n, np.nan)
    T[seg[held].ravel()] = np.repeat(fixed_t[held], 2)
    fixed = ~np.isnan(T)
    free = ~fixed
    Kf = K[free]
    A = Kf[:, free]
    rhs = F[free] - Kf[:, fixed] @ T[fixed]
    return A, rhs, T, free


def floor_solvers():
    import pyamg
    import scipy.sparse.linalg as spla

    def spsolve(A, b):
        return spla.spsolve(A.tocsc(), b)

    def splu_sym(A, b):
        lu = spla.splu(A.tocsc(), permc_spec="MMD_AT_PLUS_A", diag_pivot_thresh=0.0,
                       options={"SymmetricMode": True})
        return lu.solve(b)

    def amg_cg(A, b):
        ml = pyamg.smoothed_aggregation_solver(A, symmetry="symmetric")
        return ml.solve(b, tol=1e-10, accel="cg", maxiter=500)

    solvers = {"spsolve": spsolve, "splu_mmd_sym": splu_sym, "pyamg_sa_cg": amg_cg}
    try:
        import pypardiso
        import scipy.sparse as sp

        def pardiso_spd(A, b):
            solver = pypardiso.PyPardisoSolver(mtype=2)
            upper = sp.triu(A, format="csr")
            x = solver.solve(upper, b)
            solver.free_memory(everything=True)
            return x

        solvers["pardiso_spd"] = pardiso_spd
    except ImportError:
        pass
    return solvers


def floor_run(geometry) -> dict:
    import numpy as np

    cpu = {}
    start, c0 = time.perf_counter(), time.process_time()
    out = floor_mesh(geometry)
    t_mesh = time.perf_counter() - start
    cpu["mesh"] = time.process_time() - c0
    start, c0 = time.perf_counter(), time.process_time()
    A, b, T, free = floor_assemble(geometry, out)
    t_asm = time.perf_counter() - start
    cpu["assembly"] = time.process_time() - c0
    solves, residual, solutions = {}, {}, {}
    for name, func in floor_solvers().items():
        if name.startswith(("spsolve", "splu")) and A.shape[0] > SUPERLU_FLOOR_LIMIT \
                and not FULL_FLOOR[0]:
            continue
        start, c0 = time.perf_counter(), time.process_time()
        x = solutions[name] = func(A, b)
        solves[name] = time.perf_counter() - start
        cpu[name] = time.process_time() - c0
        residual[name] = float(np.linalg.norm(b - A @ x) / np.linalg.norm(b))
    best = min(solves, key=solves.get)
    T[free] = solutions[best]
    return {"mesh": t_mesh, "assembly": t_asm, "solves": solves, "residual": residual, "cpu": cpu,
            "best": best, "nodes": len(out["vertices"]), "t_max": float(T.max())}


# ---------------------------------------------------------------------------- main

SWEEP_NODES = (10_000, 30_000, 100_000, 300_000, 1_000_000, 2_000_000)
"""Node counts of the time-per-node sweep; the floor is measured at FLOOR_NODES."""
FLOOR_NODES = {300_000: 1.5, 1_000_000: 1.3}
"""Node counts where whole / floor is measured, with the target ratio at each."""
RSS_NODES, RSS_TARGET_KB = 1_000_000, 1.5
FLAT_TARGET = 1.5
SUPERLU_FLOOR_LIMIT = 500_000
"""Above this many unknowns the floor skips SuperLU (measured 3-5x slower than pyamg and
PARDISO there, benchmarks/solver_threshold.py) unless --full-floor."""


def hwm_mb() -> float:
    with open("/proc/self/status", encoding="ascii") as f:
        for line in f:
            if line.startswith("VmHWM"):
                return int(line.split()[1]) / 1024
    return peak_rss_mb()


def reset_peak() -> None:
    try:
        with open("/proc/self/clear_refs", "w", encoding="ascii") as f:
            f.write("5")
    except OSError:
        pass


def model_text(model: str, nodes: int) -> str:
    if model == "plate":
        from profile_run import plate_model, plate_size_for

        return plate_model(plate_size_for(nodes))
    return board_model(size_for_nodes(nodes))


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--model", default="plate", choices=("plate", "board"),
                        help="the 100 mm orthotropic plate (profile_run.py) or the board")
    parser.add_argument("--nodes", default=",".join(str(n) for n in SWEEP_NODES),
                        help="comma-separated node counts of the time-per-node sweep")
    parser.add_argument("--floor-at", default=",".join(str(n) for n in FLOOR_NODES),
                        help="node counts (of --nodes) where the floor is measured too")
    parser.add_argument("--no-estimate", action="store_true",
                        help="pass --no-estimate to heat2d run")
    parser.add_argument("--method", default="auto", choices=("auto", "direct", "multigrid"),
                        help="solver passed to heat2d run (default: its own choice)")
    parser.add_argument("--full-floor", action="store_true",
                        help="time every floor solver at every size")
    parser.add_argument("--blas-threads", type=int, metavar="N",
                        help="set OPENBLAS/OMP/MKL_NUM_THREADS=N before numpy is loaded")
    args = parser.parse_args(argv)
    EXTRA[:] = ["--no-estimate"] if args.no_estimate else []
    if args.blas_threads is not None:
        if "numpy" in sys.modules:
            parser.error("--blas-threads must be applied before numpy is imported")
        for name in ("OPENBLAS_NUM_THREADS", "OMP_NUM_THREADS", "MKL_NUM_THREADS"):
            os.environ[name] = str(args.blas_threads)
    sys.path.insert(0, str(Path(__file__).resolve().parent))
    FULL_FLOOR[0] = args.full_floor

    t0 = time.perf_counter()
    import numpy  # noqa: F401
    import pyamg  # noqa: F401
    import scipy.sparse.linalg  # noqa: F401
    import triangle  # noqa: F401

    import heat2d
    import heat2d.cli  # noqa: F401
    from heat2d.fem.geometry import build_geometry
    from heat2d.fem.solver import pardiso_available
    t_core = time.perf_counter() - t0
    t0 = time.perf_counter()
    import matplotlib.figure  # noqa: F401
    import matplotlib.tri  # noqa: F401
    import meshio  # noqa: F401
    t_writer_imports = time.perf_counter() - t0

    print(f"machine: {os.cpu_count()} cores, load average "
          f"{', '.join(f'{v:.2f}' for v in os.getloadavg())}; {blas_info()}; "
          f"PARDISO {'available' if pardiso_available() else 'not installed'}")
    print(f"imports (excluded from both sides): numpy/scipy/pyamg/triangle/heat2d "
          f"{t_core:.2f} s, meshio+matplotlib {t_writer_imports:.2f} s; model {args.model}")
    sweep = [int(n) for n in args.nodes.split(",") if n.strip()]
    floor_at = {int(n) for n in args.floor_at.split(",") if n.strip()}
    rows = []
    with tempfile.TemporaryDirectory(prefix="heat2d-bench-") as tmp:
        for target in sweep:
            model_path = Path(tmp) / f"{args.model}.toml"
            model_path.write_text(model_text(args.model, target), encoding="utf-8")
            reset_peak()
            whole = whole_run(model_path, Path(tmp) / f"out{target}", args.method)
            whole["peak_mb"] = hwm_mb()
            row = {"target": target, "whole": whole, "floor": None}
            if target in floor_at:
                geometry = build_geometry(heat2d.load(model_path))
                floor = floor_run(geometry)
                floor["total"] = floor["mesh"] + floor["assembly"] + floor["solves"][floor["best"]]
                row["floor"] = floor
                del geometry
            rows.append(row)
            report(row)
            shutil.rmtree(Path(tmp) / f"out{target}", ignore_errors=True)
    summarize(rows)
    return 0


FULL_FLOOR = [False]


def report(row: dict) -> None:
    w, f = row["whole"], row["floor"]
    stages = w["stages"]
    staged = sum(stages.values())
    print(f"\n--- {w['nodes']} nodes, {w['triangles']} triangles: whole run {w['whole']:.2f} s "
          f"({1e6 * w['whole'] / w['nodes']:.1f} us/node), peak RSS {w['peak_mb']:.0f} MB "
          f"({w['peak_mb'] * 1024 / w['nodes']:.2f} kB/node); solver {w['solver']['method']} "
          f"({w['solver']['iterations']} iterations)")
    print("  stages: " + ", ".join(f"{k} {v:.2f}" for k, v in stages.items()))
    print(f"  timings_s sum {staged:.2f} s; not covered (model load, CLI, folder swap) "
          f"{w['whole'] - staged:.2f} s")
    if f is None:
        return
    print(f"  floor {f['total']:.2f} s: triangulate {f['mesh']:.2f}, P1 assembly "
          f"{f['assembly']:.2f}, " + ", ".join(
              f"{k} {t:.2f}{' (best)' if k == f['best'] else ''}"
              for k, t in f["solves"].items()))
    print(f"  max temperature heat2d {w['t_max']:.6f} degC, floor {f['t_max']:.6f} degC")
    print(f"  ratio whole / floor = {w['whole'] / f['total']:.2f}")


def summarize(rows: list[dict]) -> None:
    print("\n=== summary")
    print(f"{'nodes':>9} {'whole s':>8} {'us/node':>8} {'peak MB':>8} {'kB/node':>8} "
          f"{'floor s':>8} {'ratio':>6} {'target':>6}")
    for row in rows:
        w, f = row["whole"], row["floor"]
        target = FLOOR_NODES.get(row["target"])
        ratio = w["whole"] / f["total"] if f else None
        print(f"{w['nodes']:>9} {w['whole']:>8.2f} {1e6 * w['whole'] / w['nodes']:>8.1f} "
              f"{w['peak_mb']:>8.0f} {w['peak_mb'] * 1024 / w['nodes']:>8.2f} "
              + (f"{f['total']:>8.2f} {ratio:>6.2f} " if f else f"{'':>8} {'':>6} ")
              + (f"{target:>6.1f}" if target and f else ""))
    per_node = [r["whole"]["whole"] / r["whole"]["nodes"] for r in rows]
    if per_node:
        spread = max(per_node) / min(per_node)
        print(f"time per node: max / min = {spread:.2f} over {rows[0]['whole']['nodes']} to "
              f"{rows[-1]['whole']['nodes']} nodes (target <= {FLAT_TARGET})")
        big = [r for r in rows if r["whole"]["nodes"] >= 90_000]
        if big:
            pb = [r["whole"]["whole"] / r["whole"]["nodes"] for r in big]
            print(f"  from {big[0]['whole']['nodes']} nodes on: max / min = "
                  f"{max(pb) / min(pb):.2f}")
    at = [r for r in rows if r["target"] == RSS_NODES]
    if at:
        w = at[0]["whole"]
        print(f"peak RSS at {w['nodes']} nodes: {w['peak_mb'] * 1024 / w['nodes']:.2f} kB/node "
              f"(target < {RSS_TARGET_KB})")


if __name__ == "__main__":
    sys.exit(main())
