"""The exit contract of ``heat2d run`` and ``heat2d check``, checked on one model text.

:func:`run_case` writes the text to a fresh folder and runs ``heat2d.cli.main`` in a
forked child process, so that a hang, a runaway allocation or a C library that calls
``exit()`` ends the child and not the test run: the child gets an address-space limit
and is killed after ``timeout`` seconds. :func:`breaches` lists every way the outcome
breaks the contract of docs/model-format.md ("Errors", "What a run writes"):

- the status is 0 or 2, or 3 for ``run --strict``; never 1 (but for a thermal runaway,
  an answer: no steady state exists), never an exception;
- on 2, standard error is exactly one line, and it names the model file; nothing is
  written: the output folder does not exist and nothing else appears beside the model;
- on 0 (and 3), ``STEM.vtu``, ``summary.json``, ``summary.txt`` and ``STEM.png`` exist,
  ``summary.json`` holds no NaN or Infinity, the reported energy balance is within
  1e-6, and so is an independent one: the sum of every boundary's ``heat_out_w``
  against the generated power, over the largest of the power and the flows.

Each breach is a short string whose first words name its kind, so that the fuzz script
can count kinds and the property test can report them.
"""

from __future__ import annotations

import contextlib
import io
import json
import os
import re
import resource
import select
import signal
import sys
import time
import traceback
import warnings
from dataclasses import dataclass, field
from pathlib import Path

MODEL_NAME = "fuzzed_model.toml"
BALANCE_TOLERANCE = 1e-6
MEMORY_LIMIT = 4 * 1024 ** 3  # bytes of address space for one child run


@dataclass
class Outcome:
    """What one run of the command line did."""

    argv: list[str]
    status: int | None = None
    stderr: str = ""
    raised: str = ""
    python_warnings: list[str] = field(default_factory=list)
    timed_out: bool = False
    signal: int = 0
    seconds: float = 0.0


NODE_LIMIT = "200000"
"""Generated models run under this node limit: a mutation that leaves a sliver or a tiny
mesh size is then refused before meshing (exit 2, within the contract) instead of taking
minutes; the refusal path itself is what such a mutation tests."""


def argv_for(command: str, model: Path, out: Path) -> list[str]:
    """The argument list of ``command``: ``run``, ``run --strict`` or ``check``."""
    if command == "check":
        return ["check", str(model), "--node-limit", NODE_LIMIT]
    argv = ["run", str(model), "--out", str(out), "--quiet", "--no-estimate",
            "--node-limit", NODE_LIMIT]
    return argv + (["--strict"] if command == "run --strict" else [])


def _child(argv: list[str], write_fd: int) -> None:
    """Run the CLI and send the outcome as JSON down ``write_fd``; never returns."""
    report: dict = {"status": None, "stderr": "", "raised": "", "warnings": []}
    try:
        resource.setrlimit(resource.RLIMIT_AS, (MEMORY_LIMIT, resource.getrlimit(
            resource.RLIMIT_AS)[1]))
        from heat2d import cli

        err = io.StringIO()
        with contextlib.redirect_stdout(io.StringIO()), contextlib.redirect_stderr(err), \
                warnings.catch_warnings(record=True) as caught:
            warnings.simplefilter("always")
            try:
                report["status"] = cli.main(argv)
            except SystemExit as exc:  # argparse
                report["status"] = exc.code if isinstance(exc.code, int) else 1
            except BaseException as exc:  # noqa: B036 - the contract forbids every escape
                report["raised"] = f"{type(exc).__name__}: {str(exc)[:300]}\n" + "".join(
                    traceback.format_exception(exc)[-6:])[:3000]
        report["stderr"] = err.getvalue()[:20000]
        report["warnings"] = [f"{w.category.__name__}: {str(w.message)[:200]} "
                              f"({Path(w.filename).name}:{w.lineno})" for w in caught
                              if not issubclass(w.category, DeprecationWarning
                                                | PendingDeprecationWarning)][:20]
    except BaseException as exc:  # noqa: B036
        report["raised"] = report["raised"] or f"{type(exc).__name__}: {str(exc)[:300]}"
    try:
        data = json.dumps(report).encode()
        with os.fdopen(write_fd, "wb") as pipe:
            pipe.write(data)
    finally:
        os._exit(0)


