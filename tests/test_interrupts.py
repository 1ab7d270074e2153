"""Ctrl-C, SIGTERM and kill -9 at any moment: exit 130/143 with one line, and a result
folder that is absent, the previous complete result or the new one, with no scratch
folder left; a sweep stops its workers; an unpowered model draws its map."""

from __future__ import annotations

import json
import os
import signal
import subprocess
import sys
import textwrap
import time
from pathlib import Path

import numpy as np
import pytest

import heat2d
import heat2d.post.text as table_text
import heat2d.post.writers as writers
from heat2d import cli
from heat2d.cli.common import Terminated
from tests.common import HELD_BLOCK, board

FILES = ["board.png", "board.vtu", "summary.json", "summary.txt"]
ROOT = Path(__file__).resolve().parents[1]
WAIT_S = 60.0
"""Upper bound for a subprocess to start or end on a loaded machine (a bound, not a
timing: every wait returns as soon as the process is there)."""


@pytest.fixture
def model_file(tmp_path):
    path = tmp_path / "board.toml"
    path.write_text(board(), encoding="utf-8")
    return path


def snapshot(folder: Path) -> dict[str, bytes]:
    return {p.name: p.read_bytes() for p in sorted(folder.iterdir())}


def leftovers(out: Path) -> list[str]:
    """Scratch siblings of the result folder (``.out.new-*``, ``.old-*``, ``.del-*``)."""
    return sorted(p.name for p in out.parent.iterdir() if p.name.startswith(f".{out.name}."))


@pytest.fixture
def previous(model_file, tmp_path):
    """A complete earlier result in tmp_path/out."""
    out = tmp_path / "out"
    assert cli.main(["run", str(model_file), "--out", str(out), "--quiet",
                     "--no-estimate"]) == 0
    assert sorted(p.name for p in out.iterdir()) == FILES
    return out, snapshot(out)


def _handler_installed(pid: int) -> bool:
    """Whether process ``pid`` catches SIGTERM (main() has started), from /proc."""
    try:
        for line in Path(f"/proc/{pid}/status").read_text().splitlines():
            if line.startswith("SigCgt:"):
                return bool(int(line.split()[1], 16) >> (signal.SIGTERM - 1) & 1)
    except OSError:
        pass
    return False


def _start(*argv: str, cwd: Path) -> subprocess.Popen:
    # SIGINT back to its default in the child, so Python turns it into KeyboardInterrupt
    # even when the test runner's shell ignores it.
    proc = subprocess.Popen([sys.executable, "-m", "heat2d", *argv], cwd=cwd,
                            stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True,
                            env={**os.environ, "PYTHONPATH": str(ROOT)},
                            preexec_fn=lambda: signal.signal(signal.SIGINT, signal.SIG_DFL))
    deadline = time.monotonic() + WAIT_S
    while not _handler_installed(proc.pid):
        assert proc.poll() is None, proc.communicate()
        assert time.monotonic() < deadline
        time.sleep(0.01)
    return proc


needs_proc = pytest.mark.skipif(not Path("/proc/self/status").exists(),
                                reason="reads signal masks from /proc")


# ---------------------------------------------------------------------------
# heat2d run in a subprocess, signalled at several moments


@needs_proc
@pytest.mark.parametrize("sig, status, word", [(signal.SIGTERM, 143, "terminated"),
                                               (signal.SIGINT, 130, "interrupted")])
@pytest.mark.parametrize("delay", [0.0, 0.8])
def test_a_signalled_run_exits_with_one_line_and_keeps_the_previous_result(
        previous, tmp_path, sig, status, word, delay):
    out, before = previous
    # About 20 000 nodes: several seconds of meshing and solving, so the signal lands
    # mid-run at both moments.
    slow = tmp_path / "slow.toml"
    slow.write_text(board(extra="\n[mesh]\nsize = 0.04\n"), encoding="utf-8")
    proc = _start("run", str(slow), "--out", str(out), "--quiet", cwd=tmp_path)
    time.sleep(delay)
    proc.send_signal(sig)
    stdout, stderr = proc.communicate(timeout=WAIT_S)
    assert proc.returncode == status
    # Before the command has started (still importing) the line cannot name the folder.
    assert stderr.splitlines() in ([f"{word}: the previous result in {out} is kept"],
                                   [f"{word}: no output written"])
    assert stdout == ""
    assert snapshot(out) == before
    assert leftovers(out) == []


