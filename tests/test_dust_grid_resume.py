"""Crash safety: a grid run killed with SIGKILL several times, then finished, equals an uninterrupted run.

The runs are real subprocesses running the ``motes grid`` command line (the
same ``motes.cli.main`` as ``python -m motes``) on the real Mie model with a
coarse size quadrature (``tiny_real_factory``, patched in as the default model
factory). Each is killed (SIGKILL to its whole process
group: the driver and its worker processes) at a different moment, chosen by
watching the store fill; the store must then hold only whole chunks, and the
final store must have the same keys and bit-identical values as a run that
was never interrupted, with no duplicated key.
"""

from __future__ import annotations

import os
import signal
import subprocess
import sys
import time
from pathlib import Path

import numpy as np
import pyarrow.parquet as pq
import pytest

from motes.dust.grid.spec import read_grid_description
from motes.dust.grid.run import GridRunSettings, run_grid
from motes.dust.grid.store import GridStore

from test_dust_grid import read_sorted, tiny_real_factory, write_real_grid

TESTS = Path(__file__).resolve().parent

# `motes grid` exactly as `python -m motes` runs it, with the real Mie model's size quadrature made coarse
# (tiny_real_factory) so that a run takes about a second; worker processes get the factory by reference
_CLI = ("import sys; sys.path.insert(0, {tests!r}); import test_dust_grid as t; "
        "import motes.dust.grid.run as g; g.build_disk_model = t.tiny_real_factory; "
        "from motes.cli import main; sys.exit(main(sys.argv[1:]))")

def parts_in(store: Path) -> int:
    parts = store / "parts"
    return len(list(parts.glob("chunk-*.parquet"))) if parts.is_dir() else 0


def group_alive(pgid: int) -> bool:
    try:
        os.killpg(pgid, 0)
    except ProcessLookupError:
        return False
    return True


def run_and_kill(cmd, store: Path, kill_after_parts: int, extra_delay: float, driver_only: bool = False,
                 timeout: float = 120.0) -> bool:
    """Start ``cmd``; SIGKILL it once ``kill_after_parts`` parts exist (plus a delay).

    With ``driver_only`` only the driver is killed, and its worker processes
    must then exit by themselves within a few seconds; otherwise the whole
    process group is killed at once. Returns True when the process was killed,
    False when it finished first.
    """
    proc = subprocess.Popen(cmd, start_new_session=True, stdout=subprocess.DEVNULL, stderr=subprocess.PIPE)
    deadline = time.monotonic() + timeout
    try:
        while proc.poll() is None:
            if parts_in(store) >= kill_after_parts:
                time.sleep(extra_delay)
                if proc.poll() is not None:
                    break
                if driver_only:
                    proc.kill()
                    proc.wait()
                    limit = time.monotonic() + 20.0      # workers poll their parent every 0.5 s; slack for load
                    while group_alive(proc.pid) and time.monotonic() < limit:
                        time.sleep(0.05)
                    if group_alive(proc.pid):
                        ps = subprocess.run(["ps", "-o", "pid,ppid,stat,etime,args", "-g", str(proc.pid)],
                                            capture_output=True, text=True).stdout
                        raise AssertionError(f"processes outlived their killed driver:\n{ps}")
                else:
                    os.killpg(proc.pid, signal.SIGKILL)
                    proc.wait()
                return True
            if time.monotonic() > deadline:
                raise AssertionError("grid subprocess did not progress in time")
            time.sleep(0.005)
    finally:
        if group_alive(proc.pid):
            os.killpg(proc.pid, signal.SIGKILL)
        proc.wait()
    err = proc.stderr.read().decode()
    assert proc.returncode == 0, err
    return False


def check_whole_chunks(store: Path) -> None:
    """Every part present is a whole, readable chunk; no stray files but temporary ones."""
    s = GridStore.open(store)
    for chunk in s.completed_chunks():
        path = store / "parts" / f"chunk-{chunk:07d}.parquet"
        keys = pq.read_table(path, columns=["key"]).column("key").to_numpy()
        np.testing.assert_array_equal(keys, np.arange(chunk * s.chunk_size, chunk * s.chunk_size + s.chunk_length(chunk)))


def test_sigkilled_cli_runs_resume_to_the_uninterrupted_store(tmp_path, rng):
    grid = write_real_grid(tmp_path, rng, step="0.1", chunk_size=8)      # 264 points in 33 chunks
    spec = read_grid_description(grid)
    run_grid(spec, tmp_path / "reference", GridRunSettings(workers=1, progress=False), model_factory=tiny_real_factory)

    store = tmp_path / "killed"

    def command(workers):
        return [sys.executable, "-c", _CLI.format(tests=str(TESTS)), "grid", str(grid), "--output", str(store),
                "--workers", str(workers), "--quiet", "--no-summary"]

    kills = 0
    # kill at different moments (right after a part appears, part-way between writes), the driver
    # alone (its worker processes must exit by themselves) or the whole process group
    for target, delay, driver_only, workers in ((1, 0.0, True, 2), (11, 0.013, False, 1), (21, 0.021, False, 2)):
        if parts_in(store) < spec.n_chunks:
            kills += run_and_kill(command(workers), store, target, delay, driver_only)
            check_whole_chunks(store)
    assert kills >= 2, "the runs finished before they could be killed; make the test grid larger"
    if parts_in(store) < spec.n_chunks:
        assert not run_and_kill(command(1), store, spec.n_chunks + 1, 0.0)

    final, reference = read_sorted(store), read_sorted(tmp_path / "reference")
    assert final["key"].is_unique
    np.testing.assert_array_equal(final["key"], np.arange(spec.n_points))
    for column in reference.columns:         # same keys, bit-identical values
        a, b = final[column].to_numpy(), reference[column].to_numpy()
        if not np.array_equal(a, b):
            bad = np.flatnonzero(a != b)
            rel = np.max(np.abs(a[bad] - b[bad]) / np.maximum(np.abs(b[bad]), 1e-300))
            chunks = sorted(set(final["key"].to_numpy()[bad] // spec.chunk_size))
            raise AssertionError(f"column {column}: {bad.size} values differ, in chunks {chunks}; "
                                 f"largest relative difference {rel:.3g}")
    assert not list((store / "parts").glob(".*"))
