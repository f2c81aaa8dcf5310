"""Grid stores never lose or mix results: overwrite under the writer lock, all-or-nothing, damaged parts.

The concurrency tests run real ``motes grid`` subprocesses (the same
``motes.cli.main`` as ``python -m motes``) with a slowed analytic stand-in
model patched in as the default model factory, so that one run is still
writing while the other starts.
"""

from __future__ import annotations

import os
import signal
import subprocess
import sys
import time
from pathlib import Path

import numpy as np
import pytest

from motes.dust.grid.run import GridRunSettings, run_grid
from motes.dust.grid.spec import read_grid_description
from motes.dust.grid.store import GridStore
from motes.dust.grid.summary import summarize_grid
from motes.errors import GridError

from test_dust_grid import grid_text, read_sorted, standin_factory, write_photometry

TESTS = Path(__file__).resolve().parent

_CLI = ("import sys; sys.path.insert(0, {tests!r}); import test_dust_grid_safety as t; "
        "import motes.dust.grid.run as g; g.build_disk_model = t.slow_factory; "
        "from motes.cli import main; sys.exit(main(sys.argv[1:]))")


class _Slow:
    """The stand-in model, 0.1 s per call: a run of a few dozen chunks lasts several seconds."""

    def __init__(self, model):
        self._model = model

    def flux_ratio(self, *args, **kwargs):
        time.sleep(0.1)
        return self._model.flux_ratio(*args, **kwargs)


def slow_factory(spec, observations):
    return _Slow(standin_factory(spec, observations))


def quiet(**kw):
    return GridRunSettings(progress=False, **kw)


def _command(grid: Path, store: Path, *extra: str) -> list[str]:
    return [sys.executable, "-c", _CLI.format(tests=str(TESTS)), "grid", str(grid), "--output", str(store),
            "--workers", "1", "--quiet", "--no-summary", *extra]


def _two_grids(tmp_path, chunk_size=4):
    write_photometry(tmp_path)
    first = tmp_path / "grid.toml"
    first.write_text(grid_text(extra=f"chunk_size = {chunk_size}\n"))       # 594 points
    second = tmp_path / "other.toml"
    second.write_text(grid_text(porosity="[0.0, 0.5]", extra=f"chunk_size = {chunk_size}\n"))
    return first, second


def _snapshot(store: Path) -> dict[str, bytes]:
    return {str(p.relative_to(store)): p.read_bytes() for p in sorted(store.rglob("*"))
            if p.is_file() and p.name != ".lock"}


# ----------------------------------------------------------------------------- overwrite and the lock
def test_overwrite_while_another_run_writes_is_refused_and_the_run_finishes_whole(tmp_path):
    first, second = _two_grids(tmp_path)
    spec = read_grid_description(first)
    store = tmp_path / "store"
    writer = subprocess.Popen(_command(first, store), start_new_session=True,
                              stdout=subprocess.DEVNULL, stderr=subprocess.PIPE)
    try:
        deadline = time.monotonic() + 60
        while not list(store.glob("parts/chunk-*.parquet")):
            assert writer.poll() is None, writer.stderr.read().decode()
            assert time.monotonic() < deadline, "the first run wrote no part in time"
            time.sleep(0.02)
        over = subprocess.run(_command(second, store, "--overwrite"), capture_output=True, text=True, timeout=120)
        still_writing = writer.poll() is None
        assert writer.wait(timeout=120) == 0, writer.stderr.read().decode()
    finally:
        if writer.poll() is None:
            os.killpg(writer.pid, signal.SIGKILL)
            writer.wait()
    assert still_writing, "the first run ended before the overwrite was tried; the test proves nothing"
    assert over.returncode == 2, over.stderr
    assert "another motes grid run is writing" in over.stderr and "nothing was changed" in over.stderr
    assert "Traceback" not in over.stderr
    # the store is the first grid, whole, every part a whole chunk of it
    s = GridStore.open(store)
    assert s.manifest["grid_digest"] == spec.digest and s.is_complete and not s.damaged_parts()
    reference = tmp_path / "reference"
    run_grid(spec, reference, quiet(workers=1), model_factory=standin_factory)
    assert read_sorted(store).equals(read_sorted(reference))


