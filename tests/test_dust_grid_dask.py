"""Grids on a Dask distributed cluster: a LocalCluster over loopback, and a scheduler that is not there."""

from __future__ import annotations

import socket
import time

import pytest

from motes.dust.grid.spec import read_grid_description
from motes.dust.grid.run import GridRunSettings, run_grid
from motes.errors import GridError

from test_dust_grid import grid_file, read_sorted, standin_factory, tiny_real_factory, write_real_grid  # noqa: F401

distributed = pytest.importorskip("distributed", reason="Dask distributed is part of the test extra; "
                                                        "install with pip install -e '.[test]'")


@pytest.fixture(scope="module")
def cluster():
    from dask.distributed import LocalCluster

    # threads in this process talking TCP over loopback, no dashboard: cheap and private to the test
    with LocalCluster(n_workers=1, threads_per_worker=2, processes=False, protocol="tcp", host="127.0.0.1",
                      dashboard_address=None) as c:
        yield c


def test_dask_cluster_gives_the_same_store_as_local_processes(tmp_path, rng, cluster):
    # the real Mie model (coarse size quadrature), 60 points in 15 chunks
    spec = read_grid_description(write_real_grid(tmp_path, rng))
    run_grid(spec, tmp_path / "local", GridRunSettings(workers=2, progress=False), model_factory=tiny_real_factory)
    result = run_grid(spec, tmp_path / "dask", GridRunSettings(scheduler=cluster.scheduler_address, progress=False),
                      model_factory=tiny_real_factory)
    assert result.where.startswith("Dask scheduler") and result.n_computed == spec.n_points
    local, dask = read_sorted(tmp_path / "local"), read_sorted(tmp_path / "dask")
    assert dask["key"].is_unique and len(dask) == spec.n_points
    assert local.equals(dask)


def test_dask_run_resumes_a_store_started_locally(grid_file, tmp_path, cluster):  # noqa: F811
    spec = read_grid_description(grid_file)
    run_grid(spec, tmp_path / "full", GridRunSettings(workers=1, progress=False), model_factory=standin_factory)
    run_grid(spec, tmp_path / "mixed", GridRunSettings(workers=1, progress=False), model_factory=standin_factory)
    for p in sorted((tmp_path / "mixed" / "parts").glob("chunk-*.parquet"))[3:]:
        p.unlink()
    result = run_grid(spec, tmp_path / "mixed", GridRunSettings(scheduler=cluster.scheduler_address, progress=False),
                      model_factory=standin_factory)
    assert result.n_resumed > 0
    assert read_sorted(tmp_path / "full").equals(read_sorted(tmp_path / "mixed"))


def test_unreachable_scheduler_fails_fast_and_writes_nothing(grid_file, tmp_path):  # noqa: F811
    with socket.socket() as s:                 # a loopback port nobody listens on
        s.bind(("127.0.0.1", 0))
        port = s.getsockname()[1]
    spec = read_grid_description(grid_file)
    out = tmp_path / "store"
    start = time.perf_counter()
    with pytest.raises(GridError, match="cannot reach the Dask scheduler.*nothing was written"):
        run_grid(spec, out, GridRunSettings(scheduler=f"tcp://127.0.0.1:{port}", scheduler_timeout=2,
                                            progress=False), model_factory=standin_factory)
    assert time.perf_counter() - start < 30      # 2 s timeout plus Dask's connection retries
    assert not out.exists()


def test_unreachable_scheduler_leaves_an_existing_store_alone(grid_file, tmp_path):  # noqa: F811
    spec = read_grid_description(grid_file)
    out = tmp_path / "store"
    run_grid(spec, out, GridRunSettings(workers=1, progress=False), model_factory=standin_factory)
    before = {p.name: p.stat().st_mtime_ns for p in (out / "parts").iterdir()}
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        port = s.getsockname()[1]
    with pytest.raises(GridError, match="cannot reach"):
        run_grid(spec, out, GridRunSettings(scheduler=f"tcp://127.0.0.1:{port}", scheduler_timeout=1,
                                            overwrite=True, progress=False), model_factory=standin_factory)
    assert {p.name: p.stat().st_mtime_ns for p in (out / "parts").iterdir()} == before


@pytest.mark.slow
def test_dask_worker_processes_give_the_same_store(tmp_path, rng):
    # slow: starts two worker processes (each imports motes); the default suite uses threads instead
    from dask.distributed import LocalCluster

    spec = read_grid_description(write_real_grid(tmp_path, rng))
    run_grid(spec, tmp_path / "local", GridRunSettings(workers=1, progress=False), model_factory=tiny_real_factory)
    with LocalCluster(n_workers=2, threads_per_worker=1, processes=True, host="127.0.0.1",
                      dashboard_address=None) as c:
        run_grid(spec, tmp_path / "dask", GridRunSettings(scheduler=c.scheduler_address, progress=False),
                 model_factory=tiny_real_factory)
    assert read_sorted(tmp_path / "local").equals(read_sorted(tmp_path / "dask"))
