"""Study: heat-spreader thickness against airflow for a top-side cooled power MOSFET.

A power MOSFET in a top-side cooled package (its drain pad faces up) sits on a board
in a fan-cooled enclosure. A gap pad joins the pad to an aluminium spreader plate
60 mm long; air flows along the plate and the board. Which plate thickness is worth
buying, and how much does a stronger fan do instead?

The model is built here in Python (no model file): see build_model(). The heat
transfer coefficient follows the air speed through the laminar flat-plate correlation
for the average Nusselt number (Incropera et al., Fundamentals of Heat and Mass
Transfer, 6th ed., §7.2):

    Nu = 0.664 Re^(1/2) Pr^(1/3),   Re = v L / nu,   h = Nu k_air / L

with air at 300 K: k_air = 0.0263 W/(m·K), nu = 15.89e-6 m²/s, Pr = 0.707 (Incropera
Table A.4, from memory) and L the plate length along the flow. From 0.5 to 4 m/s this
gives h of about 11 to 32 W/(m²·K), the low end of the 25-250 W/(m²·K) quoted for
forced convection of gases: a smooth plate in laminar flow. Components on a real board
trip the flow and do better, so treat the figures as a cautious estimate of cooling.

    python examples/spreader_airflow.py [--out DIR] [--jobs N]

writes DIR/sweep.csv, DIR/sweep.png (junction temperature against air speed, one line
per plate thickness) and one folder per variant, and prints the junction temperature
as an airflow x thickness table. Air speed changes only h, so within one thickness
the mesh and the matrix structure are built once and reused.
"""

from __future__ import annotations

import argparse
from pathlib import Path

import heat2d
from heat2d.sweep import sweep

AIR_SPEED = "0.5:4:8"                         # m/s
SPREADER_MM = [0.3, 0.5, 1.0, 2.0, 3.0]


def build_model() -> heat2d.Model:
    """The section: x along the board, y up through it, mm; 20 mm deep (the package
    length normal to the section), so the power and heat flows are for 20 mm."""
    y_pkg = 1.6                                # board top
    stack = {                                  # package and cooling stack, bottom to top
        "mould": (y_pkg, 1.0), "pad": (y_pkg + 0.75, 0.25),
        "gap_pad": (y_pkg + 1.0, 0.5)}
    data = {
        "model": {"title": "Top-side cooled MOSFET under an aluminium spreader, forced air",
                  "length_unit": "mm", "depth": 20},
        "params": {
            "p_die": 1.5,          # W for the 20 mm depth
            "v_air": 2.0,          # air speed along the plate, m/s
            "t_spr": 1.0,          # spreader thickness, mm
            "L_flow": 0.06,        # plate length along the flow, m
            "k_air": 0.0263, "nu_air": 15.89e-6, "pr_air": 0.707,
            "h_air": "0.664 * sqrt(v_air * L_flow / nu_air) * pr_air**(1/3) * k_air / L_flow",
            "ambient": 35,
        },
        "materials": {
            "fr4": {"kx": 1.06, "ky": 0.34, "note": "Sarvar, Poole & Witting (1990)"},
            "copper": {"k": 385},
            "silicon": {"k": 148, "note": "300 K, Incropera Table A.1"},
            "mould": {"k": 0.8},
            "gap_pad": {"k": 3, "note": "vendor ranges 1-15 W/(m K)"},
            "al6063": {"k": 209, "note": "6063-T5, Aluminum Association"},
        },
        "shape": [
            {"name": "board", "material": "fr4",
             "rect": {"x": 0, "y": 0, "width": 80, "height": 1.6}},
            {"name": "top_copper", "material": "copper",
             "rect": {"x": 25, "y": 1.53, "width": 30, "height": 0.07}},
            {"name": "mould", "material": "mould",
             "rect": {"x": 35, "y": stack["mould"][0], "width": 10,
                      "height": stack["mould"][1]}},
            {"name": "pad", "material": "copper",
             "rect": {"x": 36, "y": stack["pad"][0], "width": 8, "height": stack["pad"][1]}},
            {"name": "die", "material": "silicon", "power": "p_die", "mesh_size": 0.05,
             "max_temperature": 150,
             "rect": {"x": 38, "y": stack["pad"][0] - 0.2, "width": 4, "height": 0.2}},
            {"name": "gap_pad", "material": "gap_pad",
             "rect": {"x": 35, "y": stack["gap_pad"][0], "width": 10,
                      "height": stack["gap_pad"][1]}},
            {"name": "spreader", "material": "al6063", "mesh_size": "max(t_spr/2, 0.1)",
             "rect": {"x": 10, "y": stack["gap_pad"][0] + stack["gap_pad"][1], "width": 60,
                      "height": "t_spr"}},
        ],
        "boundary": [
            {"name": "air", "on": "exterior", "h": "h_air", "ambient": "ambient"},
        ],
        "probe": [
            {"name": "junction", "at": [40, stack["pad"][0] - 0.1]},
            {"name": "spreader_tip", "at": [10, stack["gap_pad"][0] + stack["gap_pad"][1]]},
            {"name": "board_under", "at": [40, 0]},
        ],
        "mesh": {"size": 1.0},
    }
    return heat2d.from_dict(data, source="spreader_airflow")


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--out", default="out/spreader_airflow", help="output folder")
    parser.add_argument("--jobs", type=int, default=1,
                        help="worker processes (default 1: reuse makes one process fast)")
    parser.add_argument("--quick", action="store_true",
                        help="a quick look: two values of each param")
    args = parser.parse_args(argv)

    model = build_model()
    vary = {"v_air": AIR_SPEED, "t_spr": SPREADER_MM}
    if args.quick:
        vary = {"v_air": [0.5, 4.0], "t_spr": [0.3, 3.0]}
    table = sweep(model, vary, jobs=args.jobs, out=args.out)

    speeds = sorted({r["v_air"] for r in table.rows})
    thicknesses = sorted({r["t_spr"] for r in table.rows})
    junction = {(r["v_air"], r["t_spr"]): r["probe:junction"] for r in table.rows}
    h = {r["v_air"]: dict(model.with_params(v_air=r["v_air"]).params)["h_air"]
         for r in table.rows}
    print(f"junction temperature, °C ({model.title}; "
          f"{dict(model.params)['p_die']:g} W, air {dict(model.params)['ambient']:g} °C)")
    print(f"{'air m/s':>8} {'h W/m2K':>8}" + "".join(f"{f'{t:g} mm':>9}" for t in thicknesses))
    for v in speeds:
        cells = "".join(f"{junction[v, t]:9.1f}" if junction[v, t] is not None
                        else f"{'failed':>9}" for t in thicknesses)
        print(f"{v:8.2f} {h[v]:8.1f}{cells}")
    for row in table.failed:
        print(f"failed: {row['variant']}: {row['error']}")
    print(f"\nwrote {Path(args.out) / 'sweep.csv'} and {Path(args.out) / 'sweep.png'}")
    return 1 if table.failed else 0


if __name__ == "__main__":
    raise SystemExit(main())
