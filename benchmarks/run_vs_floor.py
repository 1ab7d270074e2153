"""Whole ``heat2d run`` against the bare floor on the same mesh, in one process.

The model is a board cross-section (orthotropic FR4, four copper layers, a
thermal via, a mounting hole, a powered die on solder, a fixed-temperature end
and convection everywhere else) whose ``[mesh] size`` is chosen for about
``--nodes`` mesh nodes.

Measured in the same run:

* whole: ``heat2d.cli.main(["run", MODEL, "--out", DIR, "--quiet"])``, wall
  clock from the model file to the last file written (VTU, summary.json,
  summary.txt, PNG), with heat2d's own stage timings and each writer's time;
* floor: ``triangle.triangulate`` alone on the same planar straight-line graph
  with the same switches as heat2d/fem/mesh.py, a minimal vectorized P1 assembly
  (orthotropic conduction, source, convection edges, Dirichlet elimination),
  and the fastest of ``spsolve``, ``splu`` and pyamg SA + CG at rtol 1e-10.

The figure of merit is whole / floor (target: at most 2.0).

    python benchmarks/run_vs_floor.py [--nodes 200000] [--repeat 1] [--blas-threads N]
"""

from __future__ import annotations

import argparse
import os
import resource
import sys
import tempfile
import time
from pathlib import Path

TARGET_RATIO = 2.0
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
    """Time ``heat2d run`` in-process; record each writer's time on the side."""
    import json

    import heat2d.cli
    import heat2d.post.writers as writers

    writer_times: dict[str, float] = {}
    original = dict(writers.WRITERS)

    def timed(name, func):
        def wrapper(result, path, *args, **kwargs):
            start = time.perf_counter()
            func(result, path, *args, **kwargs)
            writer_times[name] = time.perf_counter() - start
        return wrapper

    for name, (pattern, func) in original.items():
        writers.WRITERS[name] = (pattern, timed(name, func))
    try:
        start, cpu = time.perf_counter(), time.process_time()
        argv = ["run", str(model_path), "--out", str(out_dir), "--quiet", *EXTRA]
        status = heat2d.cli.main(argv + ([] if method == "auto" else ["--method", method]))
        whole = time.perf_counter() - start
        cpu = time.process_time() - cpu
    finally:
        writers.WRITERS.update(original)
    if status != 0:
        raise SystemExit(f"heat2d run exited with status {status}")
    summary = json.loads((out_dir / "summary.json").read_text(encoding="utf-8"))
    return {"whole": whole, "cpu": cpu, "stages": summary["timings_s"], "writers": writer_times,
            "nodes": summary["mesh"]["nodes"], "triangles": summary["mesh"]["triangles"],
            "t_max": summary["temperature"]["max"], "solver": summary["solver"],
            "probe": summary["probes"].get("junction")}


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

    return {"spsolve": spsolve, "splu_mmd_sym": splu_sym, "pyamg_sa_cg": amg_cg}


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