def test_overwrite_refuses_a_store_folder_with_a_stray_file_and_keeps_the_old_store(tmp_path):
    first, second = _two_grids(tmp_path, chunk_size=40)
    store = tmp_path / "store"
    run_grid(read_grid_description(first), store, quiet(workers=1), model_factory=standin_factory)
    (store / "notes.txt").write_text("my notes")
    (store / ".DS_Store").write_bytes(b"\0\1")
    before = _snapshot(store)
    proc = subprocess.run(_command(second, store, "--overwrite"), capture_output=True, text=True, timeout=120)
    assert proc.returncode == 2, proc.stderr
    assert "not part of its grid store" in proc.stderr and "notes.txt" in proc.stderr
    assert "nothing was changed" in proc.stderr and "Traceback" not in proc.stderr
    assert _snapshot(store) == before
    assert GridStore.open(store).is_complete


def test_overwrite_of_a_clean_store_replaces_it_whole(tmp_path):
    first, second = _two_grids(tmp_path, chunk_size=40)
    store = tmp_path / "store"
    run_grid(read_grid_description(first), store, quiet(workers=1), model_factory=standin_factory)
    (store / "summary").mkdir()
    (store / "summary" / "old.ecsv").write_text("old")
    proc = subprocess.run(_command(second, store, "--overwrite"), capture_output=True, text=True, timeout=120)
    assert proc.returncode == 0, proc.stderr
    spec2 = read_grid_description(second)
    s = GridStore.open(store)
    assert s.manifest["grid_digest"] == spec2.digest and s.is_complete and not s.damaged_parts()
    assert not (store / "summary" / "old.ecsv").exists()
    assert sorted(p.name for p in store.iterdir()) == [".lock", "manifest.json", "parts"]
    reference = tmp_path / "reference"
    run_grid(spec2, reference, quiet(workers=1), model_factory=standin_factory)
    assert read_sorted(store).equals(read_sorted(reference))


def test_a_store_replaced_after_it_was_opened_is_not_written(tmp_path):
    first, second = _two_grids(tmp_path, chunk_size=40)
    store = tmp_path / "store"
    run_grid(read_grid_description(first), store, quiet(workers=1), model_factory=standin_factory)
    stale = GridStore.open(store)
    run_grid(read_grid_description(second), store, quiet(workers=1, overwrite=True), model_factory=standin_factory)
    with pytest.raises(GridError, match="replaced by another motes grid run"):
        stale.lock()


