"""What every subcommand shares: exit statuses, argument errors, ``--set`` parsing and the
announcement of slow stages."""

from __future__ import annotations

import signal
import threading
import time
from collections.abc import Sequence
from typing import Any

EXIT_OK, EXIT_FAILURE, EXIT_BAD_INPUT, EXIT_LIMIT = 0, 1, 2, 3
"""Exit statuses: success, internal or solver failure, bad input (nothing written), a
temperature limit exceeded under ``--strict`` (outputs are written)."""
EXIT_INTERRUPTED, EXIT_TERMINATED = 130, 143
"""Exit statuses after Ctrl-C (SIGINT) and SIGTERM: 128 + the signal number, as shells
report a process killed by it. Outputs are all or nothing either way."""
SLOW_STAGE_S = 1.0
"""Stages that take longer than this are announced on the terminal."""


class UsageError(Exception):
    """A command-line argument is malformed."""


class Terminated(BaseException):
    """SIGTERM arrived: raised in the main thread by the handler :func:`on_sigterm`
    installs, so the same clean-up as for Ctrl-C (KeyboardInterrupt) runs. A
    BaseException, so that no ``except Exception`` turns it into a failure."""


_received: list[int] = []
"""Signals that arrived while :func:`main` ran. The exception a handler raises can be
wrapped (an exception inside ``__set_name__`` during a lazy import becomes a
RuntimeError) or swallowed (inside a finalizer); the record is not."""


def _raise_terminated(signum: int, frame: Any) -> None:
    _received.append(signum)
    raise Terminated()


def _raise_interrupt(signum: int, frame: Any) -> None:
    _received.append(signum)
    raise KeyboardInterrupt()


def on_sigterm() -> Any:
    """Make SIGTERM raise :class:`Terminated` and Ctrl-C (SIGINT, unless it is ignored)
    raise KeyboardInterrupt, recording each arrival; returns the previous handlers (None
    when not on the main thread, where no handler can be set)."""
    if threading.current_thread() is not threading.main_thread():
        return None
    _received.clear()
    previous = {signal.SIGTERM: signal.signal(signal.SIGTERM, _raise_terminated)}
    if signal.getsignal(signal.SIGINT) is signal.default_int_handler:
        previous[signal.SIGINT] = signal.signal(signal.SIGINT, _raise_interrupt)
    return previous


def restore_sigterm(previous: Any) -> None:
    """Put back the handlers :func:`on_sigterm` returned."""
    for signum, handler in (previous or {}).items():
        signal.signal(signum, handler)


def received() -> BaseException | None:
    """The interrupt that arrived while the command ran (SIGTERM before Ctrl-C), if any,
    as the exception its handler raised."""
    if signal.SIGTERM in _received:
        return Terminated()
    return KeyboardInterrupt() if signal.SIGINT in _received else None


def interrupted(exc: BaseException) -> tuple[str, int]:
    """The stderr line and the exit status for Ctrl-C or SIGTERM. A command that knows
    what state its outputs are in sets ``exc.heat2d_outputs`` (e.g. "no output written")."""
    what, status = (("terminated", EXIT_TERMINATED) if isinstance(exc, Terminated)
                    else ("interrupted", EXIT_INTERRUPTED))
    # CPython marks a KeyboardInterrupt that escapes code run from a string (exec of the
    # methods dataclasses generate, during an import) as unhandled, and then ends the
    # process by SIGINT instead of our exit status, even though it was caught here.
    # Running code from a string clears that mark.
    exec("pass")  # noqa: S102 - a constant string
    return f"{what}: {getattr(exc, 'heat2d_outputs', 'no output written')}", status


def parse_sets(items: Sequence[str]) -> dict[str, str]:
    """``--set NAME=VALUE`` items as a dict; :class:`UsageError` on a malformed item."""
    out = {}
    for item in items:
        name, sep, value = item.partition("=")
        if not sep or not name.strip() or not value.strip():
            raise UsageError(f"--set: expected NAME=VALUE, got {item!r}")
        out[name.strip()] = value.strip()
    return out


PROGRESS_S = 5.0
"""Seconds between the progress lines of one long stage."""


class Announcer:
    """Prints a stage's name once it has run for SLOW_STAGE_S, and its time when it ends."""

    def __init__(self, stream) -> None:
        self.stream = stream
        self.timer: threading.Timer | None = None
        self.started = 0.0
        self.shown = False

    def __call__(self, stage: str, event: str) -> None:
        if event == "progress":
            # Within a long stage: ``stage`` says how far it is; at most every PROGRESS_S.
            now = time.perf_counter()
            if self.shown and now - getattr(self, "said", 0.0) >= PROGRESS_S:
                self.said = now
                print(f"  {stage}", file=self.stream, flush=True)
            return
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
