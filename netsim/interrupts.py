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
for the block.

:func:`interrupt_guarded` covers the rest of a command's run (``netsim.cli.main``). Python runs
a SIGINT handler in whatever Python code the main thread is executing, and some of that code
cannot pass an exception on: a ``KeyboardInterrupt`` raised in a weak-reference callback or a
``__del__`` is printed as "Exception ignored in ..." with a traceback, and the Ctrl-C is lost
(seen in this project's CI: SIGINT 1.0 s into ``netsim sweep`` landed in the callback with which
the import system drops a module lock: the traceback was printed, the Ctrl-C lost). Inside the
import system, or where it was swallowed all the same, the interrupt is delivered again a moment
later, until it lands where it can stop the command. Only the standard library is imported here.
"""

from __future__ import annotations

import contextlib
import signal
import sys
import threading
from collections.abc import Iterator
from types import FrameType
from typing import Any

__all__ = ["interrupt_deferred", "interrupt_guarded"]

#: How long a Ctrl-C that could not be raised where it landed waits before it is delivered again.
REDELIVER_S = 0.01


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
            if callable(previous):  # the default handler raises KeyboardInterrupt
                previous(signal.SIGINT, sys._getframe())  # where it is raised: here, not where it landed
            elif previous == signal.SIG_DFL:
                signal.raise_signal(signal.SIGINT)


def _inside_import(frame: FrameType | None) -> bool:
    """Whether the import system is running (its frames are on the stack, module code below)."""
    while frame is not None:
        if frame.f_code.co_filename.startswith("<frozen importlib"):
            return True
        frame = frame.f_back
    return False


class _Guard:
    """The SIGINT handler and unraisable-exception hook of :func:`interrupt_guarded`, and the
    Ctrl-C they are holding, if any."""

    def __init__(self, previous_hook: Any) -> None:
        self.previous_hook = previous_hook
        self.timer: threading.Timer | None = None
        self.lock = threading.RLock()  # deliveries and the block's end do not interleave; the
        # handler may run in the main thread while that thread holds the lock
        self.ended = False

    def deliver_later(self) -> None:
        """Send the Ctrl-C again to the main thread after :data:`REDELIVER_S` (while Ctrl-C is
        ignored, for instance while a sweep starts its fork server, wait until it is not)."""
        with self.lock:
            if self.timer is None and not self.ended:
                self.timer = threading.Timer(REDELIVER_S, self.deliver)
                self.timer.daemon = True
                self.timer.start()

    def deliver(self) -> None:
        with self.lock:
            if self.ended:
                return
            self.timer = None
            if callable(signal.getsignal(signal.SIGINT)):  # a real signal: it wakes a sleep or a wait
                signal.pthread_kill(threading.main_thread().ident or 0, signal.SIGINT)
            else:
                self.deliver_later()

    def end(self) -> bool:
        """Stop delivering; whether a Ctrl-C was still held."""
        with self.lock:
            self.ended = True
            if self.timer is None:
                return False
            self.timer.cancel()
            return True

    def on_sigint(self, signum: int, frame: FrameType | None) -> None:
        if _inside_import(frame):
            self.deliver_later()  # a module lock's callback cannot raise it; a C extension's import would garble it
            return
        raise KeyboardInterrupt

    def unraisable(self, args: Any) -> None:
        if isinstance(args.exc_value, KeyboardInterrupt):
            self.deliver_later()
        else:
            self.previous_hook(args)


@contextlib.contextmanager
def interrupt_guarded() -> Iterator[None]:
    """For the whole of a command: a Ctrl-C raises ``KeyboardInterrupt`` where it can reach the
    command's own handling. One that lands in the import system is delivered again a moment
    later; one raised in code that cannot pass it on (a weak-reference callback, ``__del__``) is
    not printed and is delivered again. One still held when the block ends is raised there.
    Outside the main thread, or where SIGINT is not Python's default handler (ignored, or a
    caller's own), the block runs as it is."""
    if (threading.current_thread() is not threading.main_thread()
            or signal.getsignal(signal.SIGINT) is not signal.default_int_handler):
        yield
        return
    guard = _Guard(sys.unraisablehook)
    signal.signal(signal.SIGINT, guard.on_sigint)
    sys.unraisablehook = guard.unraisable
    finished = False
    try:
        yield
        finished = True
    finally:
        held = guard.end()
        signal.signal(signal.SIGINT, signal.default_int_handler)
        sys.unraisablehook = guard.previous_hook
        if held and finished:
            raise KeyboardInterrupt
