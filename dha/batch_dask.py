"""The Dask engine of ``dha batch``: the same per-run function on a ``dask.distributed`` cluster.

``run_on_dask`` submits ``dha.batch.process_task`` for each task to a cluster given by its
scheduler address (``tcp://host:8786``), or to a ``LocalCluster`` of worker processes on the
loopback interface when none is given. Workers read the inputs and write the per-run files
themselves, so with a remote cluster the input and output folders must be on storage every
worker sees under the same path. The client gathers the outcomes as they finish (a bounded
number in flight) and hands each to the driver, which writes the database rows and summary.

Needs the optional extra: ``pip install "dha[dask]"``.
"""
from __future__ import annotations

from typing import Callable

from dha.errors import SettingsError


def _import_distributed():
    try:
        import distributed
    except ImportError:
        raise SettingsError('--engine dask needs dask.distributed: pip install "dha[dask]" '
                            "(or use the default local engine)") from None
    return distributed


def run_on_dask(tasks: list, job, collect: Callable[[list[dict]], None], *,
                scheduler: str | None = None, jobs: int = 2) -> None:
    """Process ``tasks`` on a Dask cluster; ``collect(outcomes)`` for each as it finishes.

    Parameters
    ----------
    tasks : ``dha.batch.Task`` list
    job : ``dha.batch.Job`` (sent once to the workers and shared by every task)
    collect : the driver's callback
    scheduler : address of a running scheduler; None starts a LocalCluster with ``jobs``
        single-threaded worker processes on 127.0.0.1
    jobs : workers of the LocalCluster; with a scheduler, tasks in flight per worker x 4
    """
    distributed = _import_distributed()
    from dha.batch import process_task

    cluster = None
    if scheduler is None:
        cluster = distributed.LocalCluster(n_workers=max(1, jobs), threads_per_worker=1,
                                           processes=True, host="127.0.0.1",
                                           dashboard_address=None)
        address = cluster.scheduler_address
    else:
        address = scheduler
    try:
        with distributed.Client(address, set_as_default=False) as client:
            n_workers = max(1, len(client.scheduler_info().get("workers", {})))
            window = 4 * n_workers
            job_future = client.scatter(job, broadcast=True)
            it = iter(tasks)
            first = [client.submit(process_task, task, job_future, pure=False)
                     for _, task in zip(range(window), it)]
            if not first:
                return
            queue = distributed.as_completed(first, loop=client.loop)
            for fut in queue:
                collect(fut.result())
                fut.release()
                nxt = next(it, None)
                if nxt is not None:
                    queue.add(client.submit(process_task, nxt, job_future, pure=False))
    finally:
        if cluster is not None:
            cluster.close()
