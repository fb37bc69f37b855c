"""Executors: the one replaceable function that runs a list of work items.

An executor is any callable ``run(func, items, on_done=None) -> list`` that returns
``[func(item) for item in items]`` in the order of ``items``, calling
``on_done(index, result)`` as each item finishes (for a progress bar, or to keep what is
done when the run is interrupted). Work items are whole batches (a chunk of samples, a set
of cases), so each call to ``func`` solves many circuits at once.

- :func:`local_executor` runs the items one after another in this process (the compiled
  engine already spreads a batch over every core).
- :func:`dask_executor` runs them on a Dask cluster: one at ``address``, or a local
  cluster started for the run. Needs the optional ``dask`` extra
  (``pip install 'fleetpower[dask]'``); Dask is imported only when asked for.

Because each item's result depends only on the item, both give identical results; the
order results are gathered in is the order of ``items``, whatever order they finish in.
"""

from __future__ import annotations

import contextlib
import logging
from collections.abc import Callable, Iterator, Sequence
from typing import Any

from .errors import FleetpowerError

OnDone = Callable[[int, Any], None]
Executor = Callable[..., list]


class ExecutorError(FleetpowerError):
    """The requested executor cannot run (Dask missing, scheduler unreachable)."""


def chunk_ranges(n: int, chunk_size: int, start: int = 0) -> list[tuple[int, int]]:
    """Cut ``start .. start+n-1`` into half-open ranges of at most ``chunk_size``.

    >>> chunk_ranges(5, 2)
    [(0, 2), (2, 4), (4, 5)]
    """
    if chunk_size < 1:
        raise ValueError("chunk_size must be at least 1")
    if n < 0:
        raise ValueError("n cannot be negative")
    return [(a, min(a + chunk_size, start + n)) for a in range(start, start + n, chunk_size)]


def local_executor(func: Callable[[Any], Any], items: Sequence[Any],
                   on_done: OnDone | None = None) -> list:
    """Run ``func`` on each item in order, in this process."""
    out = []
    for i, item in enumerate(items):
        result = func(item)
        out.append(result)
        if on_done is not None:
            on_done(i, result)
    return out


def dask_available() -> bool:
    """Whether ``dask.distributed`` can be imported."""
    try:
        import distributed  # noqa: F401
    except ImportError:
        return False
    return True


@contextlib.contextmanager
def dask_executor(
    address: str | None = None,
    n_workers: int = 2,
    threads_per_worker: int = 1,
    processes: bool = True,
    timeout_s: float = 30.0,
) -> Iterator[Executor]:
    """A Dask-backed executor, valid inside the ``with`` block.

    Parameters
    ----------
    address : str, optional
        Scheduler address (``"tcp://host:8786"``). Without it a local cluster of
        ``n_workers`` workers is started for the block and closed after it.
    n_workers, threads_per_worker : int
        Size of the local cluster. One thread per worker: the engine shoots a batch's
        rows on its own threads (one per core) already.
    processes : bool
        Local workers as processes (default; each has its own compiled engine) or as
        threads of this process.
    timeout_s : float
        How long to wait for the scheduler [s].

    Yields
    ------
    callable
        ``run(func, items, on_done=None) -> list``, results in the order of ``items``.
        ``func`` and the items are pickled to the workers: ``func`` must be importable
        (a module-level function). On an interrupt the pending tasks are cancelled.

    Raises
    ------
    ExecutorError
        When Dask is not installed or the scheduler cannot be reached.
    """
    try:
        from distributed import Client, LocalCluster, as_completed
    except ImportError:
        raise ExecutorError(
            "the Dask backend needs the optional 'dask' extra: "
            "pip install 'fleetpower[dask]'") from None
    cluster = None
    try:
        if address:
            client = Client(address, timeout=f"{timeout_s}s")
        else:
            cluster = LocalCluster(
                n_workers=n_workers, threads_per_worker=threads_per_worker,
                processes=processes, dashboard_address=":0", silence_logs=logging.ERROR)
            client = Client(cluster, timeout=f"{timeout_s}s")
    except (OSError, TimeoutError) as exc:
        if cluster is not None:
            cluster.close()
        where = address or "a local cluster"
        raise ExecutorError(f"cannot reach the Dask scheduler at {where}: {exc}") from None

    def run(func: Callable[[Any], Any], items: Sequence[Any],
            on_done: OnDone | None = None) -> list:
        futures = client.map(func, list(items), pure=False)
        position = {f.key: i for i, f in enumerate(futures)}
        results: list[Any] = [None] * len(futures)
        try:
            for future, result in as_completed(futures, with_results=True):
                i = position[future.key]
                results[i] = result
                if on_done is not None:
                    on_done(i, result)
        except BaseException:
            client.cancel(futures)
            raise
        return results

    try:
        yield run
    finally:
        client.close()
        if cluster is not None:
            cluster.close()
