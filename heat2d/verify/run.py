"""Running the verification table: each case's models solved once, each check a record.

A record is a plain dict::

    {"case", "check", "source", "unit", "reference", "computed", "error", "tolerance",
     "basis", "passed", "seconds"}

``error`` is |computed − reference| and ``tolerance`` the limit it must not exceed, both
in ``unit``; ``basis`` says why the tolerance has its size; ``seconds`` is the time the
whole case took. The records of a study (the manufactured solution) also carry its
``convergence`` series. The cases, their checks and tolerances are the rows of
``cases.toml`` (see :mod:`heat2d.verify.table`).
"""

from __future__ import annotations

import math
import time
from collections.abc import Iterable, Mapping
from typing import Any

from . import table
from .manufactured import STUDIES
from .table import Case, Check

Record = dict[str, Any]
"""One check's outcome (see the module docstring)."""

CASES: tuple[str, ...] = table.read_table().names
"""The names of the verification cases, in the order they run."""


def check_record(case: Case, check: Check, summary: Mapping[str, Any]) -> Record:
    """The record of ``check`` against a run's ``summary`` (or a study's result)."""
    computed = check.computed(summary)
    tolerance = check.tolerance.limit(check.reference, summary)
    error = abs(computed - check.reference)
    return {"case": case.name, "check": check.check, "source": case.source,
            "unit": check.unit, "reference": float(check.reference),
            "computed": float(computed), "error": float(error),
            "tolerance": float(tolerance), "basis": check.basis,
            "passed": bool(math.isfinite(computed) and error <= tolerance)}


def run_case(case: Case) -> list[Record]:
    """Solve the models of ``case`` (each distinct model and params once) and check them.

    Parameters
    ----------
    case
        A row of the table.

    Returns
    -------
    list of dict
        One record per check, in the table's order (without ``seconds``).
    """
    from ..pipeline import run as solve_model  # the solver stack loads on first use

    if case.study is not None:
        model = table.load_model(case.model, case.params)
        result = STUDIES[case.study](model, case.refine)
        records = [check_record(case, c, result) for c in case.checks]
        if "convergence" in result:
            for record in records:
                record["convergence"] = result["convergence"]
        return records
    summaries: dict[tuple[str, tuple[tuple[str, float], ...]], Mapping[str, Any]] = {}
    records = []
    for check in case.checks:
        key = case.run_of(check)
        if key not in summaries:
            name, params = key
            model = table.load_model(name, dict(params))
            summaries[key] = solve_model(model, estimate=case.estimate,
                                         resistances=False).summary
        records.append(check_record(case, check, summaries[key]))
    return records


def failed_case(name: str, exc: Exception) -> Record:
    """The one record of a case that raised: failed, its ``check`` naming the exception."""
    return {"case": name, "check": f"{type(exc).__name__}: {exc}", "source": "",
            "unit": "", "reference": None, "computed": None, "error": None,
            "tolerance": None, "basis": "the case raised", "passed": False}


def verify(*, cases: Iterable[str] | None = None, raise_errors: bool = False
           ) -> list[Record]:
    """Run verification cases and return their check records.

    Parameters
    ----------
    cases
        Names from :data:`CASES`; all by default.
    raise_errors
        Let an exception inside a case propagate instead of recording it as a failure.

    Returns
    -------
    list of dict
        One record per check (see the module docstring). A case that raises gives one
        failed record whose ``check`` holds the exception.

    Raises
    ------
    ValueError
        An unknown case name.
    """
    rows = table.read_table()
    names = list(rows.names) if cases is None else list(cases)
    unknown = [n for n in names if n not in rows.names]
    if unknown:
        raise ValueError(f"unknown verification case {unknown[0]!r} (choose from: "
                         f"{', '.join(sorted(rows.names))})")
    records: list[Record] = []
    for name in names:
        start = time.perf_counter()
        try:
            new = run_case(rows.case(name))
        except Exception as exc:  # a case that cannot run has failed verification
            if raise_errors:
                raise
            new = [failed_case(name, exc)]
        seconds = time.perf_counter() - start
        for record in new:
            record["seconds"] = seconds
        records += new
    return records
