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
from collections.abc import Callable, Iterator, Sequence
from typing import TypeVar

T = TypeVar("T")

#: Threads the current ``derive`` call may use (1: everything on the calling thread).
WORKERS: contextvars.ContextVar[int] = contextvars.ContextVar("panelfx_workers", default=1)


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
