"""The verification table: ``cases.toml`` and the model files in ``models/``, read as
package data (:mod:`importlib.resources`), so an installed heat2d carries them.

The table's layout is described at the top of ``cases.toml``. :func:`read_table`
checks every key and type, so a mistyped entry is an error naming the entry, not a
check that silently reads nothing.
"""

from __future__ import annotations

import tomllib
from collections.abc import Mapping
from dataclasses import dataclass, field
from functools import cache
from importlib.resources import as_file, files
from importlib.resources.abc import Traversable
from typing import Any

from ..model import Model, load

PACKAGE = "heat2d.verify"
TABLE_FILE = "cases.toml"
MODELS_DIR = "models"


class TableError(ValueError):
    """The verification table is malformed (a missing, unknown or mistyped key)."""


@dataclass(frozen=True)
class Book:
    """A source the cases cite."""

    title: str
    """As the check records cite it, e.g. "Incropera et al., ..., 6th ed."."""
    short: str
    """In the printed table's source column."""
    legend: str
    """In the key printed under the table: ``short = legend``."""
    separator: str = " "
    """Between the title and a section in a record's source."""


@dataclass(frozen=True)
class Tolerance:
    """The limit of a check: ``abs + rel·|reference|``, or the run's own ± at ``read``."""

    abs: float = 0.0
    rel: float = 0.0
    read: str | None = None

    def limit(self, reference: float, summary: Mapping[str, Any]) -> float:
        """The tolerance for ``reference``, given the run's ``summary``."""
        if self.read is not None:
            return float(lookup(summary, self.read))
        return self.abs + self.rel * abs(reference)


@dataclass(frozen=True)
class Check:
    """One comparison of a figure of a run with its reference value."""

    check: str
    read: str
    unit: str
    reference: float
    formula: str
    tolerance: Tolerance
    basis: str
    offset: float = 0.0
    divide: float = 1.0
    model: str | None = None
    """Another model of the case whose run this check reads (default: the case's)."""

    def computed(self, summary: Mapping[str, Any]) -> float:
        """The figure read from ``summary``, converted: (figure + offset) / divide."""
        return (float(lookup(summary, self.read)) + self.offset) / self.divide


@dataclass(frozen=True)
class Case:
    """One verification case: a model (or a study on it) and its checks."""

    name: str
    model: str
    book: Book
    section: str
    checks: tuple[Check, ...]
    params: Mapping[str, float] = field(default_factory=dict)
    estimate: bool = False
    study: str | None = None
    refine: tuple[float, ...] = ()

    @property
    def source(self) -> str:
        """The citation of the records: the book's title and the section."""
        if not self.section:
            return self.book.title
        return f"{self.book.title}{self.book.separator}{self.section}"

    def run_of(self, check: Check) -> tuple[str, tuple[tuple[str, float], ...]]:
        """The (model, params) whose run ``check`` reads: each distinct pair is solved
        once per case."""
        return check.model or self.model, tuple(sorted(self.params.items()))


@dataclass(frozen=True)
class Table:
    """The whole table: the books and the cases in order."""

    books: Mapping[str, Book]
    cases: tuple[Case, ...]

    def case(self, name: str) -> Case:
        """The case called ``name``; :class:`KeyError` if there is none."""
        for c in self.cases:
            if c.name == name:
                return c
        raise KeyError(name)

    @property
    def names(self) -> tuple[str, ...]:
        """The case names, in order."""
        return tuple(c.name for c in self.cases)


def lookup(summary: Mapping[str, Any], path: str) -> Any:
    """The value at ``path`` ("a/b/c") in a nested mapping; :class:`KeyError` naming the
    path if it is not there."""
    value: Any = summary
    for part in path.split("/"):
        if not isinstance(value, Mapping) or part not in value:
            raise KeyError(f"{path!r}: no {part!r} in the run's summary")
        value = value[part]
    return value


def model_file(name: str) -> Traversable:
    """The model file of a case, ``models/NAME.toml`` in the package."""
    return files(PACKAGE).joinpath(MODELS_DIR, f"{name}.toml")


def load_model(name: str, params: Mapping[str, float | str] | None = None) -> Model:
    """The model ``models/NAME.toml`` with ``params`` overriding its [params]."""
    with as_file(model_file(name)) as path:
        return load(path, params=params)


@cache
def read_table() -> Table:
    """The table of the package (``cases.toml``), read once."""
    text = files(PACKAGE).joinpath(TABLE_FILE).read_text(encoding="utf-8")
    return parse_table(tomllib.loads(text))


# ---------------------------------------------------------------------------------------
# Reading


_BOOK_KEYS = {"title": str, "short": str, "legend": str, "separator": str}
_CASE_KEYS = {"name": str, "model": str, "params": dict, "book": str, "section": str,
              "estimate": bool, "study": str, "refine": list, "check": list}
_CHECK_KEYS = {"check": str, "read": str, "offset": float, "divide": float, "unit": str,
               "reference": float, "formula": str, "tolerance": dict, "basis": str,
               "model": str}
