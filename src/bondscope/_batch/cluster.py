"""The Dask engine: checkpoints as tasks of a dask.distributed cluster."""

from .._errors import one_line
from .worker import DIED, failure, profile_one

__all__ = ["dask_results"]


def dask_results(tasks, scheduler):
    """Run tasks on a Dask cluster; yields results as they finish.

    A task whose worker died (after the scheduler's own allowed failures) may only
    have shared that worker with the culprit, so it is resubmitted once; dying
    again marks it failed.
    """
    from dask.distributed import Client, as_completed
    from distributed.scheduler import KilledWorker

    own = not isinstance(scheduler, Client)
    client = Client(scheduler) if own else scheduler
    try:
        futures = {client.submit(profile_one, task, pure=False): task for task in tasks}
        retried = set()
        pending = as_completed(futures)
        for future in pending:
            task = futures.pop(future)
            try:
                yield future.result()
            except KilledWorker:
                if task["key"] in retried:
                    yield failure(task, DIED + "; resubmitted once, it died again")
                else:
                    retried.add(task["key"])
                    again = client.submit(profile_one, task, pure=False)
                    futures[again] = task
                    pending.add(again)
            except Exception as exc:
                yield failure(task, f"{type(exc).__name__}: {one_line(exc)}")
            future.release()
    finally:
        if own:
            client.close()
