"""Reading ``--vary`` and laying out the variants: the value lists, their checks against
the model's params, the grid (or zipped lists), the variant folder names and the order
the variants run in (grouped by geometry, then by matrix, so that each reuses the one
before)."""

from __future__ import annotations

import itertools
import math
import re
import sys
from collections.abc import Iterator, Mapping, Sequence
from dataclasses import dataclass
from typing import Any

from ..errors import ModelError
from ..model import Model
from ..model.expr import ExpressionError, evaluate

MAX_FOLDER_NAME = 80
"""Longest variant folder name; a longer ``NAME-VALUE_...`` name is cut and ends in a
digest of its values (paths stay well inside Windows' 260 characters)."""
MAX_VARIANTS = 10_000
"""Most variants one sweep runs, and most values one ``--vary`` list holds (guard: checked
on the counts before any value list or variant is built)."""


class Oversized(Sequence):
    """A ``--vary`` list longer than MAX_VARIANTS, kept as its length only: the sweep
    refuses it after checking its name against the model's params."""

    def __init__(self, count: int) -> None:
        self.count = count

    def __len__(self) -> int:
        return min(self.count, sys.maxsize)

    def __getitem__(self, index):  # never materialised
        raise IndexError("an oversized value list holds no values")

    def __iter__(self) -> Iterator[float]:
        return iter(())


# ---------------------------------------------------------------------------
# Reading --vary


def parse_values(text: str, *, name: str = "value") -> list[float | str] | Oversized:
    """Values from ``V1,V2,...``; an item ``start:stop:count`` is ``count`` evenly spaced
    values from start to stop, both included.

    Items that are not numbers are kept as expressions (checked by :func:`sweep`). A list
    of more than MAX_VARIANTS values is returned as an :class:`Oversized` count (ranges
    are counted before they are expanded), which :func:`sweep` refuses.

    Raises
    ------
    ModelError
        Empty list, empty item or a malformed range.
    """
    entry = f"--vary {name}"
    if not text.strip():
        raise ModelError("empty value list: give V1,V2,... or start:stop:count", entry=entry)
    items = [item.strip() for item in _split_top_level(text)]
    if "" in items:
        raise ModelError(f"empty value in {text!r}", entry=entry)
    counts = [_range(item, entry, count_only=True)[0] if ":" in item else 1 for item in items]
    if sum(counts) > MAX_VARIANTS:
        return Oversized(sum(counts))
    out: list[float | str] = []
    for item in items:
        if ":" in item:
            out += _range(item, entry)
        else:
            out.append(_number_or_expression(item))
    return out


def _split_top_level(text: str) -> list[str]:
    """Split at commas outside parentheses (``min(a, b)`` stays whole)."""
    parts, depth, start = [], 0, 0
    for i, ch in enumerate(text):
        depth += (ch == "(") - (ch == ")")
        if ch == "," and depth == 0:
            parts.append(text[start:i])
            start = i + 1
    parts.append(text[start:])
    return parts


def _range(item: str, entry: str, *, count_only: bool = False) -> list[float]:
    """The values of ``start:stop:count`` (with ``count_only``: ``[count]``)."""
    parts = item.split(":")
    problem = "expected start:stop:count"
    if len(parts) == 3:
        try:
            start, stop = float(parts[0]), float(parts[1])
            count = float(parts[2])
        except ValueError:
            pass
        else:
            if not (math.isfinite(start) and math.isfinite(stop)):
                problem = "start and stop must be finite numbers"
            elif not math.isfinite(count) or count != int(count) or count < 1:
                problem = f"count must be a whole number >= 1, got {parts[2].strip()}"
            else:
                n = int(count)
                if count_only:
                    return [n]
                if n == 1:
                    return [start]
                # Evenly spaced, rounded to 12 significant digits so that 0.1 steps stay
                # 0.1 steps (the CSV shows the value a `--set` would use).
                return [float(f"{start + (stop - start) * k / (n - 1):.12g}") for k in range(n)]
    raise ModelError(f"malformed range {item!r}: {problem}", entry=entry)


def _number_or_expression(item: str) -> float | str:
    try:
        value = float(item)
    except ValueError:
        return item
    return value if math.isfinite(value) else item


def parse_vary(items: Sequence[str]) -> dict[str, list[float | str]]:
    """``["NAME=V1,V2", "NAME2=start:stop:count", ...]`` -> ``{NAME: [values], ...}``.

    Raises
    ------
    ModelError
        Missing ``=``, a name given twice, an empty list or a malformed range.
    """
    out: dict[str, list[float | str]] = {}
    for item in items:
        name, sep, values = item.partition("=")
        name = name.strip()
        if not sep or not name:
            raise ModelError(f"expected NAME=V1,V2,... or NAME=start:stop:count, got {item!r}",
                             entry="--vary")
        if name in out:
            raise ModelError("given twice; list all its values in one --vary",
                             entry=f"--vary {name}")
        out[name] = parse_values(values, name=name)
    return out