_TOLERANCE_KEYS = {"abs": float, "rel": float, "read": str}
_REQUIRED_CHECK = ("check", "read", "unit", "reference", "formula", "tolerance", "basis")


def _keys(entry: str, table: Any, allowed: dict[str, type],
          required: tuple[str, ...] = ()) -> dict[str, Any]:
    """``table`` as a dict after checking its keys and their types."""
    if not isinstance(table, dict):
        raise TableError(f"{entry}: expected a table, got {table!r}")
    for key, value in table.items():
        want = allowed.get(key)
        if want is None:
            raise TableError(f"{entry}: unknown key {key!r} (allowed: "
                             f"{', '.join(sorted(allowed))})")
        ok = (isinstance(value, int | float) and not isinstance(value, bool)
              if want is float else isinstance(value, want))
        if not ok:
            raise TableError(f"{entry}: {key}: expected {want.__name__}, got {value!r}")
    missing = [k for k in required if k not in table]
    if missing:
        raise TableError(f"{entry}: missing {', '.join(missing)}")
    return table


def _numbers(entry: str, values: dict[str, Any]) -> dict[str, float]:
    out = {}
    for key, value in values.items():
        if not isinstance(value, int | float) or isinstance(value, bool):
            raise TableError(f"{entry}: params: {key}: expected a number, got {value!r}")
        out[key] = float(value)
    return out


def _tolerance(entry: str, raw: dict[str, Any]) -> Tolerance:
    spec = _keys(f"{entry}: tolerance", raw, _TOLERANCE_KEYS)
    if not spec or ("read" in spec and len(spec) > 1):
        raise TableError(f"{entry}: tolerance: give abs and/or rel, or read alone")
    return Tolerance(abs=float(spec.get("abs", 0.0)), rel=float(spec.get("rel", 0.0)),
                     read=spec.get("read"))


def _check(entry: str, raw: Any) -> Check:
    spec = _keys(entry, raw, _CHECK_KEYS, _REQUIRED_CHECK)
    if spec.get("divide", 1.0) == 0:
        raise TableError(f"{entry}: divide: must not be 0")
    return Check(check=spec["check"], read=spec["read"], unit=spec["unit"],
                 reference=float(spec["reference"]), formula=spec["formula"],
                 tolerance=_tolerance(entry, spec["tolerance"]), basis=spec["basis"],
                 offset=float(spec.get("offset", 0.0)), divide=float(spec.get("divide", 1.0)),
                 model=spec.get("model"))


def _case(i: int, raw: Any, books: Mapping[str, Book]) -> Case:
    name = raw.get("name", f"#{i + 1}") if isinstance(raw, dict) else f"#{i + 1}"
    entry = f"case {name!r}"
    spec = _keys(entry, raw, _CASE_KEYS, ("name", "model", "book", "check"))
    if spec["book"] not in books:
        raise TableError(f"{entry}: book {spec['book']!r} is not in [books] (known: "
                         f"{', '.join(sorted(books))})")
    checks = tuple(_check(f"{entry}, check {j + 1}", c) for j, c in enumerate(spec["check"]))
    if not checks:
        raise TableError(f"{entry}: no checks")
    refine = spec.get("refine", [])
    if not all(isinstance(f, int | float) and not isinstance(f, bool) and f > 0
               for f in refine):
        raise TableError(f"{entry}: refine: expected positive numbers, got {refine!r}")
    if ("study" in spec) != bool(refine):
        raise TableError(f"{entry}: a study needs refine, and refine needs a study")
    return Case(name=spec["name"], model=spec["model"], book=books[spec["book"]],
                section=spec.get("section", ""), checks=checks,
                params=_numbers(entry, spec.get("params", {})),
                estimate=spec.get("estimate", False), study=spec.get("study"),
                refine=tuple(float(f) for f in refine))


def parse_table(data: Mapping[str, Any]) -> Table:
    """A :class:`Table` from the TOML data of ``cases.toml``.

    Parameters
    ----------
    data
        The parsed TOML: ``books`` (a table of tables) and ``case`` (an array of tables).

    Returns
    -------
    Table
        The books and the cases, in file order.

    Raises
    ------
    TableError
        A missing, unknown or mistyped key, an unknown book or a repeated case name.
    """
    top = _keys("cases.toml", dict(data), {"books": dict, "case": list}, ("books", "case"))
    books = {}
    for key, raw in top["books"].items():
        spec = _keys(f"book {key!r}", raw, _BOOK_KEYS, ("title", "short", "legend"))
        books[key] = Book(**spec)
    cases = tuple(_case(i, raw, books) for i, raw in enumerate(top["case"]))
    names = [c.name for c in cases]
    repeated = sorted({n for n in names if names.count(n) > 1})
    if repeated:
        raise TableError(f"cases.toml: case {repeated[0]!r} appears more than once")
    return Table(books=books, cases=cases)
