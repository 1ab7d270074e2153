"""Study: outer copper weight against thermal-via pitch on the bundled control board.

The regulator of models/control_board.toml sits over five thermal vias; its heat goes
down through them into the inner planes and out along the board to the housing rail.
Two cheap board changes help: heavier outer copper (spreads heat along the board) and
a tighter via pitch (more copper through the board). This script sweeps both and
answers: how much does each buy, and does one make the other unnecessary?

    python examples/via_pitch_copper.py [--out DIR] [--jobs N]

writes DIR/sweep.csv (one row per variant), DIR/sweep.png (junction temperature
against via pitch, one line per copper weight) and one folder per variant, and prints
the junction temperature as a pitch x copper table. Both params move shape edges, so
every variant is meshed anew; ``--jobs`` spreads them over processes.

The 2-D section spreads the die over the model's 10 mm depth: use the numbers to
compare the variants, not as a junction rating (see the model file's header).
"""

from __future__ import annotations

import argparse
import os
from pathlib import Path

import heat2d
from heat2d.sweep import sweep

MODEL = Path(__file__).resolve().parent.parent / "models" / "control_board.toml"
PITCH_MM = "0.8:1.3:6"              # keep below 1.35 mm: all five vias stay under the pad
COPPER_MM = {0.035: "1 oz", 0.070: "2 oz", 0.105: "3 oz"}     # finished outer copper


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--out", default="out/via_pitch_copper", help="output folder")
    parser.add_argument("--jobs", type=int, default=min(4, os.cpu_count() or 1),
                        help="worker processes (default: up to 4)")
    parser.add_argument("--quick", action="store_true",
                        help="a quick look: coarser mesh, two values of each param")
    args = parser.parse_args(argv)

    model = heat2d.load(MODEL)
    vary = {"via_pitch": PITCH_MM, "t_outer": list(COPPER_MM)}
    refine = 1.0
    if args.quick:
        vary, refine = {"via_pitch": [0.8, 1.3], "t_outer": [0.035, 0.070]}, 0.5
    table = sweep(model, vary, jobs=args.jobs, out=args.out, refine=refine)

    pitches = sorted({r["via_pitch"] for r in table.rows})
    weights = sorted({r["t_outer"] for r in table.rows})
    junction = {(r["via_pitch"], r["t_outer"]): r["probe:junction"] for r in table.rows}
    print(f"junction temperature, °C ({model.title}; p_die = "
          f"{dict(model.params)['p_die']:g} W)")
    print(f"{'via pitch mm':>12}" + "".join(f"{COPPER_MM.get(w, f'{w:g} mm'):>9}"
                                            for w in weights))
    for p in pitches:
        cells = "".join(f"{junction[p, w]:9.1f}" if junction[p, w] is not None
                        else f"{'failed':>9}" for w in weights)
        print(f"{p:12.2f}{cells}")
    for row in table.failed:
        print(f"failed: {row['variant']}: {row['error']}")
    print(f"\nwrote {Path(args.out) / 'sweep.csv'} and {Path(args.out) / 'sweep.png'}")
    return 1 if table.failed else 0


if __name__ == "__main__":
    raise SystemExit(main())
