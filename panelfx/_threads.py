"""Worker threads of one ``derive`` call: how many, and running independent pieces side by side.

``derive(threads=)`` sets :data:`WORKERS` for the duration of the call; the engine's parts read
it (the sort of the rows splits its work, transforms run side by side).  Every piece is
deterministic and writes only its own memory, so results are the same bit for bit whatever
the number of threads.  numpy releases the interpreter lock in its sorts, gathers and ufunc
loops over large arrays, which is where the time goes.
"""

from __future__ import annotations

import contextlib
import contextvars
import os
from collections.abc import Callable, Iterator, Sequence
from typing import TypeVar

T = TypeVar("T")

#: Threads the current ``derive`` call may use (1: everything on the calling thread).
WORKERS: contextvars.ContextVar[int] = contextvars.ContextVar("panelfx_workers", default=1)


#: Fewer rows than this run on one thread by default (starting threads costs more than it saves).
AUTO_MIN_ROWS = 1_000_000


def default_workers(rows: int) -> int:
    """Threads for ``derive(threads=None)``: two when the panel is large and a core is free.

    A second thread pays only on an idle core: on a machine whose cores are all busy (load
    average at or above the usable cores minus one) it competes with the other work and the
    job was measured slower, so one thread is used then (see benchmarks/README.md).
    """
    if rows < AUTO_MIN_ROWS:
        return 1
    try:
        cores = len(os.sched_getaffinity(0))
    except AttributeError:  # pragma: no cover - not on Linux
        cores = os.cpu_count() or 1
    if cores < 2:
        return 1
    try:
        load = os.getloadavg()[0]
    except (OSError, AttributeError):  # no load average (AttributeError: not on this OS, e.g. Windows)
        return 1
    return 2 if load <= cores - 1 else 1


@contextlib.contextmanager
def using(n: int) -> Iterator[None]:
    """Let the engine use ``n`` threads inside the block."""
    token = WORKERS.set(n)
    try:
        yield
    finally:
        WORKERS.reset(token)


def run_all(tasks: Sequence[Callable[[], T]]) -> list[T]:
    """Results of ``tasks`` in their order, run on up to :data:`WORKERS` threads.

    Each task runs in a copy of the caller's context, so the engine's forcing switches
    (``panelfx._order.forced``, ``panelfx._kernels.FORCED_SEARCH``) hold on every thread.
    """
    workers = min(WORKERS.get(), len(tasks))
    if workers <= 1:
        return [task() for task in tasks]
    from concurrent.futures import ThreadPoolExecutor

    contexts = [contextvars.copy_context() for _ in tasks]
    with ThreadPoolExecutor(max_workers=workers) as pool:
        futures = [pool.submit(ctx.run, task) for ctx, task in zip(contexts, tasks)]
        return [f.result() for f in futures]
