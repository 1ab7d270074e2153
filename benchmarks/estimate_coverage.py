"""How often does the error estimate cover the true error, and by how much does it
over-state it?

Runs the closed-form problems of tests/test_estimate.py (Incropera et al. §3.3.1, §3.5.1,
§3.5.2, §3.6, §4.2 and the re-entrant L corner), each with probes at seeded random points
plus the problem's own figures (maxima, shape means, boundary heat flows), on a series of
meshes each √2 finer, and prints per problem: how many figures had a true error above the
reported one, the worst ratio true/reported, and the median and 90th percentile of
reported/true (how much the ± over-states the error).

``--plain`` also runs the plain nested Richardson term alone (without the probes'
interpolation correction, estimate.probe_corrections) for comparison.

    python benchmarks/estimate_coverage.py                  # seeds 1 2, 40 probes, 7 meshes
    python benchmarks/estimate_coverage.py --seeds 5 6 --plain
    python benchmarks/estimate_coverage.py --large --seeds 5      # large runs

Figures exact to round-off (1-D heat flows, held temperatures) are left out of the
ratios (their estimate is round-off too).
"""

from __future__ import annotations

import argparse
import sys
import time
from pathlib import Path

import numpy as np
import pytest

sys.path.insert(0, str(Path(__file__).resolve().parents[1] / "tests"))

from test_estimate import SCATTER, comparisons, scattered_runs  # noqa: E402

from heat2d.pipeline import adaptive as adapt  # noqa: E402
from heat2d.post import estimate  # noqa: E402

LARGE = {  # one mesh per problem above estimate.REFINED_LIMIT: √2 steps from SCATTER
    "generation_slab": 9, "cylinder_wall": 11, "corner": 9, "pipe_wall": 11, "plate": 10,
}


def measure(names, seeds, probes, meshes, large=False) -> list[tuple]:
    rows = []
    for name in names:
        if large and name not in LARGE:
            continue
        true, reported, nodes = [], [], []
        for seed in seeds:
            sizes = ([SCATTER[name] * 2 ** (-LARGE[name] / 2)] if large else
                     [SCATTER[name] * 2 ** (-j / 2) for j in range(meshes)])
            with pytest.MonkeyPatch.context() as mp:
                for result, exact in scattered_runs(name, sizes, probes, seed, mp):
                    nodes.append(result.summary["mesh"]["nodes"])
                    for _, t, e in comparisons(result.summary, exact):
                        if t > 1e-12 * (1 + abs(t)) or e > 1e-12:
                            true.append(t)
                            reported.append(e)
        t, e = np.array(true), np.array(reported)
        ratio = t / np.maximum(e, 1e-300)
        over = e / np.maximum(t, 1e-300)
        rows.append((name, min(nodes), max(nodes), len(t), int((t > e).sum()),
                     float(ratio.max()), float(np.median(over)),
                     float(np.percentile(over, 90))))
    return rows


def show(title: str, rows: list[tuple]) -> None:
    print(f"\n{title}")
    print(f"{'problem':16} {'nodes':>13} {'figures':>8} {'under':>6} {'worst t/r':>10} "
          f"{'median r/t':>11} {'p90 r/t':>8}")
    for name, lo, hi, n, under, worst, median, p90 in rows:
        print(f"{name:16} {lo:>6}-{hi:<6} {n:>8} {under:>6} {worst:>10.2f} {median:>11.2f} "
              f"{p90:>8.1f}")
    total = sum(r[3] for r in rows)
    under = sum(r[4] for r in rows)
    print(f"{'all':16} {'':13} {total:>8} {under:>6} {max(r[5] for r in rows):>10.2f}")


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--seeds", type=int, nargs="+", default=[1, 2])
    parser.add_argument("--probes", type=int, default=40)
    parser.add_argument("--meshes", type=int, default=7)
    parser.add_argument("--only", nargs="+", choices=list(SCATTER), default=list(SCATTER))
    parser.add_argument("--plain", action="store_true",
                        help="also the plain Richardson term without probe corrections")
    parser.add_argument("--large", action="store_true",
                        help="instead, one mesh of 31 000 to 168 000 nodes per problem (the "
                             "coarse-ladder estimate of large runs); a few minutes")
    args = parser.parse_args()
    start = time.perf_counter()
    if args.large:
        show(f"large runs (coarse ladder), seeds {args.seeds}, {args.probes} random probes",
             measure(args.only, args.seeds, args.probes, 1, large=True))
        print(f"\n{time.perf_counter() - start:.0f} s")
        return
    show(f"default estimate, seeds {args.seeds}, {args.probes} random probes, "
         f"{args.meshes} meshes each",
         measure(args.only, args.seeds, args.probes, args.meshes))
    if args.plain:
        with pytest.MonkeyPatch.context() as mp:
            mp.setattr(estimate, "probe_corrections", lambda *a, **k: {})
            mp.setattr(adapt, "probe_corrections", lambda *a, **k: {})
            show("plain nested Richardson term (no probe interpolation correction)",
                 measure(args.only, args.seeds, args.probes, args.meshes))
    print(f"\n{time.perf_counter() - start:.0f} s")


if __name__ == "__main__":
    main()
