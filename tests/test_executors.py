"""The batch executors: local and Dask give identical results in the order of the items.

Reference: the plain local run of the same work items (results must be bit-identical,
the issue's acceptance for the Dask backend).
"""

from __future__ import annotations

import functools

import numpy as np
import pytest

from fleetpower.executors import ExecutorError, chunk_ranges, dask_executor, local_executor
from fleetpower.spread.sampling import monte_carlo_chunk
from fleetpower.spread.tolerance import PartSpread

SPREADS = [
    PartSpread("parts.series_capacitance", 470e-9, "uniform", 0.10),
    PartSpread("parts.zener_voltage", 10.0, "normal", 0.05),
    PartSpread("mains.voltage", 230.0, "uniform", 0.10),
]


def test_chunk_ranges_cover_every_index_once():
    assert chunk_ranges(5, 2) == [(0, 2), (2, 4), (4, 5)]
    assert chunk_ranges(0, 3) == []
    assert chunk_ranges(4, 10, start=6) == [(6, 10)]
    with pytest.raises(ValueError):
        chunk_ranges(3, 0)


def test_local_executor_reports_each_item_in_order():
    seen = []
    out = local_executor(lambda x: x * x, [3, 1, 2], on_done=lambda i, r: seen.append((i, r)))
    assert out == [9, 1, 4] and seen == [(0, 9), (1, 1), (2, 4)]


def test_dask_local_cluster_matches_the_local_run():
    pytest.importorskip("distributed")
    work = functools.partial(monte_carlo_chunk, SPREADS, 2026)
    items = chunk_ranges(600, 64)
    local = np.concatenate(local_executor(work, items))
    done = []
    # two worker processes, one thread each: the configuration the spread run uses
    with dask_executor(n_workers=2, threads_per_worker=1, processes=True) as run:
        remote = run(work, items, on_done=lambda i, r: done.append(i))
    assert np.concatenate(remote).tobytes() == local.tobytes()
    assert sorted(done) == list(range(len(items)))


def test_unreachable_scheduler_is_an_executor_error():
    pytest.importorskip("distributed")
    with pytest.raises(ExecutorError, match="cannot reach"):
        with dask_executor(address="tcp://127.0.0.1:9", timeout_s=1.0):
            pass
