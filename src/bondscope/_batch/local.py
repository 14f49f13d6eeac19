"""The local engine: a pool of worker processes that survives workers dying."""

import os
from collections import deque

from .._errors import one_line
from .worker import DIED, failure, profile_one, warm

__all__ = ["local_results"]


def local_results(tasks, workers):
    """Run tasks on a local process pool; yields results as they finish.

    At most ``workers`` tasks are in flight, so when a worker dies the tasks it
    may have been running are known: a lone one is the culprit; several are
    retried one at a time in a pool of their own.
    """
    import multiprocessing
    from concurrent.futures import FIRST_COMPLETED, ProcessPoolExecutor, wait
    from concurrent.futures.process import BrokenProcessPool

    context = multiprocessing.get_context("spawn")
    queue = deque(tasks)
    finished_any = False
    while queue:
        suspects, broken = [], False
        with ProcessPoolExecutor(max_workers=min(workers, len(queue)), mp_context=context,
                                 initializer=warm, initargs=(os.getpid(),)) as pool:
            running = {}
            while queue or running:
                while queue and not broken and len(running) < workers:
                    task = queue.popleft()
                    try:
                        running[pool.submit(profile_one, task)] = task
                    except BrokenProcessPool:
                        queue.appendleft(task)
                        broken = True
                if not running:
                    break
                finished, _ = wait(running, return_when=FIRST_COMPLETED)
                for future in finished:
                    task = running.pop(future)
                    exc = future.exception()
                    if isinstance(exc, BrokenProcessPool):
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
                yield from _alone(task, context)


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


def _alone(task, context):
    from concurrent.futures import ProcessPoolExecutor
    from concurrent.futures.process import BrokenProcessPool

    with ProcessPoolExecutor(max_workers=1, mp_context=context, initializer=warm,
                             initargs=(os.getpid(),)) as pool:
        try:
            yield pool.submit(profile_one, task).result()
        except BrokenProcessPool:
            yield failure(task, DIED + "; retried alone, it died again")