def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--nodes", type=int, default=200_000, help="target node count")
    parser.add_argument("--repeat", type=int, default=1, help="repeats; the minimum is kept")
    parser.add_argument("--no-estimate", action="store_true",
                        help="pass --no-estimate to heat2d run (the run without the "
                             "discretization error estimate)")
    parser.add_argument("--method", default="auto", choices=("auto", "direct", "multigrid"),
                        help="solver passed to heat2d run (default: its own choice)")
    parser.add_argument("--blas-threads", type=int, metavar="N",
                        help="set OPENBLAS/OMP/MKL_NUM_THREADS=N before numpy is loaded")
    args = parser.parse_args(argv)
    EXTRA[:] = ["--no-estimate"] if args.no_estimate else []
    if args.blas_threads is not None:
        if "numpy" in sys.modules:
            parser.error("--blas-threads must be applied before numpy is imported")
        for name in ("OPENBLAS_NUM_THREADS", "OMP_NUM_THREADS", "MKL_NUM_THREADS"):
            os.environ[name] = str(args.blas_threads)

    t0 = time.perf_counter()
    import numpy  # noqa: F401
    import pyamg  # noqa: F401
    import scipy.sparse.linalg  # noqa: F401
    import triangle  # noqa: F401

    import heat2d
    import heat2d.cli  # noqa: F401
    from heat2d.fem.geometry import build_geometry
    t_core = time.perf_counter() - t0
    t0 = time.perf_counter()
    import matplotlib.figure  # noqa: F401
    import matplotlib.tri  # noqa: F401
    import meshio  # noqa: F401
    t_writer_imports = time.perf_counter() - t0

    print(f"machine: {os.cpu_count()} cores, load average "
          f"{', '.join(f'{v:.2f}' for v in os.getloadavg())}; {blas_info()}")
    print(f"imports (excluded from both sides): numpy/scipy/pyamg/triangle/heat2d "
          f"{t_core:.2f} s, meshio+matplotlib {t_writer_imports:.2f} s")
    t0 = time.perf_counter()
    size = size_for_nodes(args.nodes)
    print(f"mesh size {size:.5g} mm for about {args.nodes} nodes "
          f"(found in {time.perf_counter() - t0:.1f} s)")

    best_whole = best_floor = None
    rss_whole = 0.0
    with tempfile.TemporaryDirectory(prefix="heat2d-bench-") as tmp:
        model_path = Path(tmp) / "board.toml"
        model_path.write_text(board_model(size), encoding="utf-8")
        geometry = build_geometry(heat2d.load(model_path))
        for r in range(args.repeat):
            whole = whole_run(model_path, Path(tmp) / f"out{r}", args.method)
            rss_whole = max(rss_whole, peak_rss_mb())
            floor = floor_run(geometry)
            if best_whole is None or whole["whole"] < best_whole["whole"]:
                best_whole = whole
            f_total = floor["mesh"] + floor["assembly"] + floor["solves"][floor["best"]]
            if best_floor is None or f_total < best_floor["total"]:
                best_floor = {**floor, "total": f_total}
            print(f"  repeat {r + 1}: whole {whole['whole']:.2f} s, floor {f_total:.2f} s",
                  flush=True)
    rss_all = peak_rss_mb()
    report(best_whole, best_floor, rss_whole, rss_all, args.repeat)
    return 0


def report(w: dict, f: dict, rss_whole: float, rss_all: float, repeat: int) -> None:
    stages = w["stages"]
    staged = sum(stages.values())
    writing = w["whole"] - staged
    other = writing - sum(w["writers"].values())
    print(f"\nnodes: heat2d {w['nodes']}, floor {f['nodes']}; triangles {w['triangles']}")
    print(f"max temperature: heat2d {w['t_max']:.6f} degC, floor {f['t_max']:.6f} degC; "
          f"heat2d solver {w['solver']['method']} ({w['solver']['iterations']} iterations, "
          f"residual {w['solver']['relative_residual']:.1e})")
    print(f"\nheat2d whole run (min of {repeat}): {w['whole']:8.2f} s")
    for name, t in stages.items():
        print(f"  {name:<26} {t:8.2f} s")
    print(f"  {'writing + load + CLI':<26} {writing:8.2f} s   (whole - stages)")
    for name, t in w["writers"].items():
        print(f"    writer {name:<19} {t:8.2f} s")
    print(f"    {'model load, CLI, moves':<26} {other:8.2f} s")
    print(f"\nfloor (min of {repeat}): {f['total']:8.2f} s")
    print(f"  {'triangle.triangulate':<26} {f['mesh']:8.2f} s")
    print(f"  {'P1 assembly + Dirichlet':<26} {f['assembly']:8.2f} s")
    for name, t in f["solves"].items():
        mark = "  <- best" if name == f["best"] else ""
        print(f"  solve {name:<20} {t:8.2f} s   residual {f['residual'][name]:.1e}{mark}")
    ratio = w["whole"] / f["total"]
    f_cpu = f["cpu"]["mesh"] + f["cpu"]["assembly"] + f["cpu"][f["best"]]
    verdict = "meets" if ratio <= TARGET_RATIO else "MISSES"
    print(f"\nratio whole / floor = {ratio:.2f}  ({verdict} target <= {TARGET_RATIO:.1f})")
    print(f"  CPU time: whole {w['cpu']:.2f} s, floor {f_cpu:.2f} s, ratio {w['cpu'] / f_cpu:.2f}")
    print(f"  without writing: {staged / f['total']:.2f}; solve only: "
          f"{stages.get('solve', 0.0) / f['solves'][f['best']]:.2f}")
    print(f"peak RSS: {rss_whole:.0f} MB after the heat2d run, {rss_all:.0f} MB at the end")


if __name__ == "__main__":
    sys.exit(main())
