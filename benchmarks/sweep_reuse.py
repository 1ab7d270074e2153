"""Benchmark: a sweep that reuses mesh, pattern and factorization against separate runs.

The bundled control board, refined to about 50 000 nodes, is solved for 20 variants
that change only values, never the geometry: the air-side heat transfer coefficient
``h_air`` (4 values, W/(m²·K)) and the die power ``p_die`` (5 values, W). Neither side
makes the error estimate. Three comparisons, each timed within this one run:

1. **solve only** — the reuse itself. Separate: ``heat2d.solve(heat2d.load(path,
   params=...))`` per variant. Sweep: ``heat2d.sweep.sweep(..., out=None)`` on one
   process: geometry and mesh once, the assembly pattern once, one factorization per
   value of ``h_air`` (the powers only change the load vector).
2. **with files** — both sides also write each variant's VTU, summary.json and
   summary.txt (the sweep adds sweep.csv and sweep.png).
3. ``--cli`` only (slow): 20 ``heat2d run --set h_air=.. --set p_die=.. --no-estimate``
   commands, against one ``heat2d sweep`` command of the same grid: what a user would
   otherwise script, with interpreter start-up and each run's PNG map.

Comparisons 1 and 2 alternate their two sides ``--repeat`` times (default 2) and the
fastest pass of each side counts, since a busy machine slows some passes. Wall and CPU
time (all threads of the process) are both printed, then per-stage totals and the
largest difference between the two sides' figures (reuse must not change the answers).

    python benchmarks/sweep_reuse.py [--refine 4] [--repeat 2] [--cli]
"""

from __future__ import annotations

import argparse
import json
import subprocess
import sys
import tempfile
import time
from collections import defaultdict
from pathlib import Path

import heat2d
from heat2d.sweep import VARIANT_FORMATS, sweep

MODEL = Path(__file__).resolve().parent.parent / "models" / "control_board.toml"
H_AIR = [6.0, 10.0, 15.0, 25.0]
P_DIE = [0.5, 1.0, 1.5, 2.0, 2.5]
VARY = {"h_air": H_AIR, "p_die": P_DIE}


def figures(summary: dict) -> dict[str, float]:
    return {"max": summary["temperature"]["max"],
            "junction": summary["probes"]["junction"],
            "board_edge": summary["probes"]["board_edge"],
            "housing": summary["boundaries"]["housing"]["heat_out_w"],
            "air": summary["boundaries"]["air"]["heat_out_w"]}


def stage_totals(summaries: list[dict]) -> dict[str, float]:
    out: dict[str, float] = defaultdict(float)
    for s in summaries:
        for stage, seconds in s["timings_s"].items():
            out[stage] += seconds
    return dict(out)


def timed(func, *args) -> dict:
    start, cpu = time.perf_counter(), time.process_time()
    summaries = func(*args)
    return {"wall": time.perf_counter() - start, "cpu": time.process_time() - cpu,
            "summaries": summaries}


def separate(variants: list[dict], refine: float, folder: Path | None) -> list[dict]:
    out = []
    for k, values in enumerate(variants):
        result = heat2d.solve(heat2d.load(MODEL, params=values), refine=refine,
                              estimate=False)
        if folder is not None:
            result.save(folder / str(k), formats=VARIANT_FORMATS)
        out.append(result.summary)
    return out


def swept(base, refine: float, folder: Path | None) -> list[dict]:
    table = sweep(base, VARY, refine=refine, out=folder)
    assert not table.failed, table.failed
    if folder is None:
        return [{"temperature": {"max": r["max_temperature_c"]},
                 "probes": {"junction": r["probe:junction"],
                            "board_edge": r["probe:board_edge"]},
                 "boundaries": {"housing": {"heat_out_w": r["heat_out_w:housing"]},
                                "air": {"heat_out_w": r["heat_out_w:air"]}},
                 "timings_s": {}} for r in table.rows]
    return [json.loads((folder / r["variant"] / "summary.json").read_text())
            for r in table.rows]


