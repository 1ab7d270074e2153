"""The plausible range of every number a model holds, checked by the reader.

Each bound is a pair (lowest, highest) in the key's SI unit; lengths are given in metres
and converted to the model's ``length_unit`` when checked. The table in
docs/model-format.md ("Limits and ranges") lists the same values and where each comes
from: most are guards, far outside any board or package (common practice), that keep
the mesher and the solver inside the float range and name the entry when a value
slipped by orders of magnitude.
"""

from __future__ import annotations

from .expr import MAX_MAGNITUDE

SIZE_M = (1e-9, 1e3)
"""A positive length (widths, heights, radii, thicknesses, via sizes, depth), metres."""
COORDINATE_M = 1e3
"""Largest magnitude of a coordinate or offset (x, y, points, dx, dy, box, probe), metres."""
MESH_SIZE_M = (1e-9, 1e6)
"""A target element size, metres (coarser than the model is harmless)."""
CONDUCTIVITY = (1e-12, 1e15)
"""k, kx, ky in W/(m·K): silica aerogel is about 0.01, diamond about 2000; the guard is
wide so that near-insulators and near-perfect conductors stay usable as modelling tools."""
FILM_COEFFICIENT = (1e-3, 1e7)
"""h in W/(m²·K): gases 2..250 (reference facts §2), boiling and condensation up to
about 1e5; above that h stands in for a fixed temperature."""
TEMPERATURE_C = 5000.0
"""Highest temperature (fixed, ambient, surroundings, limits, table points), °C; the
lowest is absolute zero (exclusive)."""
POWER_W = 1e9
"""Largest power of one shape or layer, W."""
POWER_DENSITY = 1e18
"""Largest power density, W/m³ (chip hot spots are about 1e12)."""
HEAT_FLUX = 1e10
"""Largest magnitude of an imposed heat flux, W/m²."""
RESISTANCE = (1e-12, 1e3)
"""Contact resistance R″ in m²·K/W (thermal pads and greases 1e-6..1e-3)."""
REPEAT_COUNT = 2000
"""Most copies of one repeated shape (the whole model holds at most MAX_SHAPES)."""
MAX_SHAPES = 2000
"""Most shapes in a model once repeats and stack layers are expanded: the painting,
statistics and map take about half a minute per thousand shapes on a laptop (measured:
1000 repeated copies, 34 s), and a cross-section rarely needs more than a few hundred."""
MAX_POLYGON_POINTS = 20_000
"""Most points of one polygon: as many as the chords of the largest circle allowed."""
MAX_NAME = 200
"""Longest name of a shape, stack, layer, material, boundary, interface, probe or cut."""
ACCURACY_K = 1e4
"""Largest requested accuracy, K (any positive value below is allowed)."""
MAX_NODES = 1e9
"""Largest adaptive node budget and node limit."""
NODE_LIMIT = 5_000_000
"""Default node limit of one mesh (``[mesh] node_limit``, ``--node-limit``): about 1 GB of
mesh and matrix on a laptop."""
MIN_NODE_LIMIT = 1000
"""Smallest node limit that may be set."""
MAX_TOML_DEPTH = 10
"""Deepest nesting of tables and arrays in a model file (the deepest valid key, a
conductivity table row, is 5 deep)."""
MAX_INTEGER = MAX_MAGNITUDE
"""Largest magnitude of a number written in the model text."""
DENSITY = (1.0, 30_000.0)
"""Density in kg/m³: aerogels and foams about 10..100, osmium 22 590 (the densest
element); the guard spans both."""
SPECIFIC_HEAT = (50.0, 10_000.0)
"""Specific heat in J/(kg·K): lead and gold about 130, water 4180, hydrogen gas 14 300
lies outside (solids and liquids only)."""
RESISTIVITY = (1e-9, 1e3)
"""Electrical resistivity in Ω·m: silver 1.6e-8, graphite and doped silicon up to about
1e-3..1; insulators carry no current and take no resistivity."""
TEMPERATURE_COEFFICIENT = (-0.01, 0.05)
"""Temperature coefficient of resistivity in 1/K: metals about 0.004 (copper 0.00393),
carbon and some alloys slightly negative."""
CURRENT_A = 1e5
"""Largest magnitude of a conductor's current, A."""
TIME_END_S = 1e7
"""Longest transient run, s (about four months); also bounds every time in a schedule."""
TIME_FIRST_S = 1e-9
"""Earliest first report time of a log-spaced run, s."""
PER_DECADE = (1, 100)
"""Report times per decade of a log-spaced run."""
MAX_REPORT_TIMES = 100_000
"""Most report times of a run (and rows of a time table)."""
MAX_SNAPSHOTS = 10_000
"""Most field snapshots of a run."""
FOSTER_TERMS = (1, 12)
"""Terms of a fitted Foster network."""
PULSE_COUNT = 1_000_000
"""Most pulses of a pulse train."""
MAX_TABLE_ROWS = 10_000
"""Most rows of a property table against temperature."""
