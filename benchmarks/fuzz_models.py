"""Long fuzzing run of the exit contract: many generated and mutated model files.

The same strategies (tests/strategies.py) and the same contract (tests/contract.py) as
tests/test_properties.py, for thousands of examples instead of tens, without shrinking.
Each example runs ``heat2d run --quiet --no-estimate`` (sometimes with ``--strict``) or
``heat2d check`` in a forked child with a time and memory limit. The script prints the
counts per command and exit status, the most common refusal reasons (exit 2), the
breaches per kind, the time per example and the slowest example, and saves every model
that breaches the contract under ``--breaches DIR`` (with ``index.txt`` saying which
command and which breach), plus the slowest model as ``slowest.toml``.

Run from the repository root with heat2d importable:

    python benchmarks/fuzz_models.py --examples 5000 --seed 1 --breaches /tmp/fuzz-1

The tests marked ``slow`` (``HYPOTHESIS_PROFILE=slow python -m pytest
tests/test_properties.py``) are the other long run: more shrunk examples of the same
properties, and mutations of the bundled models.
"""

from __future__ import annotations

import argparse
import re
import shutil
import statistics
import sys
import tempfile
import time
from collections import Counter
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))

from hypothesis import HealthCheck, Phase, given, seed, settings  # noqa: E402
from hypothesis import strategies as st  # noqa: E402

from tests.common import board  # noqa: E402
from tests.contract import MODEL_NAME, breaches, kind_of, run_case, warm_up  # noqa: E402
from tests.strategies import model_texts  # noqa: E402

COMMANDS = ["run", "run", "run --strict", "check"]


def reason_of(stderr: str) -> str:
    """An exit-2 message with the file, numbers and quoted names taken out."""
    line = next((ln for ln in stderr.splitlines() if ln.strip()), "")
    line = re.sub(r"^(\S*error: )\S*" + re.escape(MODEL_NAME), r"\1FILE", line)
    line = re.sub(r"\(line \d+\)", "", line)
    line = re.sub(r"'[^']*'|\"[^\"]*\"", "'…'", line)
    line = re.sub(r"[-+]?\d[\d.e+-]*", "N", line)
    return line[:110]


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--examples", type=int, default=500)
    parser.add_argument("--seed", type=int, default=0)
    parser.add_argument("--breaches", type=Path, default=Path("fuzz-breaches"),
                        help="folder for the models that breach the contract")
    parser.add_argument("--timeout", type=float, default=20.0,
                        help="seconds before an example counts as a hang")
    args = parser.parse_args(argv)
    args.breaches.mkdir(parents=True, exist_ok=True)
    index = open(args.breaches / "index.txt", "a", encoding="utf-8")  # noqa: SIM115
    scratch = Path(tempfile.mkdtemp(prefix="heat2d-fuzz-"))
    warm_up(board(), scratch)
    statuses: Counter[tuple[str, str]] = Counter()
    reasons: Counter[str] = Counter()
    kinds: Counter[str] = Counter()
    py_warnings: Counter[str] = Counter()
    times: list[float] = []
    slowest: list = [0.0, "", ""]
    n_breach = [0]

    @seed(args.seed)
    @settings(max_examples=args.examples, database=None, deadline=None,
              phases=[Phase.generate], derandomize=False, suppress_health_check=list(HealthCheck))
    @given(text=model_texts(), command=st.sampled_from(COMMANDS))
    def one(text: str, command: str) -> None:
        folder = Path(tempfile.mkdtemp(dir=scratch))
        try:
            outcome = run_case(text, command, folder, timeout=args.timeout)
            found = breaches(outcome, folder, command)
        finally:
            shutil.rmtree(folder, ignore_errors=True)
        times.append(outcome.seconds)
        if outcome.seconds > slowest[0]:
            slowest[:] = [outcome.seconds, command, text]
        status = ("timeout" if outcome.timed_out else f"signal {outcome.signal}"
                  if outcome.signal else "raised" if outcome.raised else str(outcome.status))
        statuses[command, status] += 1
        if outcome.status == 2:
            reasons[reason_of(outcome.stderr)] += 1
        for w in outcome.python_warnings:
            py_warnings[re.sub(r"\d+", "N", w)[:120]] += 1
        for b in found:
            kinds[kind_of(b)] += 1
        if found:
            n_breach[0] += 1
            name = f"{len(times):05d}-{re.sub(r'[^a-z0-9]+', '-', kind_of(found[0]).lower())}"
            (args.breaches / f"{name}.toml").write_text(text, encoding="utf-8",
                                                          errors="surrogatepass")
            index.write(f"{name}.toml\t{command}\t{' | '.join(found)[:500]}\n")
            index.flush()
        if len(times) % 100 == 0:
            print(f"{len(times)} examples, {n_breach[0]} breaching", file=sys.stderr)

    start = time.perf_counter()
    try:
        one()
    except KeyboardInterrupt:
        print("interrupted: figures so far", file=sys.stderr)
    wall = time.perf_counter() - start
    shutil.rmtree(scratch, ignore_errors=True)
    index.close()
    n = len(times)
    print(f"{n} examples in {wall:.0f} s, seed {args.seed}; {n_breach[0]} breach the contract")
    if not n:
        return 1
    print("\ncommand        status     count")
    for (command, status), count in sorted(statuses.items()):
        print(f"{command:<14} {status:<9} {count:>6}")
    print("\nbreaches per kind")
    for kind, count in kinds.most_common() or [("(none)", 0)]:
        print(f"{count:>6}  {kind}")
    print("\nmost common refusals (exit 2)")
    for reason, count in reasons.most_common(25):
        print(f"{count:>6}  {reason}")
    if py_warnings:
        print("\nPython warnings raised during runs (would reach stderr)")
        for w, count in py_warnings.most_common(10):
            print(f"{count:>6}  {w}")
    q = statistics.quantiles(times, n=20) if n > 1 else times * 19
    print(f"\ntime per example: mean {statistics.fmean(times):.3f} s, median "
          f"{statistics.median(times):.3f} s, 95th percentile {q[-1]:.3f} s, "
          f"max {slowest[0]:.2f} s ({slowest[1]})")
    (args.breaches / "slowest.toml").write_text(slowest[2], encoding="utf-8",
                                                 errors="surrogatepass")
    print(f"slowest model: {args.breaches / 'slowest.toml'}; breaching models: {args.breaches}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