@needs_proc
def test_a_terminated_first_run_writes_nothing(model_file, tmp_path):
    out = tmp_path / "fresh"
    proc = _start("run", str(model_file), "--out", str(out), cwd=tmp_path)
    proc.send_signal(signal.SIGTERM)
    _, stderr = proc.communicate(timeout=WAIT_S)
    assert proc.returncode == 143
    # Stage announcements may come first; the last line says what became of the outputs.
    assert stderr.splitlines()[-1] == "terminated: no output written"
    assert "Traceback" not in stderr
    assert not out.exists() and leftovers(out) == []


# ---------------------------------------------------------------------------
# The write phase, in-process: a writer interrupted after others have written


@pytest.mark.parametrize("exc, status, word", [(KeyboardInterrupt, 130, "interrupted"),
                                               (Terminated, 143, "terminated")])
def test_an_interrupt_mid_write_keeps_the_previous_result(previous, model_file, monkeypatch,
                                                          capsys, exc, status, word):
    out, before = previous
    seen = []

    def interrupted_png(result, path, **options):
        seen.extend(p.name for p in path.parent.iterdir())   # the others are written
        raise exc()

    monkeypatch.setitem(writers.WRITERS, "png", ("{stem}.png", interrupted_png))
    capsys.readouterr()
    assert cli.main(["run", str(model_file), "--out", str(out), "--quiet", "--no-estimate",
                     "--set", "power=2"]) == status
    assert sorted(seen) == ["board.vtu", "summary.json", "summary.txt"]
    assert capsys.readouterr().err.splitlines() == [
        f"{word}: the previous result in {out} is kept"]
    assert snapshot(out) == before
    assert leftovers(out) == []


def test_an_interrupt_between_the_two_renames_puts_the_previous_result_back(
        previous, model_file, monkeypatch, capsys):
    # Without the atomic exchange the swap is two renames (old aside, new in place).
    out, before = previous
    monkeypatch.setattr(writers, "_exchange", lambda a, b: False)
    rename = os.rename
    hits = []

    def slow_rename(src, dst):
        if Path(dst) == out and ".new-" in str(src):   # the new folder into place
            assert not out.exists() and [n for n in leftovers(out) if ".old-" in n]
            hits.append(src)
            raise KeyboardInterrupt
        rename(src, dst)

    monkeypatch.setattr(os, "rename", slow_rename)
    assert cli.main(["run", str(model_file), "--out", str(out), "--quiet", "--no-estimate",
                     "--set", "power=2"]) == 130
    monkeypatch.setattr(os, "rename", rename)
    assert len(hits) == 1
    assert capsys.readouterr().err.splitlines() == [
        f"interrupted: the previous result in {out} is kept"]
    assert snapshot(out) == before
    assert leftovers(out) == []


def test_an_interrupt_after_the_swap_reports_the_new_result(previous, model_file, monkeypatch,
                                                            capsys):
    out, before = previous

    calls = []
    format_summary = table_text.format_summary

    def interrupted_summary(summary):
        calls.append(summary)
        if len(calls) == 2:         # printing the table, after summary.txt is in place
            raise KeyboardInterrupt
        return format_summary(summary)

    monkeypatch.setattr(table_text, "format_summary", interrupted_summary)
    assert cli.main(["run", str(model_file), "--out", str(out), "--set", "power=2",
                     "--no-estimate"]) == 130
    err = capsys.readouterr().err.splitlines()
    assert err[-1] == f"interrupted: the new result is in {out}"
    after = json.loads((out / "summary.json").read_text())
    assert after["energy_balance"]["power_in_w"] == pytest.approx(2.0)
    assert sorted(snapshot(out)) == FILES and snapshot(out) != before
    assert leftovers(out) == []


def test_main_restores_the_previous_sigterm_handler(model_file):
    def mine(signum, frame):
        pass

    old = signal.signal(signal.SIGTERM, mine)
    try:
        assert cli.main(["check", str(model_file)]) == 0
        assert signal.getsignal(signal.SIGTERM) is mine
    finally:
        signal.signal(signal.SIGTERM, old)
    assert (cli.EXIT_INTERRUPTED, cli.EXIT_TERMINATED) == (130, 143)