def run_case(text: str, command: str, folder: Path, *, timeout: float = 20.0) -> Outcome:
    """Write ``text`` as ``folder/MODEL_NAME`` and run ``command`` on it in a child."""
    model = folder / MODEL_NAME
    model.write_text(text, encoding="utf-8", errors="surrogatepass")
    outcome = Outcome(argv=argv_for(command, model, folder / "out"))
    sys.stdout.flush()
    sys.stderr.flush()
    read_fd, write_fd = os.pipe()
    start = time.perf_counter()
    pid = os.fork()
    if pid == 0:  # pragma: no cover - the child
        os.close(read_fd)
        _child(outcome.argv, write_fd)
    os.close(write_fd)
    chunks: list[bytes] = []
    deadline = start + timeout
    with os.fdopen(read_fd, "rb", buffering=0) as pipe:
        while True:
            left = deadline - time.perf_counter()
            if left <= 0:
                outcome.timed_out = True
                os.kill(pid, signal.SIGKILL)
                break
            ready, _, _ = select.select([pipe], [], [], left)
            if ready:
                chunk = pipe.read(1 << 16)
                if not chunk:
                    break
                chunks.append(chunk)
    _, status = os.waitpid(pid, 0)
    outcome.seconds = time.perf_counter() - start
    if os.WIFSIGNALED(status) and not outcome.timed_out:
        outcome.signal = os.WTERMSIG(status)
    if chunks:
        report = json.loads(b"".join(chunks))
        outcome.status = report["status"]
        outcome.stderr = report["stderr"]
        outcome.raised = report["raised"]
        outcome.python_warnings = report["warnings"]
    elif not outcome.timed_out and not outcome.signal:
        outcome.raised = f"child ended with status {os.WEXITSTATUS(status)} and no report"
    return outcome


def warm_up(text: str, folder: Path) -> None:
    """Run ``text`` once in this process, so that every forked child starts with
    numpy, scipy, triangle, meshio and matplotlib already imported (a fork is then
    milliseconds, where importing them again would take a second per example)."""
    import tomllib

    import matplotlib

    matplotlib.use("Agg")
    from heat2d import cli

    tomllib.loads(text)
    model = folder / "warm_up.toml"
    model.write_text(text, encoding="utf-8")
    with contextlib.redirect_stdout(io.StringIO()), contextlib.redirect_stderr(io.StringIO()):
        cli.main(argv_for("run", model, folder / "warm_up_out"))
        cli.main(argv_for("check", model, folder / "warm_up_out"))


def _strict_json(path: Path) -> dict:
    def refuse(name: str) -> float:
        raise ValueError(f"summary.json holds {name}")

    return json.loads(path.read_text(encoding="utf-8"), parse_constant=refuse)


def _balance_breaches(summary: dict) -> list[str]:
    eb = summary["energy_balance"]
    out: list[str] = []
    # An ill-conditioned run may leave its balance open (up to the refusal limit) if it says
    # so: then the figure reported must be the true one, checked below.
    said = eb.get("note", "").startswith("ill-conditioned system")
    if not (abs(eb["relative_error"]) <= BALANCE_TOLERANCE or said):
        out.append(f"energy balance reported {eb['relative_error']:.3g}")
    flows = [b["heat_out_w"] for b in summary["boundaries"].values()]
    scale = max([abs(eb["power_in_w"])] + [abs(f) for f in flows])
    if scale > 0:
        independent = (sum(flows) - eb["generated_w"]) / scale
        # An unpowered model at one temperature has round-off flows only (1e-19 to
        # 1e-11 W): they balance whatever their ratio.
        t = summary["temperature"]
        uniform = eb["power_in_w"] == 0 and t["max"] - t["min"] <= 1e-9 * max(
            1.0, abs(t["max"]), abs(t["min"]))
        if said:
            honest = abs(independent - eb["relative_error"] * abs(eb["power_in_w"]) / scale)
            if not honest <= BALANCE_TOLERANCE:
                out.append(f"energy balance reported {eb['relative_error']:.3g} but the "
                           f"boundaries give {independent:.3g}")
        elif not (abs(independent) <= BALANCE_TOLERANCE or uniform):
            out.append(f"energy balance independent {independent:.3g} (boundaries sum "
                       f"{sum(flows):.6g} W, generated {eb['generated_w']:.6g} W, "
                       f"reported {eb['relative_error']:.3g})")
    return out


