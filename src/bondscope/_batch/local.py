"""The local engine: a pool of worker processes that survives workers dying."""

import os
import time
from collections import deque

from .._errors import one_line
from .worker import DIED, failure, hard_limit, overran, profile_one, warm

__all__ = ["local_results"]


def local_results(tasks, workers, time_limit=None):
    """Run tasks on a local process pool; yields results as they finish.

    At most ``workers`` tasks are in flight, so when a worker dies the tasks it
    may have been running are known: a lone one is the culprit; several are
    retried one at a time in a pool of their own.  A task still running
    :func:`~bondscope._batch.worker.hard_limit` seconds after it was given out
    (its worker did not stop it at ``time_limit``, e.g. blocked inside HDF5)
    is failed and the pool's processes are killed; the other tasks in flight
    are given out again.
    """
    import multiprocessing
    from concurrent.futures import FIRST_COMPLETED, ProcessPoolExecutor, wait
    from concurrent.futures.process import BrokenProcessPool

    context = multiprocessing.get_context("spawn")
    queue = deque(tasks)
    finished_any = False
    while queue:
        suspects, broken, overdue = [], False, set()
        with ProcessPoolExecutor(max_workers=min(workers, len(queue)), mp_context=context,
                                 initializer=warm, initargs=(os.getpid(),)) as pool:
            running, deadlines = {}, {}
            while queue or running:
                while queue and not broken and len(running) < workers:
                    task = queue.popleft()
                    try:
                        future = pool.submit(profile_one, task)
                    except BrokenProcessPool:
                        queue.appendleft(task)
                        broken = True
                        continue
                    running[future] = task
                    if time_limit is not None:
                        deadlines[future] = time.monotonic() + hard_limit(time_limit)
                if not running:
                    break
                timeout = None if not deadlines else \
                    max(0.0, min(deadlines.values()) - time.monotonic())
                finished, _ = wait(running, timeout=timeout, return_when=FIRST_COMPLETED)
                if not finished:
                    now = time.monotonic()
                    overdue |= {running[f]["key"] for f, end in deadlines.items() if end <= now}
                    if overdue:
                        _kill(pool)
                        broken = True
                    continue
                for future in finished:
                    task = running.pop(future)
                    deadlines.pop(future, None)
                    exc = future.exception()
                    if isinstance(exc, BrokenProcessPool) and task["key"] in overdue:
                        yield failure(task, overran(time_limit))
                    elif isinstance(exc, BrokenProcessPool) and overdue:
                        queue.appendleft(task)  # killed with the overdue one, not its fault
                    elif isinstance(exc, BrokenProcessPool):
                        suspects.append(task)
                        broken = True
                    elif exc is not None:
                        yield failure(task, f"{type(exc).__name__}: {one_line(exc)}")
                    else:
                        finished_any = True
                        yield future.result()
        if suspects and not finished_any:
            _check_start(context)
        if len(suspects) == 1:
            yield failure(suspects[0], DIED)
        else:
            for task in suspects:
                yield from _alone(task, context, time_limit)


def _kill(pool):
    """Kill a pool's worker processes (the executor has no public way to)."""
    for process in list(getattr(pool, "_processes", {}).values()):
        process.kill()


def _check_start(context):
    """Raise RuntimeError when worker processes cannot even start, rather than blame
    every checkpoint for their deaths."""
    from concurrent.futures import ProcessPoolExecutor
    from concurrent.futures.process import BrokenProcessPool

    with ProcessPoolExecutor(max_workers=1, mp_context=context) as pool:
        try:
            pool.submit(os.getpid).result()
        except BrokenProcessPool:
            raise RuntimeError("worker processes die on start-up; new processes re-import "
                               "the main module, which fails when Python reads the program "
                               "from standard input (run it from a file)") from None


def _alone(task, context, time_limit):
    from concurrent.futures import ProcessPoolExecutor
    from concurrent.futures import TimeoutError as Overdue
    from concurrent.futures.process import BrokenProcessPool

    with ProcessPoolExecutor(max_workers=1, mp_context=context, initializer=warm,
                             initargs=(os.getpid(),)) as pool:
        future = pool.submit(profile_one, task)
        try:
            yield future.result(timeout=None if time_limit is None else hard_limit(time_limit))
        except Overdue:
            _kill(pool)
            yield failure(task, overran(time_limit))
        except BrokenProcessPool:
            yield failure(task, DIED + "; retried alone, it died again")