# ---------------------------------------------------------------------------
# kill -9: a real SIGKILL in the middle of write_folder, then a later run


KILLED_WRITE = """
import os, signal, sys
from pathlib import Path
import heat2d.post.text as table_text
import heat2d.post.writers as writers
out, where = Path(sys.argv[1]), sys.argv[2]
if where == "between-renames":
    writers._exchange = lambda a, b: False
    rename = os.rename
    def rename_then_die(src, dst):
        if Path(dst) == out:
            os.kill(os.getpid(), signal.SIGKILL)
        rename(src, dst)
    os.rename = rename_then_die
def fill(folder):
    (folder / "summary.json").write_text("{}")
    (folder / "board.vtu").write_text("new")
    if where == "mid-write":
        os.kill(os.getpid(), signal.SIGKILL)
    (folder / "board.png").write_text("new")
    return ["summary.json", "board.vtu", "board.png"]
writers.write_folder(out, fill)
"""


def _killed_write(out: Path, where: str) -> int:
    proc = subprocess.run([sys.executable, "-c", textwrap.dedent(KILLED_WRITE), str(out), where],
                          env={**os.environ, "PYTHONPATH": str(ROOT)}, capture_output=True,
                          timeout=WAIT_S)
    assert proc.returncode == -signal.SIGKILL, proc.stderr
    return proc.returncode


def test_kill_9_mid_write_keeps_the_previous_result_and_the_next_run_cleans_up(
        previous, model_file):
    out, before = previous
    _killed_write(out, "mid-write")
    assert snapshot(out) == before
    stale = leftovers(out)
    assert len(stale) == 1 and stale[0].startswith(".out.new-")
    assert sorted(p.name for p in (out.parent / stale[0]).iterdir()) == ["board.vtu",
                                                                        "summary.json"]
    assert cli.main(["run", str(model_file), "--out", str(out), "--quiet", "--no-estimate",
                     "--set", "power=2"]) == 0
    assert leftovers(out) == []
    summary = json.loads((out / "summary.json").read_text())
    assert summary["energy_balance"]["power_in_w"] == pytest.approx(2.0)


def test_kill_9_between_the_two_renames_is_restored_by_the_next_write(previous, model_file):
    out, before = previous
    _killed_write(out, "between-renames")
    # The one window of the two-rename swap: the folder is absent, the previous result
    # complete beside it.
    assert not out.exists()
    old = [n for n in leftovers(out) if n.startswith(".out.old-")]
    assert len(old) == 1 and snapshot(out.parent / old[0]) == before
    writers.recover(out)
    assert snapshot(out) == before
    assert leftovers(out) == []


def test_scratch_of_a_live_process_is_left_alone(tmp_path):
    out = tmp_path / "out"
    out.mkdir()                     # present: a dead .old- beside it is removed, not restored
    finished = subprocess.Popen([sys.executable, "-c", "pass"])
    finished.wait()                 # reaped: its pid names no process now
    live = tmp_path / f".out.new-{os.getppid()}-0a1b"
    gone = tmp_path / f".out.old-{finished.pid}-0a1b"
    other = tmp_path / f".other.new-{finished.pid}-0a1b"
    for folder in (live, gone, other):
        folder.mkdir()
    writers.recover(out)
    assert sorted(p.name for p in tmp_path.iterdir()) == sorted([live.name, other.name, "out"])


def test_both_swaps_replace_the_folder_whole(tmp_path, monkeypatch):
    out = tmp_path / "out"
    for exchange in (True, False):
        if not exchange:
            monkeypatch.setattr(writers, "_exchange", lambda a, b: False)
        for text in ("first", "second"):
            names = ["summary.json", f"{text}.vtu"]

            def fill(folder, names=names, text=text):
                for n in names:
                    (folder / n).write_text(text)
                return names

            assert writers.write_folder(out, fill) == [out / n for n in names]
            # The first result's first.vtu goes with it: never a mix of two results.
            assert snapshot(out) == {n: text.encode() for n in names}
            assert leftovers(out) == []


