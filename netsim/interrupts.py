"""Holding a Ctrl-C back while a short block runs, then raising it as usual.

Used where an interrupt in the middle would leave a mess or a long traceback:

- the command line while it loads its modules (a SIGINT that lands inside a C extension's
  import, numpy's for one, comes out as an ImportError with a page of traceback rather than as
  KeyboardInterrupt; ``netsim.__main__`` and ``netsim.cli.main``);
- a sweep's ``ProcessPoolExecutor.submit`` (:mod:`netsim.sweep.executors`): submit may start a
  worker; the fork server forks the child, the coordinator writes the child its pickled
  arguments (which name the semaphores of the pool's queues and of the start-report queue) and
  then waits for the child's pid; only after that is the child entered in the pool's process
  table. A KeyboardInterrupt raised in that wait left a child nobody knew of: the pool could not
  end it, the coordinator exited and released the semaphores, and the child, still unpickling,
  printed a FileNotFoundError traceback.

Masking SIGINT in the thread does not help: the signal then goes to another thread of the
process and Python still raises it in the main thread. So the Python handler itself is replaced
for the block. Only the standard library is imported here.
"""

from __future__ import annotations

import contextlib
import signal
import threading
from collections.abc import Iterator
from typing import Any

__all__ = ["interrupt_deferred"]


@contextlib.contextmanager
def interrupt_deferred() -> Iterator[None]:
    """Hold a Ctrl-C back until the block has ended, then raise it as usual (a block with no
    Ctrl-C raises nothing; outside the main thread, or where Python did not install the SIGINT
    handler, the block runs as it is)."""
    if threading.current_thread() is not threading.main_thread() or signal.getsignal(signal.SIGINT) is None:
        yield  # KeyboardInterrupt is only raised in the main thread; None: a handler Python cannot restore
        return
    caught: list[Any] = []
    previous = signal.signal(signal.SIGINT, lambda signum, frame: caught.append(frame))
    try:
        yield
    finally:
        signal.signal(signal.SIGINT, previous)
        if caught:
            if callable(previous):
                previous(signal.SIGINT, caught[0])  # the default handler raises KeyboardInterrupt
            elif previous == signal.SIG_DFL:
                signal.raise_signal(signal.SIGINT)