def kind_of(breach: str) -> str:
    """The class of a breach: its first words, and for an internal error its type."""
    head = breach.split(":")[0]
    if breach.startswith("exit 1: internal error:"):
        head += " " + breach.split(":")[2].strip()
    if head.startswith("exit "):
        return head.split("(")[0].strip()
    return re.sub(r"\s*[-+]?\d[\d.e+-]*( s\b)?", "", head.split("(")[0]).strip()


def breaches(outcome: Outcome, folder: Path, command: str) -> list[str]:
    """Every way ``outcome`` breaks the exit contract (empty when it keeps it)."""
    if outcome.timed_out:
        return [f"timeout after {outcome.seconds:.0f} s"]
    if outcome.signal:
        return [f"died by signal {outcome.signal}"]
    if outcome.raised:
        return [f"raised {outcome.raised.splitlines()[0]}"]
    status = outcome.status
    lines = [ln for ln in outcome.stderr.splitlines() if ln.strip()]
    out_dir = folder / "out"
    beside = sorted(p.name for p in folder.iterdir() if p.name not in (MODEL_NAME, "out"))
    allowed = {0, 2, 3} if command == "run --strict" else {0, 2}
    # A thermal runaway is an answer, not a failure: no steady state exists (exit 1 with
    # one line, docs/model-format.md "Conductors"), held like exit 2 to one line and
    # nothing written.
    runaway = status == 1 and len(lines) == 1 and "thermal runaway: no steady state" in lines[0]
    if status == 1 and not runaway:
        return ["exit 1: " + (lines[-1][:300] if lines else "(no message)")]
    if status not in allowed and not runaway:
        return [f"exit {status} not allowed for {command}"]
    found: list[str] = []
    if beside:
        found.append(f"stray files beside the model: {beside}")
    if status == 2 or runaway:
        if len(lines) + len(outcome.python_warnings) != 1:
            found.append(f"stderr not one line on exit 2: {lines[:3] + outcome.python_warnings[:3]}")
        elif MODEL_NAME not in lines[0]:
            found.append(f"error line does not name the file: {lines[0][:200]}")
        if out_dir.exists():
            found.append(f"written on exit 2: {sorted(p.name for p in out_dir.iterdir())}")
        return found
    if command == "check":
        return found
    stem = Path(MODEL_NAME).stem
    wanted = [f"{stem}.vtu", "summary.json", "summary.txt", f"{stem}.png"]
    missing = [n for n in wanted if not (out_dir / n).is_file()]
    if missing:
        return found + [f"missing outputs on exit {status}: {missing}"]
    try:
        summary = _strict_json(out_dir / "summary.json")
    except ValueError as exc:
        return found + [f"non-finite summary.json: {exc}"]
    if summary.get("mode") == "transient":
        return found + _transient_breaches(summary, out_dir)
    return found + _balance_breaches(summary)


def _transient_breaches(summary: dict, out_dir: Path) -> list[str]:
    """A transient run: its time series is there and its energy over the run closes
    (energy in = stored + heat out, docs/model-format.md "What a transient run writes")."""
    out = []
    if not (out_dir / "transient.csv").is_file():
        out.append("missing outputs on a transient run: ['transient.csv']")
    eb = summary["energy_balance"]
    scale = max(abs(eb["energy_in_j"]), abs(eb["stored_j"]), abs(eb["heat_out_j"]),
                eb.get("heat_through_j", 0.0))
    gap = eb["energy_in_j"] - eb["stored_j"] - eb["heat_out_j"]
    # Below the round-off of the heat content (reported) a gap is no imbalance.
    if not (abs(gap) <= BALANCE_TOLERANCE * scale or abs(gap) <= eb.get("roundoff_j", 0.0)):
        out.append(f"energy balance over the run open by {gap / scale:.3g}")
    return out
