"""Shared pytest set-up: hypothesis profiles and the ``slow`` marker.

Profiles (chosen by the environment variable ``HYPOTHESIS_PROFILE``, default ``ci``):

- ``ci``: few examples, derandomized (the same examples on every run, so CI is
  repeatable), no example database (nothing written into the repository), a 20 s
  deadline per example (a valid run takes 0.2-2 s, ten times that on a loaded
  machine), no shrinking (a failure shows the model as generated).
  tests/test_properties.py stays under about a minute with it.
- ``shrink``: ``ci`` with shrinking: the same examples, and the smallest failing model.
- ``slow``: many examples, random, still without a database; tests marked ``slow``
  run only under this profile and are skipped otherwise (``-m "not slow"`` is not
  needed). The long fuzzing run is benchmarks/fuzz_models.py.
"""

from __future__ import annotations

import os

import pytest
from hypothesis import HealthCheck, Phase, settings

_QUIET = [HealthCheck.too_slow, HealthCheck.data_too_large, HealthCheck.filter_too_much]
# No shrinking in CI: shrinking a breach of these tests can take minutes. The ``shrink``
# profile is ``ci`` with shrinking, to get the smallest model of a CI failure.
_CI = dict(max_examples=20, deadline=20_000, derandomize=True, database=None,
           print_blob=False, suppress_health_check=_QUIET)
settings.register_profile("ci", phases=[Phase.explicit, Phase.reuse, Phase.generate], **_CI)
settings.register_profile("shrink", **_CI)
settings.register_profile("slow", max_examples=1000, deadline=30_000, database=None,
                          print_blob=True, suppress_health_check=_QUIET)
PROFILE = os.environ.get("HYPOTHESIS_PROFILE", "ci")
settings.load_profile(PROFILE)


def pytest_collection_modifyitems(config: pytest.Config, items: list[pytest.Item]) -> None:
    """Skip tests marked ``slow`` unless HYPOTHESIS_PROFILE=slow."""
    if PROFILE == "slow":
        return
    skip = pytest.mark.skip(reason="slow: set HYPOTHESIS_PROFILE=slow to run")
    for item in items:
        if "slow" in item.keywords:
            item.add_marker(skip)