# ---------------------------------------------------------------------------
# The user's own files are never deleted


@pytest.mark.parametrize("own", ["notes.txt", "plots/"])
def test_a_folder_holding_the_users_files_is_refused_before_solving(model_file, tmp_path,
                                                                     capsys, monkeypatch, own):
    out = tmp_path / "out"
    out.mkdir()
    (out / "board.vtu").write_text("earlier output")
    if own.endswith("/"):
        (out / own).mkdir()
    else:
        (out / own).write_text("mine")

    def no_solve(*args, **kwargs):
        raise AssertionError("solved before checking the output folder")

    monkeypatch.setattr(heat2d.pipeline.chain, "solve", no_solve)
    assert cli.main(["run", str(model_file), "--out", str(out)]) == 2
    err = capsys.readouterr().err.splitlines()
    assert len(err) == 1 and err[0].startswith(f"error: {out}: the output folder holds files "
                                               f"heat2d did not write ({own.rstrip('/')})")
    assert sorted(p.name for p in out.iterdir()) == sorted(["board.vtu", own.rstrip("/")])
    assert leftovers(out) == []


# ---------------------------------------------------------------------------
# A sweep stops its workers


@needs_proc
def test_sigterm_to_a_parallel_sweep_stops_its_workers(model_file, tmp_path):
    psutil = pytest.importorskip("psutil")
    out = tmp_path / "sw"
    proc = _start("sweep", str(model_file), "--vary", "power=0.1,0.2,0.3,0.4,0.5,0.6,0.7,0.8",
                  "--jobs", "2", "--out", str(out), "--quiet", cwd=tmp_path)
    parent = psutil.Process(proc.pid)
    deadline = time.monotonic() + WAIT_S
    while len([c for c in parent.children() if "spawn_main" in " ".join(c.cmdline())]) < 2:
        assert proc.poll() is None and time.monotonic() < deadline
        time.sleep(0.02)
    children = parent.children(recursive=True)
    proc.send_signal(signal.SIGTERM)
    _, stderr = proc.communicate(timeout=WAIT_S)
    assert proc.returncode == 143
    assert stderr.splitlines() == [
        f"terminated: workers stopped; the variants finished so far are kept in {out} (the "
        "same sweep run again solves only the rest)"]
    _, alive = psutil.wait_procs(children, timeout=10)
    assert alive == []
    # Whatever finished is complete: every file its inputs.json lists is there.
    for folder in (p for p in out.iterdir() if p.is_dir()):
        stored = json.loads((folder / "inputs.json").read_text())
        assert sorted(p.name for p in folder.iterdir()) == sorted([*stored["files"],
                                                                   "inputs.json"])
    assert not [p for p in out.iterdir() if p.name.startswith(".")]


# ---------------------------------------------------------------------------
# The map of an unpowered model


def test_an_unpowered_model_writes_all_four_files(tmp_path, capsys):
    path = tmp_path / "board.toml"
    # Held at 20 °C, insulated elsewhere, no power: 20 °C everywhere.
    path.write_text(HELD_BLOCK, encoding="utf-8")
    out = tmp_path / "out"
    assert cli.main(["run", str(path), "--out", str(out), "--quiet"]) == 0
    assert sorted(p.name for p in out.iterdir()) == FILES
    assert (out / "board.png").read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"


@pytest.mark.parametrize("base, spread", [(20.0, 0.0), (50.0, 1e-13), (1e6, 1e-9)])
def test_a_uniform_field_draws_one_level_and_one_colour_bar_value(tmp_path, base, spread):
    from heat2d.post.plot import plot_temperature

    result = heat2d.solve(heat2d.parse(board({"power = 0.5": "power = 0"})), estimate=False)
    noise = np.random.default_rng(1).random(len(result.temperature))
    result.temperature[:] = base + spread * noise
    fig = plot_temperature(result, tmp_path / "map.png")
    assert (tmp_path / "map.png").read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
    bars = [ax for ax in fig.axes if ax.get_label() == "<colorbar>"]
    assert bars
    for bar in bars:
        ticks = bar.get_yticks()
        assert len(ticks) == 1 and ticks[0] == pytest.approx(base, rel=1e-12)
