"""Parallel execution of design evaluations (qwell.parallel): local processes and Dask.

The reference for every check here is the serial, in-process run of the same
work: splitting it over processes or a Dask cluster must not change a single
bit of the results (requirement of the design issue; no external source).
"""

from __future__ import annotations

import functools
import os
import time
from pathlib import Path

import numpy as np
import pytest

from qwell import design, parallel
from qwell.errors import QwellError
from qwell.stack import load_stack

ROOT = Path(__file__).resolve().parents[1]
LWIR = ROOT / "layers" / "lwir-detector.yaml"


def _square_chunk(offset, items):
    # a module-level (picklable) chunk function: returns the items squared plus the pid
    return [(x * x + offset, os.getpid()) for x in items]


def test_chunk_covers_items_in_order():
    items = list(range(23))
    parts = parallel.chunk(items, 5)
    assert len(parts) == 5
    assert [x for p in parts for x in p] == items
    assert max(map(len, parts)) - min(map(len, parts)) <= 2
    assert parallel.chunk([], 4) == []
    assert parallel.chunk([1, 2], 8) == [[1], [2]]


def test_map_serial_and_processes_agree():
    fn = functools.partial(_square_chunk, 3)
    items = list(range(100))
    serial = parallel.map_chunked(fn, items, jobs=1)
    procs = parallel.map_chunked(fn, items, jobs=2, min_parallel=1)
    assert [r[0] for r in serial] == [x * x + 3 for x in items]
    assert [r[0] for r in procs] == [r[0] for r in serial]
    assert {r[1] for r in serial} == {os.getpid()}
    assert os.getpid() not in {r[1] for r in procs}  # really ran in worker processes


def test_tiny_jobs_run_serially():
    fn = functools.partial(_square_chunk, 0)
    out = parallel.map_chunked(fn, [1, 2, 3], jobs=2)  # below MIN_PARALLEL_ITEMS
    assert {r[1] for r in out} == {os.getpid()}


@pytest.mark.parametrize("jobs", [0, -2, 1.5, True])
def test_bad_jobs(jobs):
    with pytest.raises(QwellError, match="expected a whole number"):
        parallel.resolve_jobs(jobs)


def test_default_jobs_is_core_count():
    # common practice, no source: "all local cores" = the CPUs this process may use
    assert parallel.default_jobs() == len(os.sched_getaffinity(0))


def test_progress_only_on_a_terminal(capsys):
    bar = parallel.Progress(10, "x")  # stderr is captured: not a terminal
    assert not bar.enabled
    bar.update(10)
    bar.close()
    assert capsys.readouterr().err == ""
    forced = parallel.Progress(4, "sweep", enabled=True)
    forced.update(4)
    forced.close()
    err = capsys.readouterr().err
    assert "sweep" in err and "4/4" in err


def test_evaluate_many_identical_across_job_counts():
    stack = load_stack(LWIR)
    sets = [{"well.thickness": float(v)} for v in np.linspace(5.0, 7.0, 24)]
    a = design.evaluate_many(stack, sets, jobs=1)
    b = design.evaluate_many(stack, sets, jobs=2)
    assert a == b


def test_worker_errors_propagate():
    # a ParameterError raised inside a worker reaches the caller unchanged
    stack = load_stack(LWIR)
    sets = [{"well.thickness": 5.0}] * 20 + [{"nope.thickness": 1.0}]
    with pytest.raises(QwellError, match="unknown parameter 'nope.thickness'"):
        design.evaluate_many(stack, sets, jobs=2)


# ---------------------------------------------------------------------------
# Dask (optional extra qwell[dask])
# ---------------------------------------------------------------------------
@pytest.fixture(scope="module")
def dask_client():
    distributed = pytest.importorskip("distributed")
    cluster = distributed.LocalCluster(n_workers=2, threads_per_worker=1, processes=False,
                                       host="127.0.0.1", protocol="tcp", dashboard_address=None)
    client = distributed.Client(cluster, set_as_default=False)
    try:
        yield client
    finally:
        client.close()
        cluster.close()


def test_dask_sweep_matches_local(dask_client):
    stack = load_stack(LWIR)
    values = np.linspace(5.0, 7.5, 12)
    local = design.sweep(stack, "well.thickness", values, ["e1-e2"], jobs=1)
    remote = design.sweep(stack, "well.thickness", values, ["e1-e2"], dask=dask_client)
    assert np.array_equal(local.wavelength_um["e1-e2"], remote.wavelength_um["e1-e2"])
    assert local.points == remote.points


def test_dask_by_address_matches_local(dask_client):
    address = dask_client.scheduler.address
    assert address.startswith("tcp://127.0.0.1:")  # loopback only
    stack = load_stack(LWIR)
    local = design.tolerance(stack, "e1-e2", {"well": "0.1 nm"}, composition_tol=0,
                             monte_carlo=12, seed=3, jobs=1)
    remote = design.tolerance(stack, "e1-e2", {"well": "0.1 nm"}, composition_tol=0,
                              monte_carlo=12, seed=3, dask=address)
    assert local.monte_carlo == remote.monte_carlo
    assert local.contributions == remote.contributions


def test_dask_unreachable_address_is_clear_and_bounded():
    pytest.importorskip("distributed")
    fn = functools.partial(_square_chunk, 0)
    t0 = time.perf_counter()
    with pytest.raises(parallel.ClusterError) as exc:
        parallel.map_chunked(fn, [1, 2, 3], dask="tcp://127.0.0.1:9", dask_timeout_s=1.5)
    elapsed = time.perf_counter() - t0
    msg = str(exc.value)
    assert "cannot reach the Dask scheduler at 'tcp://127.0.0.1:9' within 1.5 s" in msg
    assert "\n" not in msg
    assert elapsed < 1.5 + 5.0  # the stated timeout plus connection set-up


def test_dask_missing_package_message(monkeypatch):
    import builtins

    real_import = builtins.__import__

    def fake_import(name, *args, **kwargs):
        if name == "distributed" or name.startswith("distributed."):
            raise ImportError("No module named 'distributed'")
        return real_import(name, *args, **kwargs)

    monkeypatch.setattr(builtins, "__import__", fake_import)
    with pytest.raises(parallel.ClusterError, match=r"pip install 'qwell\[dask\]'"):
        parallel.map_chunked(functools.partial(_square_chunk, 0), [1], dask="tcp://x:1")
