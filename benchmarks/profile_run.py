"""Where the time and memory of a default ``heat2d run`` go, stage by stage.

The model is a 100 × 100 mm orthotropic plate with an aluminium spreader and a
5 W component on it, the base held at 25 °C and convection everywhere else
(``plate_model``). Its ``[mesh] size`` is chosen for about ``--nodes`` nodes.

One run in this process, as ``heat2d run`` does it: ``heat2d.load``,
``heat2d.pipeline.run`` with a progress callback, then ``heat2d.post.writers.write``.
For every stage (and sub-stage event the pipeline reports) it prints the wall
time, the RSS at its end and the peak RSS during it (VmHWM from
/proc/self/status, reset at each stage start through /proc/self/clear_refs),
then summary.json's ``timings_s`` and the time not covered by them.

    python benchmarks/profile_run.py [--nodes 300000] [--model FILE] [--method auto]
"""

from __future__ import annotations

import argparse
import json
import math
import os
import sys
import tempfile
import time
from pathlib import Path

PLATE_SIZE_PILOT = 2.0
"""Mesh size (mm) of the pilot mesh whose node count sets the size for the target."""


def plate_model(size: float) -> str:
    """A 100 × 100 mm orthotropic plate, an aluminium spreader and a 5 W part, in mm."""
    return f"""\
[model]
title = "orthotropic plate with spreader"
length_unit = "mm"
depth = 10

[materials.laminate]
kx = 20
ky = 2
[materials.aluminium]
k = 205
[materials.package]
k = 20

[[shape]]
name = "plate"
material = "laminate"
rect = {{ x = 0, y = 0, width = 100, height = 100 }}

[[shape]]
name = "spreader"
material = "aluminium"
rect = {{ x = 30, y = 90, width = 40, height = 10 }}

[[shape]]
name = "part"
material = "package"
rect = {{ x = 45, y = 100, width = 10, height = 3 }}
power = 5

[[boundary]]
name = "base"
on = "plate.bottom"
temperature = 25

[[boundary]]
name = "air"
on = "exterior"
h = 10
ambient = 25

[[probe]]
name = "centre"
at = [50, 50]

[mesh]
size = {size:.6g}
"""


def nodes_of(text: str) -> int:
    import heat2d
    from heat2d.fem.geometry import build_geometry
    from heat2d.fem.mesh import build_mesh

    return len(build_mesh(build_geometry(heat2d.parse(text))).points)


def plate_size_for(nodes: int) -> float:
    """Mesh size for about ``nodes`` nodes: nodes scale as size⁻² on a uniform mesh."""
    pilot = nodes_of(plate_model(PLATE_SIZE_PILOT))
    return PLATE_SIZE_PILOT * math.sqrt(pilot / nodes)


def memory_kb() -> dict[str, int]:
    out = {}
    with open("/proc/self/status", encoding="ascii") as f:
        for line in f:
            if line.startswith(("VmHWM", "VmRSS")):
                key, value = line.split(":")
                out[key] = int(value.split()[0])
    return out


def reset_peak() -> None:
    try:
        with open("/proc/self/clear_refs", "w", encoding="ascii") as f:
            f.write("5")
    except OSError:
        pass


class Recorder:
    """Progress callback: wall time and memory per stage (nested events indented)."""

    def __init__(self) -> None:
        self.rows: list[tuple[str, float, float, float]] = []
        self.open: dict[str, tuple[float, int]] = {}
        self.peak_seen = 0

    def __call__(self, name: str, event: str) -> None:
        mem = memory_kb()
        self.peak_seen = max(self.peak_seen, mem["VmHWM"])
        if event == "start":
            self.open[name] = (time.perf_counter(), len(self.rows))
            self.rows.append((name, math.nan, math.nan, math.nan))
            if len(self.open) == 1:
                reset_peak()
        elif name in self.open:
            start, i = self.open.pop(name)
            self.rows[i] = ("  " * len(self.open) + name, time.perf_counter() - start,
                            mem["VmRSS"] / 1024, mem["VmHWM"] / 1024)


def profile(model_path: Path, out_dir: Path, method: str) -> dict:
    import heat2d
    from heat2d.pipeline import run
    from heat2d.post.writers import write

    rec = Recorder()
    start = time.perf_counter()
    rec("load", "start")
    model = heat2d.load(model_path)
    rec("load", "end")
    result = run(model, method=method, progress=rec)
    rec("writing", "start")
    write(result, out_dir)
    rec("writing", "end")
    whole = time.perf_counter() - start
    summary = json.loads((out_dir / "summary.json").read_text(encoding="utf-8"))
    return {"whole": whole, "rows": rec.rows, "summary": summary,
            "peak_mb": max(rec.peak_seen, memory_kb()["VmHWM"]) / 1024,
            "nodes": summary["mesh"]["nodes"]}


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--nodes", type=int, default=300_000, help="target node count")
    parser.add_argument("--model", type=Path, help="a model file instead of the plate")
    parser.add_argument("--method", default="auto", choices=("auto", "direct", "multigrid"))
    args = parser.parse_args(argv)

    t0 = time.perf_counter()
    import matplotlib.figure  # noqa: F401
    import meshio  # noqa: F401
    import pyamg  # noqa: F401
    import scipy.sparse.linalg  # noqa: F401
    import triangle  # noqa: F401

    import heat2d  # noqa: F401
    t_imports = time.perf_counter() - t0
    base_mb = memory_kb()["VmRSS"] / 1024
    with tempfile.TemporaryDirectory(prefix="heat2d-profile-") as tmp:
        if args.model:
            model_path = args.model
        else:
            size = plate_size_for(args.nodes)
            model_path = Path(tmp) / "plate.toml"
            model_path.write_text(plate_model(size), encoding="utf-8")
        p = profile(model_path, Path(tmp) / "out", args.method)
    s = p["summary"]
    print(f"machine: {os.cpu_count()} cores, load average "
          f"{', '.join(f'{v:.2f}' for v in os.getloadavg())}")
    print(f"imports {t_imports:.2f} s (not counted), RSS after imports {base_mb:.0f} MB")
    print(f"nodes {p['nodes']}, triangles {s['mesh']['triangles']}, solver "
          f"{s['solver']['method']} ({s['solver']['iterations']} iterations)")
    print(f"\n{'stage':<28} {'wall s':>8} {'RSS end MB':>11} {'peak MB':>9}")
    for name, t, rss, peak in p["rows"]:
        print(f"{name:<28} {t:>8.2f} {rss:>11.0f} {peak:>9.0f}")
    timings = s["timings_s"]
    covered = sum(timings.values())
    print("\nsummary.json timings_s: " + ", ".join(f"{k} {v:.2f}" for k, v in timings.items()))
    print(f"whole {p['whole']:.2f} s; timings_s sum {covered:.2f} s; not covered "
          f"{p['whole'] - covered:.2f} s")
    print(f"peak RSS {p['peak_mb']:.0f} MB = {p['peak_mb'] * 1024 / p['nodes']:.2f} kB/node "
          f"({(p['peak_mb'] - base_mb) * 1024 / p['nodes']:.2f} kB/node above the imports)")
    return 0


if __name__ == "__main__":
    sys.exit(main())