# ----------------------------------------------------------------------------- damaged parts
def _truncate(path: Path) -> None:
    data = path.read_bytes()
    path.write_bytes(data[: len(data) // 2])


def test_truncated_part_is_recomputed_on_resume_and_named(tmp_path):
    first, _ = _two_grids(tmp_path, chunk_size=40)
    spec = read_grid_description(first)
    store = tmp_path / "store"
    run_grid(spec, store, quiet(workers=1), model_factory=standin_factory)
    reference = read_sorted(store)
    victim = store / "parts" / "chunk-0000002.parquet"
    _truncate(victim)
    # summarising the damaged store is one clear error, not a pyarrow traceback
    with pytest.raises(GridError, match=r"chunk-0000002\.parquet is damaged.*motes grid"):
        summarize_grid(store)
    messages = []
    result = run_grid(spec, store, quiet(workers=1), model_factory=standin_factory, echo=messages.append)
    assert result.n_resumed == spec.n_points - 40 and result.n_computed == 40
    assert any("damaged part chunk-0000002.parquet" in m and "computed again" in m for m in messages), messages
    assert (store / "parts" / "chunk-0000002.parquet.damaged").exists()
    assert not GridStore.open(store).damaged_parts()
    assert read_sorted(store).equals(reference)
    summarize_grid(store)


def test_truncated_part_through_the_command_line(tmp_path):
    first, _ = _two_grids(tmp_path, chunk_size=40)
    store = tmp_path / "store"
    run_grid(read_grid_description(first), store, quiet(workers=1), model_factory=standin_factory)
    _truncate(store / "parts" / "chunk-0000000.parquet")
    cmd = [sys.executable, "-c", _CLI.format(tests=str(TESTS)), "grid", "summarize", str(store),
           "--output", str(tmp_path / "summary")]
    proc = subprocess.run(cmd, capture_output=True, text=True, timeout=120)
    assert proc.returncode == 2 and "is damaged" in proc.stderr and "Traceback" not in proc.stderr, proc.stderr
    proc = subprocess.run(_command(first, store), capture_output=True, text=True, timeout=120)
    assert proc.returncode == 0, proc.stderr
    assert "damaged part chunk-0000000.parquet" in proc.stdout
    assert "554 of 594 points already done" in proc.stdout


def test_part_with_flipped_bytes_fails_its_page_checksum(tmp_path):
    first, _ = _two_grids(tmp_path, chunk_size=40)
    store = tmp_path / "store"
    run_grid(read_grid_description(first), store, quiet(workers=1), model_factory=standin_factory)
    victim = store / "parts" / "chunk-0000001.parquet"
    data = bytearray(victim.read_bytes())
    data[200] ^= 0xFF                     # inside the first column's data page (the file starts with it)
    victim.write_bytes(bytes(data))
    damaged = GridStore.open(store).damaged_parts()
    assert [p.name for p, _ in damaged] == ["chunk-0000001.parquet"]


def test_part_beyond_the_grid_is_not_counted(tmp_path):
    first, _ = _two_grids(tmp_path, chunk_size=40)
    spec = read_grid_description(first)
    store = tmp_path / "store"
    run_grid(spec, store, quiet(workers=1), model_factory=standin_factory)
    parts = store / "parts"
    (parts / "chunk-0000099.parquet").write_bytes((parts / "chunk-0000000.parquet").read_bytes())
    s = GridStore.open(store)
    assert s.completed_points() == spec.n_points
    assert [p.name for p, _ in s.damaged_parts()] == ["chunk-0000099.parquet"]
    assert np.array_equal(read_sorted(store)["key"].to_numpy(), np.arange(spec.n_points))


# ----------------------------------------------------------------------------- disk full
def test_disk_full_during_a_grid_is_one_line_and_the_finished_parts_are_kept(tmp_path, capsys, monkeypatch):
    import errno

    import motes.dust.grid.run as grid_run
    from motes.cli import main

    first, _ = _two_grids(tmp_path, chunk_size=40)
    spec = read_grid_description(first)
    store = tmp_path / "store"
    monkeypatch.setattr(grid_run, "build_disk_model", standin_factory)
    import pyarrow.parquet as pq

    real_write = pq.write_table
    written = []

    def filling_up(table, where, **kwargs):        # the disk fills up half-way through the fourth part
        if len(written) == 3:
            Path(where).write_bytes(b"PAR1 half a part")
            raise OSError(errno.ENOSPC, "No space left on device", str(where))
        written.append(int(table.column("key")[0].as_py()) // 40)
        return real_write(table, where, **kwargs)

    monkeypatch.setattr(pq, "write_table", filling_up)
    rc = main(["grid", str(first), "--output", str(store), "--workers", "1", "--quiet", "--no-summary"])
    err = capsys.readouterr().err
    assert rc == 2 and len(err.strip().splitlines()) == 1 and "Traceback" not in err, err
    assert "No space left on device" in err and "run the same command again" in err
    s = GridStore.open(store)
    assert s.completed_chunks() == written and not s.damaged_parts()
    assert not [p for p in (store / "parts").iterdir() if not p.name.startswith("chunk-")]   # no temporaries
    monkeypatch.setattr(pq, "write_table", real_write)
    assert main(["grid", str(first), "--output", str(store), "--workers", "1", "--quiet", "--no-summary"]) == 0
    reference = tmp_path / "reference"
    run_grid(spec, reference, quiet(workers=1), model_factory=standin_factory)
    assert read_sorted(store).equals(read_sorted(reference))