def compare(name: str, passes: dict[str, list[dict]], show_stages: bool) -> float:
    best = {side: min(runs, key=lambda r: r["wall"]) for side, runs in passes.items()}
    a, b = best["separate"], best["sweep"]
    worst = max(abs(x[k] - y[k]) / abs(y[k])
                for sa, sb in zip(a["summaries"], b["summaries"], strict=True)
                for x, y in [(figures(sb), figures(sa))] for k in x)
    print(f"\n{name}")
    print(f"  {'':12} {'wall s':>8} {'CPU s':>8}   passes (wall s)")
    for side, runs in passes.items():
        print(f"  {side:<12} {best[side]['wall']:8.2f} {best[side]['cpu']:8.2f}   "
              + ", ".join(f"{r['wall']:.2f}" for r in runs))
    ratio = a["wall"] / b["wall"]
    print(f"  ratio separate / sweep: {ratio:.2f} wall, {a['cpu'] / b['cpu']:.2f} CPU")
    if show_stages:
        ta, tb = stage_totals(a["summaries"]), stage_totals(b["summaries"])
        print(f"  seconds per stage, summed over the variants: {'separate':>9} {'sweep':>9}")
        for stage in dict.fromkeys([*ta, *tb]):
            print(f"  {stage:>45} {ta.get(stage, 0.0):9.2f} {tb.get(stage, 0.0):9.2f}")
    print(f"  largest relative difference of the figures, sweep vs separate: {worst:.1e}")
    return ratio


def cli_comparison(variants: list[dict], refine: float, tmp: Path) -> None:
    def heat2d_cmd(*args: str) -> None:
        subprocess.run([sys.executable, "-m", "heat2d", *args], check=True,
                       stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)

    start = time.perf_counter()
    for k, values in enumerate(variants):
        sets = [a for n, v in values.items() for a in ("--set", f"{n}={v!r}")]
        heat2d_cmd("run", str(MODEL), *sets, "--refine", f"{refine:g}", "--no-estimate",
                   "--quiet", "--out", str(tmp / "cli-runs" / str(k)))
    runs = time.perf_counter() - start
    start = time.perf_counter()
    heat2d_cmd("sweep", str(MODEL), *(a for n, v in VARY.items()
                                      for a in ("--vary", f"{n}={','.join(map(repr, v))}")),
               "--refine", f"{refine:g}", "--quiet", "--out", str(tmp / "cli-sweep"))
    one = time.perf_counter() - start
    print("\n3. commands: 20 x `heat2d run --set ... --no-estimate` against one "
          "`heat2d sweep`")
    print(f"  {'heat2d run x20':<14} {runs:8.2f} s wall")
    print(f"  {'heat2d sweep':<14} {one:8.2f} s wall")
    print(f"  ratio: {runs / one:.2f}")


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--refine", type=float, default=4.0,
                        help="mesh refinement of the control board (4: about 52 000 nodes)")
    parser.add_argument("--repeat", type=int, default=2,
                        help="alternating passes of each comparison; the fastest counts")
    parser.add_argument("--cli", action="store_true",
                        help="also time 20 `heat2d run` commands against `heat2d sweep`")
    args = parser.parse_args()

    base = heat2d.load(MODEL)
    warm = heat2d.solve(base, estimate=False)                 # load every library once
    warm.save(tempfile.mkdtemp(), formats=VARIANT_FORMATS)
    variants = [{"h_air": h, "p_die": p} for h in H_AIR for p in P_DIE]
    nodes = len(heat2d.solve(base, refine=args.refine, estimate=False,
                             resistances=False).mesh.points)
    print(f"model: {MODEL.name} refined x{args.refine:g}: {nodes} nodes; {len(variants)} "
          f"variants (h_air x p_die = {len(H_AIR)} x {len(P_DIE)}); no error estimates")
    with tempfile.TemporaryDirectory() as name:
        tmp = Path(name)
        solve_only: dict[str, list[dict]] = {"separate": [], "sweep": []}
        with_files: dict[str, list[dict]] = {"separate": [], "sweep": []}
        for _ in range(args.repeat):
            solve_only["separate"].append(timed(separate, variants, args.refine, None))
            solve_only["sweep"].append(timed(swept, base, args.refine, None))
        for k in range(args.repeat):
            with_files["separate"].append(timed(separate, variants, args.refine,
                                                tmp / f"separate{k}"))
            with_files["sweep"].append(timed(swept, base, args.refine, tmp / f"sweep{k}"))
        compare("1. solve only (the reuse)", solve_only, show_stages=False)
        compare("2. with each variant's files (VTU, summary.json, summary.txt)", with_files,
                show_stages=True)
        if args.cli:
            cli_comparison(variants, args.refine, tmp)


if __name__ == "__main__":
    main()
