"""``heat2d run`` and ``heat2d check``: one model, solved or only meshed."""

from __future__ import annotations

import argparse
import json
import sys
from pathlib import Path

from .common import EXIT_LIMIT, EXIT_OK, Announcer, Terminated, parse_sets, received


def cmd_run(args: argparse.Namespace) -> int:
    from ..model import load

    # The folder is known before the model is read (model.stem is the file's stem), so
    # an interrupt at any moment can say what became of it.
    out = Path(args.out) if args.out else Path(f"{Path(args.model).stem}-results")
    existed = out.is_dir()
    done: list = []
    try:
        model = load(args.model, params=parse_sets(args.set), node_limit=args.node_limit)
        return _run(args, model, out, done)
    except (KeyboardInterrupt, Terminated) as exc:
        # What the interrupt left: write() is all or nothing, so the folder holds the
        # previous result (or nothing), unless the new one was already in place.
        exc.heat2d_outputs = (f"the new result is in {out}" if done and _holds(out, done[0])
                              else f"the previous result in {out} is kept"
                              if existed and out.is_dir() else "no output written")
        raise


def _holds(out: Path, result) -> bool:
    """Whether ``out`` holds this run's summary (so its files are in place)."""
    try:
        written = json.loads((out / "summary.json").read_text(encoding="utf-8"))
        return written == json.loads(json.dumps(result.summary, allow_nan=False))
    except (OSError, ValueError):
        return False


def _run(args: argparse.Namespace, model, out: Path, done: list) -> int:
    from ..pipeline import run
    from ..post.text import format_summary
    from ..post.writers import check_output_folder, write

    check_output_folder(out)        # refuse a folder of the user's files before solving
    progress = None if args.quiet else Announcer(sys.stderr)

    def stage(name: str, event: str) -> None:
        # An interrupt whose exception was swallowed on its way (inside a finalizer or a
        # library's own handler) still stops the run at the next stage, before writing.
        late = received()
        if late is not None and event != "failed":
            raise late
        if progress and event != "check":
            progress(name, event)

    if model.is_transient:
        from ..transient.output import format_transient
        from ..transient.run import run_transient

        result = run_transient(model, method=args.method, refine=args.refine,
                               progress=stage)
        format_summary = format_transient               # noqa: F811
    else:
        result = run(model, method=args.method, refine=args.refine, progress=stage,
                     estimate=not args.no_estimate)
    stage("writing", "check")
    done.append(result)
    if progress:
        progress("writing", "start")
    try:
        files = (result.save(out, show_mesh=args.show_mesh) if model.is_transient
                 else write(result, out, show_mesh=args.show_mesh))
        if getattr(args, "report", False):      # report.html beside the results
            from .report import report_into

            files.append(report_into(out))
    finally:
        if progress:
            progress("writing", "end")
    if not args.quiet:
        print(format_summary(result.summary))
        print("\nwrote " + ", ".join(str(f) for f in files))
    exceeded = [n for n, lim in result.summary["limits"].items() if lim["exceeded"]]
    if exceeded and args.strict:
        print(f"limit exceeded: {', '.join(exceeded)}", file=sys.stderr)
        return EXIT_LIMIT
    return EXIT_OK


def cmd_check(args: argparse.Namespace) -> int:
    from ..fem.budget import check_outlines
    from ..fem.geometry import build_geometry
    from ..fem.mesh import build_mesh
    from ..model import load
    from ..pipeline.adaptive import check_budget

    model = load(args.model, params=parse_sets(args.set), node_limit=args.node_limit)
    check_outlines(model, refine=args.refine)
    geometry = build_geometry(model, refine=args.refine)
    mesh = build_mesh(geometry)
    check_budget(mesh)
    unit = model.length_unit
    areas = geometry.visible_area
    claimed = geometry.claimed_length()
    print(f"{model.source}: model is valid" + (f" ({model.title})" if model.title else ""))
    print(f"length unit {unit}, " + ("axisymmetric (full revolution)" if model.axisymmetric
                                      else f"depth {model.depth:g} {unit}"))
    print(f"\n{'shape':<20} {'material':<14} {'visible area ' + unit + '²':>18} {'power':>12}")
    for s, a in zip(model.shapes, areas, strict=True):
        power = (f"{s.power:g} W" if s.power is not None else
                 f"{s.power_density:g} W/m³" if s.power_density is not None else "")
        print(f"{s.name:<20} {'(void)' if s.void else s.material:<14} {a:>18.6g} {power:>12}")
    print(f"\n{'boundary':<20} {'kind':<21} {'on':<24} {'length ' + unit:>12}")
    for bc in model.boundaries:
        print(f"{bc.name:<20} {bc.label:<21} {str(bc.selector):<24} "
              f"{claimed[bc.index]:>12.6g}")
    print(f"{'(insulated)':<20} {'':<21} {'':<24} {geometry.insulated_length():>12.6g}")
    if model.interfaces:
        print(f"\n{'interface':<20} {'between':<30} {'R″ m²K/W':>10}")
        for itf in model.interfaces:
            print(f"{itf.name:<20} {itf.a + ' / ' + itf.b:<30} {itf.resistance:>10.3g}")
    print(f"\n{'material':<20} {'kx':>9} {'ky':>9}  W/(m·K) at 25 °C; note")
    for m in model.materials:
        varies = " (varies with T)" if m.varies else ""
        print(f"{m.name:<20} {m.kx:>9.4g} {m.ky:>9.4g}  {m.note}{varies}")
    if model.is_transient:
        _print_transient(model)
    if model.has_current:
        print(f"\n{'conductor':<20} {'current A':>10}  members")
        for name, members, current in model.conductors:
            print(f"{name:<20} {current:>10.4g}  {', '.join(m.name for m in members)}")
    print(f"\nmesh: {len(mesh.points)} nodes, {len(mesh.triangles)} triangles, smallest angle "
          f"{mesh.min_angle():.1f}°, target size {geometry.size:g} {unit}")
    for w in (*geometry.warnings, *mesh.warnings):
        print(f"warning: {w}")
    return EXIT_OK


def _print_transient(model) -> None:
    """The time settings, the heat capacity of each material and the schedules."""
    st = model.transient
    times = st.report_times()
    spacing = (f"every {st.every:g} s" if st.every else
               f"log-spaced from {times[0]:g} s, {st.per_decade} per decade")
    start = st.initial if st.initial == "steady" else f"{st.start_temperature:g} °C"
    print(f"\ntransient: to {st.end:g} s, {len(times)} report times {spacing}; start "
          f"{start}; step tolerance {st.tolerance:g} K")
    print(f"{'material':<20} {'density':>9} {'c':>9}  kg/m³, J/(kg·K) at 25 °C")
    for m in model.used_materials:
        rho = "-" if m.density is None else f"{m.density:.4g}"
        c = "-" if m.specific_heat is None else f"{m.specific_heat:.4g}"
        print(f"{m.name:<20} {rho:>9} {c:>9}")
    for s in model.shapes:
        if s.schedule is not None:
            sc = s.schedule
            what = (f"pulses of {sc.amplitude:g} W, {sc.width:g} s"
                    + (f" every {sc.period:g} s" if sc.period else "")
                    + (f", {sc.count} of them" if sc.count else "")
                    + f"; {sc.base:g} W between" if sc.kind == "pulse"
                    else f"{sc.kind} table of {len(sc.points)} points")
            print(f"power of {s.name}: {what}")
