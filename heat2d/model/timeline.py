"""Values that follow time, and the settings of a transient run.

:class:`Schedule` is a value against time (a pulse train, a piecewise-linear table or a
table of steps); :class:`TransientSettings` holds the ``[transient]`` section. The reader
mixin :class:`TimelineReader` checks that section and the schedule keys of shapes,
layers, stacks and boundaries (``power_pulse``, ``power_table``, ``power_steps``,
``current_pulse``, ``current_table``, ``current_steps``, ``temperature_table``,
``ambient_table``, ``h_table``).
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass, replace
from typing import Any

import numpy as np

from . import ranges
from .base import BaseReader, brief
from .schema import ABSOLUTE_ZERO_C

SCHEDULE_KINDS = ("pulse", "linear", "steps")
INITIAL_KINDS = ("steady", "ambient")
DEFAULT_DUTIES = (0.01, 0.02, 0.05, 0.1, 0.2, 0.5)


@dataclass(frozen=True)
class Schedule:
    """A value that follows time (s).

    ``kind`` is ``pulse`` (``amplitude`` during each pulse of ``width`` s, starting at
    ``delay`` and repeated every ``period`` s ``count`` times; ``base`` between pulses),
    ``linear`` (``points`` (s, value) interpolated linearly, held beyond the ends) or
    ``steps`` (each point's value holds from its time on).
    """

    kind: str
    points: tuple[tuple[float, float], ...] = ()
    amplitude: float = 0.0
    base: float = 0.0
    width: float = 0.0
    period: float | None = None
    count: int | None = None
    delay: float = 0.0

    @property
    def pulses(self) -> int | None:
        """Number of pulses (None: unlimited)."""
        if self.period is None:
            return 1
        return self.count

    def at(self, t: float | np.ndarray) -> np.ndarray | float:
        """The value at time(s) ``t`` (s); a float for a scalar ``t``."""
        scalar = np.ndim(t) == 0
        tt = np.asarray(t, dtype=float)
        if self.kind == "pulse":
            # Right-continuous at the edges, which are found to a relative 1e-9 of the
            # period (an edge time computed as delay + j·period + width is on its edge).
            since = tt - self.delay
            tol = 1e-9 * (self.period or self.width)
            if self.period is None:
                j = np.zeros_like(since)
                phase = since
            else:
                j = np.floor((since + tol) / self.period)
                phase = since - j * self.period
            on = (since >= -tol) & (phase < self.width - tol)
            if self.pulses is not None:
                on &= j < self.pulses
            out = np.where(on, self.amplitude, self.base)
        else:
            times, values = (np.array(c, dtype=float) for c in zip(*self.points, strict=True))
            if self.kind == "linear":
                out = np.interp(tt, times, values)
            else:
                k = np.clip(np.searchsorted(times, tt, side="right") - 1, 0, len(times) - 1)
                out = values[k]
        return float(out) if scalar else np.asarray(out, dtype=float)

    def breaks(self, end: float) -> np.ndarray:
        """Sorted times in (0, end] where the value jumps or its slope changes."""
        if self.kind == "pulse":
            if self.period is None:
                n = 1
            else:
                n = int(max(0.0, np.floor((end - self.delay) / self.period)) + 1)
                if self.pulses is not None:
                    n = min(n, self.pulses)
            starts = self.delay + np.arange(n) * (self.period or 0.0)
            edges = np.concatenate([starts, starts + self.width])
        else:
            edges = np.array([p[0] for p in self.points], dtype=float)
        edges = edges[(edges > 0) & (edges <= end)]
        return np.unique(edges)

    @property
    def initial(self) -> float:
        """The value just before t = 0: ``base`` for a pulse, the first value of a table."""
        if self.kind == "pulse":
            return float(self.base)
        return float(self.points[0][1])

    @property
    def peak(self) -> float:
        """The largest value the schedule takes."""
        if self.kind == "pulse":
            return float(max(self.amplitude, self.base))
        return float(max(v for _, v in self.points))


@dataclass(frozen=True)
class TransientSettings:
    """The ``[transient]`` section: times in s, temperatures in °C.

    Reports at ``every``, 2·``every``, ... ``end``, or else log-spaced from ``first``
    (default ``end``·1e-6) with ``per_decade`` times per decade up to ``end``.
    """

    end: float
    first: float | None = None
    per_decade: int = 10
    every: float | None = None
    initial: str | float = "steady"
    tolerance: float = 0.01
    snapshots: tuple[float, ...] | None = None
    zth: bool = True
    foster_terms: int | None = None
    duties: tuple[float, ...] = DEFAULT_DUTIES
    line: int | None = None
    start_temperature: float | None = None
    """The uniform temperature (°C) at t = 0 when ``initial`` is "ambient" (the common
    ambient of the boundaries) or a number; None for "steady"."""

    @property
    def log_spaced(self) -> bool:
        return self.every is None

    @property
    def start(self) -> float:
        """The first report time (s)."""
        if self.every is not None:
            return self.every
        return self.first if self.first is not None else self.end * 1e-6

    def report_times(self) -> np.ndarray:
        """Report times (s), increasing, ``end`` last; t = 0 is not included."""
        if self.every is not None:
            n = int(np.floor(self.end / self.every * (1 + 1e-12)))
            times = self.every * np.arange(1, n + 1)
        else:
            first = self.start
            n = int(np.floor(self.per_decade * np.log10(self.end / first) + 1e-9))
            times = first * 10.0 ** (np.arange(n + 1) / self.per_decade)
        times = times[times < self.end * (1 - 1e-12)]
        return np.append(times, self.end)

    def snapshot_times(self) -> np.ndarray:
        """Times (s) of the field snapshots: as given, or one per decade of the report
        times (from the first report time) and ``end``."""
        if self.snapshots is not None:
            return np.array(sorted(set(self.snapshots)), dtype=float)
        first = self.start
        n = int(np.floor(np.log10(self.end / first) + 1e-9))
        times = first * 10.0 ** np.arange(n + 1)
        times = times[times < self.end * (1 - 1e-12)]
        return np.append(times, self.end)


class TimelineReader(BaseReader):
    """Reads ``[transient]`` and the schedule keys; ``transient`` is set (or None) before
    the shapes and boundaries are read."""

    transient: TransientSettings | None = None

    def read_transient(self, raw: Any) -> TransientSettings | None:
        if raw is None:
            return None
        entry, where = "[transient]", ("transient", 0)
        raw = self.table(raw, entry, "transient", ("", 0))
        self.check_keys(raw, "transient", entry, where)
        line = self.index.find(*where)
        if "end" not in raw:
            raise self.fail(entry, "needs end = the length of the run in s", line)
        end = self.number(raw["end"], entry, "end", where, low=0.0, low_open=True,
                          high=ranges.TIME_END_S, what=" s")
        if "every" in raw and ("first" in raw or "per_decade" in raw):
            raise self.fail(entry, "give every (evenly spaced reports) or first/per_decade "
                            "(log-spaced), not both", self.index.find(*where, "every"))
        first = every = None
        if "first" in raw:
            first = self.number(raw["first"], entry, "first", where,
                                low=ranges.TIME_FIRST_S, what=" s")
            if first >= end:
                raise self.fail(entry, f"first: must be less than end = {end:g} s, got "
                                f"{first:g}", self.index.find(*where, "first"))
        if "every" in raw:
            every = self.number(raw["every"], entry, "every", where, low=0.0, low_open=True,
                                what=" s")
            if every >= end:
                raise self.fail(entry, f"every: must be less than end = {end:g} s, got "
                                f"{every:g}", self.index.find(*where, "every"))
            if end / every > ranges.MAX_REPORT_TIMES:
                raise self.fail(entry, f"every: gives {end / every:.3g} report times, at "
                                f"most {ranges.MAX_REPORT_TIMES} allowed",
                                self.index.find(*where, "every"))
        per_decade = self.whole(raw.get("per_decade", 10), entry, "per_decade", where,
                                ranges.PER_DECADE)
        start = every if every is not None else (first if first is not None else end * 1e-6)
        if every is None and per_decade * np.log10(end / start) + 1 > ranges.MAX_REPORT_TIMES:
            raise self.fail(entry, f"per_decade: gives more than {ranges.MAX_REPORT_TIMES} "
                            "report times", self.index.find(*where, "per_decade"))
        initial = raw.get("initial", "steady")
        if isinstance(initial, str) and initial.strip() in INITIAL_KINDS:
            initial = initial.strip()
        else:
            if isinstance(initial, str) and not _looks_numeric(initial):
                raise self.fail(entry, f"initial: expected \"steady\", \"ambient\" or a "
                                f"temperature in °C, got {brief(initial)}",
                                self.index.find(*where, "initial"))
            initial = self.number(initial, entry, "initial", where, low=ABSOLUTE_ZERO_C,
                                  low_open=True, high=ranges.TEMPERATURE_C, what=" °C")
        tolerance = self.number(raw.get("tolerance", 0.01), entry, "tolerance", where,
                                low=0.0, low_open=True, high=ranges.ACCURACY_K, what=" K")
        snapshots = None
        if "snapshots" in raw:
            snapshots = tuple(self.time_list(raw["snapshots"], entry, "snapshots", where,
                                             low=0.0, high=end, unit="s",
                                             limit=ranges.MAX_SNAPSHOTS))
        zth = raw.get("zth", True)
        if not isinstance(zth, bool):
            raise self.fail(entry, "zth: expected true or false",
                            self.index.find(*where, "zth"))
        terms = None
        if "foster_terms" in raw:
            terms = self.whole(raw["foster_terms"], entry, "foster_terms", where,
                               ranges.FOSTER_TERMS)
        duties = DEFAULT_DUTIES
        if "duties" in raw:
            duties = tuple(self.time_list(raw["duties"], entry, "duties", where, low=0.0,
                                          high=1.0, unit="", open_ends=True, limit=100))
        return TransientSettings(end=end, first=first, per_decade=per_decade, every=every,
                                 initial=initial, tolerance=tolerance, snapshots=snapshots,
                                 zth=zth, foster_terms=terms, duties=duties, line=line,
                                 start_temperature=None if isinstance(initial, str)
                                 else initial)

    def start_state(self, settings: TransientSettings | None, boundaries: Sequence[Any]
                    ) -> TransientSettings | None:
        """Settings with the start temperature of ``initial = "ambient"``: the one value
        that every fixed temperature, ambient and surroundings takes at t = 0."""
        if settings is None or settings.initial != "ambient":
            return settings
        seen: dict[float, str] = {}
        for b in boundaries:
            for key in ("temperature", "ambient", "surroundings"):
                value = getattr(b, key)
                schedule = b.schedule(key) if key != "surroundings" else None
                if schedule is not None:
                    value = float(schedule.at(0.0))
                if value is not None:
                    seen.setdefault(round(value, 9), f"boundary {b.name!r} {key}")
        line = self.index.find("transient", 0, "initial")
        if not seen:
            raise self.fail("[transient]", "initial: \"ambient\" needs a boundary with a "
                            "temperature or an ambient; give a temperature in °C", line)
        if len(seen) > 1:
            (a, wa), (b, wb) = list(seen.items())[:2]
            raise self.fail("[transient]", f"initial: \"ambient\" is ambiguous, the "
                            f"boundaries differ at t = 0 ({wa} = {a:g} °C, {wb} = {b:g} °C); "
                            "give the start temperature in °C", line)
        return replace(settings, start_temperature=next(iter(seen)))

    # -- helpers
    def whole(self, value: Any, entry: str, key: str, where: tuple[str, int],
              bounds: tuple[float, float]) -> int:
        v = self.number(value, entry, key, where, low=bounds[0], high=bounds[1])
        if v != int(v):
            raise self.fail(entry, f"{key}: must be a whole number, got {v:g}",
                            self.index.find(*where, key.split(".")[0]))
        return int(v)

    def time_list(self, value: Any, entry: str, key: str, where: tuple[str, int], *,
                  low: float, high: float, unit: str, open_ends: bool = False,
                  limit: int = ranges.MAX_REPORT_TIMES) -> list[float]:
        """A list of numbers in [low, high] ((low, high) with ``open_ends``)."""
        line = self.index.find(*where, key)
        if not isinstance(value, list) or not value:
            raise self.fail(entry, f"{key}: expected a list of numbers, got {brief(value)}",
                            line)
        if len(value) > limit:
            raise self.fail(entry, f"{key}: at most {limit} values, got {len(value)}", line)
        out = []
        what = f" {unit}" if unit else ""
        for j, v in enumerate(value):
            x = self.number(v, entry, f"{key}[{j}]", where)
            bad = (x <= low or x >= high) if open_ends else (x < low or x > high)
            if bad:
                rel = ("strictly between" if open_ends else "between")
                raise self.fail(entry, f"{key}[{j}]: must be {rel} {low:g} and {high:g}"
                                f"{what}, got {x:g}", line)
            out.append(x)
        return out

    def needs_transient(self, entry: str, key: str, where: tuple[str, int]) -> None:
        if self.transient is None:
            raise self.fail(entry, f"{key} needs a [transient] section (a value that "
                            "follows time makes the model transient)",
                            self.index.find(*where, key))

    def schedule(self, spec: dict[str, Any], entry: str, where: tuple[str, int],
                 quantity: str, *, base: float = 0.0, unit: str, high: float,
                 low: float = 0.0) -> Schedule | None:
        """The one schedule of ``quantity`` (``power`` or ``current``) a shape, layer or
        stack gives: ``QUANTITY_pulse``, ``QUANTITY_table`` or ``QUANTITY_steps``."""
        keys = [f"{quantity}_{k}" for k in ("pulse", "table", "steps") if
                f"{quantity}_{k}" in spec]
        if not keys:
            return None
        if len(keys) > 1:
            raise self.fail(entry, f"give at most one of {', '.join(keys)}",
                            self.index.find(*where, keys[1]))
        key = keys[0]
        self.needs_transient(entry, key, where)
        if key.endswith("_pulse"):
            return self.pulse(spec[key], entry, key, where, quantity, base=base, unit=unit,
                              high=high, low=low)
        kind = "linear" if key.endswith("_table") else "steps"
        return Schedule(kind, self.time_table(spec[key], entry, key, where, unit=unit,
                                              low=low, high=high))

    def pulse(self, raw: Any, entry: str, key: str, where: tuple[str, int], quantity: str,
              *, base: float, unit: str, high: float, low: float) -> Schedule:
        pulse = self.table(raw, entry, key, where)
        allowed = {quantity, "width", "period", "count", "delay"}
        line = self.index.find(*where, key)
        extra = sorted(set(pulse) - allowed)
        if extra:
            raise self.fail(entry, f"{key}: unknown key {extra[0]!r} (allowed: "
                            f"{', '.join(sorted(allowed))})", line)
        for need in (quantity, "width"):
            if need not in pulse:
                raise self.fail(entry, f"{key}: needs {need} ({{ {quantity} = .., width = "
                                "s, period = s, count = .., delay = s }})", line)
        amplitude = self.number(pulse[quantity], entry, f"{key}.{quantity}", where, low=low,
                                high=high, what=f" {unit}")
        width = self.number(pulse["width"], entry, f"{key}.width", where, low=0.0,
                            low_open=True, high=ranges.TIME_END_S, what=" s")
        period = count = None
        if "period" in pulse:
            period = self.number(pulse["period"], entry, f"{key}.period", where, low=0.0,
                                 low_open=True, high=ranges.TIME_END_S, what=" s")
            if width >= period:
                raise self.fail(entry, f"{key}: width {width:g} s must be less than the "
                                f"period {period:g} s", line)
        if "count" in pulse:
            count = self.whole(pulse["count"], entry, f"{key}.count", where,
                               (1, ranges.PULSE_COUNT))
            if period is None and count > 1:
                raise self.fail(entry, f"{key}: count > 1 needs a period", line)
        delay = self.number(pulse.get("delay", 0.0), entry, f"{key}.delay", where, low=0.0,
                            high=ranges.TIME_END_S, what=" s")
        return Schedule("pulse", amplitude=amplitude, base=base, width=width, period=period,
                        count=count, delay=delay)

    def time_table(self, value: Any, entry: str, key: str, where: tuple[str, int], *,
                   unit: str, low: float | None, high: float | None,
                   low_open: bool = False) -> tuple[tuple[float, float], ...]:
        """Rows [s, value], times >= 0 and increasing."""
        line = self.index.find(*where, key)
        if not isinstance(value, list) or not value:
            raise self.fail(entry, f"{key}: expected a table [[s, {unit}], ...], got "
                            f"{brief(value)}", line)
        if len(value) > ranges.MAX_REPORT_TIMES:
            raise self.fail(entry, f"{key}: at most {ranges.MAX_REPORT_TIMES} rows, got "
                            f"{len(value)}", line)
        rows: list[tuple[float, float]] = []
        for j, row in enumerate(value):
            if not isinstance(row, list) or len(row) != 2:
                raise self.fail(entry, f"{key}[{j}]: expected [s, {unit}], got {brief(row)}",
                                line)
            t = self.number(row[0], entry, f"{key}[{j}] time", where, low=0.0,
                            high=ranges.TIME_END_S, what=" s")
            v = self.number(row[1], entry, f"{key}[{j}] value", where, low=low, high=high,
                            low_open=low_open, what=f" {unit}")
            if rows and t <= rows[-1][0]:
                raise self.fail(entry, f"{key}: table times must increase, got "
                                f"{rows[-1][0]:g} then {t:g} s", line)
            rows.append((t, v))
        return tuple(rows)


def _looks_numeric(text: str) -> bool:
    """True for an expression string (anything but a bare word)."""
    return not text.strip().isalpha()