def _check_vary(model: Model, vary: Mapping[str, Any], paired: bool
                ) -> dict[str, list[float | str]]:
    """The value lists, checked against the model's params before anything runs."""
    if not vary:
        raise ModelError("nothing to vary: give at least one NAME=V1,V2,...", entry="--vary")
    known = [n for n, _ in model.params]
    names = dict(model.params)
    out: dict[str, list[float | str]] = {}
    for name, values in vary.items():
        entry = f"--vary {name}"
        if name not in names:
            raise ModelError(f"no such parameter in [params] to vary (known: "
                             f"{', '.join(known) or 'none'})", file=model.source, entry=entry)
        if isinstance(values, str):
            values = parse_values(values, name=name)
        elif isinstance(values, int | float):
            values = [values]
        if len(values) > MAX_VARIANTS:
            count = getattr(values, "count", len(values))
            raise ModelError(f"{count if count < 10**15 else format(count, '.3g')} values are "
                             f"more than the {MAX_VARIANTS} "
                             "variants a sweep runs; use fewer values or several sweeps",
                             file=model.source, entry=entry)
        values = list(values)
        if not values:
            raise ModelError("empty value list", entry=entry)
        for v in values:
            if isinstance(v, bool) or not isinstance(v, int | float | str):
                raise ModelError(f"expected numbers or expressions, got {v!r}", entry=entry)
            if isinstance(v, str):
                try:
                    evaluate(v, names)
                except ExpressionError as exc:
                    raise ModelError(str(exc), entry=entry) from None
            elif not math.isfinite(v):
                raise ModelError(f"must be finite, got {v}", entry=entry)
        out[name] = [float(v) if isinstance(v, int | float) else v for v in values]
    if paired:
        lengths = {len(v) for v in out.values()}
        if len(lengths) > 1:
            counts = ", ".join(f"{n}: {len(v)}" for n, v in out.items())
            raise ModelError(f"--zip needs lists of one length ({counts})", entry="--vary")
    total = len(next(iter(out.values()))) if paired else math.prod(len(v) for v in out.values())
    if total > MAX_VARIANTS:
        counts = " × ".join(f"{len(v)} {n}" for n, v in out.items())
        raise ModelError(f"the grid has {total} variants ({counts}), more than the "
                         f"{MAX_VARIANTS} a sweep runs; use fewer values, --zip, or several "
                         "sweeps", file=model.source, entry="--vary")
    return out


# ---------------------------------------------------------------------------
# Variants


@dataclass
class _Variant:
    index: int
    name: str
    values: dict[str, float | str]
    model: Model | None = None
    error: str | None = None
    digest: str = ""


def _grid(vary: dict[str, list[float | str]], paired: bool) -> list[dict[str, float | str]]:
    names = list(vary)
    if paired:
        count = len(next(iter(vary.values())))
        return [{n: vary[n][k] for n in names} for k in range(count)]
    return [dict(zip(names, combo, strict=True))
            for combo in itertools.product(*(vary[n] for n in names))]


def _show(value: float | str) -> str:
    return format(value, ".10g") if isinstance(value, float) else str(value)


# Folder names: ``NAME-VALUE`` pairs joined by ``_`` (``h_air-10_p_die-2``). Param names
# are letters, digits and ``_``, so the ``-`` after a name always starts its value (a
# negative value reads ``t--2``). Kept: letters, digits, ``.``, ``+``, ``-`` (legal on
# Windows, macOS and Linux); any other run of characters in an expression becomes ``~``
# (``2*t`` -> ``2~t``). inputs.json keeps the exact values.
_UNSAFE = re.compile(r"[^A-Za-z0-9.+-]+")


def _folder_piece(name: str, value: float | str) -> str:
    text = _UNSAFE.sub("~", _show(value)).strip("~") or "~"
    return f"{name}-{text}"


def _folder_names(grid: list[dict[str, float | str]]) -> list[str]:
    """``NAME-VALUE_NAME-VALUE`` per variant: safe on every file system, unique (also
    when compared without case, as Windows and macOS do) and at most MAX_FOLDER_NAME
    characters (a longer one keeps its start and ends in a digest of its values)."""
    import hashlib

    names, used = [], set()
    for values in grid:
        name = "_".join(_folder_piece(n, v) for n, v in values.items())
        if len(name) > MAX_FOLDER_NAME:
            digest = hashlib.sha256(repr(sorted(values.items())).encode()).hexdigest()[:8]
            name = f"{name[:MAX_FOLDER_NAME - 9].rstrip('.~_')}_{digest}"
        # Windows refuses a name ending in "." (never produced above, checked anyway).
        base, copy = name.rstrip("."), 2
        name = base
        while name.lower() in used:
            name, copy = f"{base}_copy{copy}", copy + 1
        used.add(name.lower())
        names.append(name)
    return names


def legacy_folder_name(values: Mapping[str, float | str], index: int) -> str:
    """The folder name earlier heat2d sweeps gave a variant (``NAME=VALUE,...``, or
    ``variantNNNN`` when long): found and renamed by :func:`.store.adopt_legacy`."""
    name = ",".join(f"{n}={_show(v)}" for n, v in values.items())
    name = re.sub(r"[^A-Za-z0-9._=+,-]", "_", name)
    return name if len(name) <= 120 else f"variant{index + 1:04d}"


# ---------------------------------------------------------------------------
# The run order


def _matrix_key(model: Model) -> tuple:
    """What the conduction matrix depends on beyond the mesh (not powers, ambients or
    fixed temperatures): variants with equal keys share one factorization."""
    return (model.materials, tuple(s.material for s in model.shapes),
            tuple((b.kind, b.h, b.emissivity, b.surroundings) for b in model.boundaries),
            tuple(i.resistance for i in model.interfaces))


def _run_order(variants: list[_Variant], refine: float) -> list[_Variant]:
    """Variants grouped by geometry, then by matrix, each group in grid order."""
    from ..pipeline import geometry_key

    groups: dict[Any, dict[Any, list[_Variant]]] = {}
    for v in variants:
        groups.setdefault(geometry_key(v.model, refine), {}).setdefault(
            _matrix_key(v.model), []).append(v)
    return [v for g in groups.values() for sub in g.values() for v in sub]

