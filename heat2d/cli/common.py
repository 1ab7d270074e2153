"""What every subcommand shares: exit statuses, argument errors, ``--set`` parsing and the
announcement of slow stages."""

from __future__ import annotations

import threading
import time
from collections.abc import Sequence

EXIT_OK, EXIT_FAILURE, EXIT_BAD_INPUT, EXIT_LIMIT = 0, 1, 2, 3
"""Exit statuses: success, internal or solver failure, bad input (nothing written), a
temperature limit exceeded under ``--strict`` (outputs are written)."""
SLOW_STAGE_S = 1.0
"""Stages that take longer than this are announced on the terminal."""


class UsageError(Exception):
    """A command-line argument is malformed."""


def parse_sets(items: Sequence[str]) -> dict[str, str]:
    """``--set NAME=VALUE`` items as a dict; :class:`UsageError` on a malformed item."""
    out = {}
    for item in items:
        name, sep, value = item.partition("=")
        if not sep or not name.strip() or not value.strip():
            raise UsageError(f"--set: expected NAME=VALUE, got {item!r}")
        out[name.strip()] = value.strip()
    return out


class Announcer:
    """Prints a stage's name once it has run for SLOW_STAGE_S, and its time when it ends."""

    def __init__(self, stream) -> None:
        self.stream = stream
        self.timer: threading.Timer | None = None
        self.started = 0.0
        self.shown = False

    def __call__(self, stage: str, event: str) -> None:
        if event == "start":
            self.started, self.shown = time.perf_counter(), False
            self.timer = threading.Timer(SLOW_STAGE_S, self._show, args=(stage,))
            self.timer.daemon = True
            self.timer.start()
        else:
            if self.timer:
                self.timer.cancel()
            if self.shown and event == "end":
                print(f"  {stage} done in {time.perf_counter() - self.started:.1f} s",
                      file=self.stream, flush=True)

    def _show(self, stage: str) -> None:
        self.shown = True
        print(f"  {stage} ...", file=self.stream, flush=True)
