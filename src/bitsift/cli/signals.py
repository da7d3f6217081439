"""Ctrl-C and SIGTERM in the CLI: cancel the running statements, then exit with one line.

Python runs a signal handler only when the main thread executes Python code again; a
statement running inside DuckDB (or chdb) keeps the main thread in C until it ends, minutes
later. So the C-level handler also writes the signal to a pipe (``signal.set_wakeup_fd``), and
a watcher thread reading it cancels every open engine's statement at once
(:func:`bitsift.engines.base.cancel_all`); the main thread then returns and raises
KeyboardInterrupt (SIGINT) or :class:`~bitsift.errors.Terminated` (SIGTERM). If it still has
not finished after :data:`GRACE_SECONDS` (an engine without a cancel), the watcher ends the
process with the signal's exit code, as the default handler would have at once.
"""

from __future__ import annotations

import os
import signal
import sys
import threading
from collections.abc import Iterator
from contextlib import contextmanager

from bitsift.engines.base import cancel_all
from bitsift.errors import Terminated

#: How long the main thread may take to unwind after a cancel before the process is ended.
GRACE_SECONDS = 10.0
_LINES: dict[int, str] = {int(signal.SIGINT): "Interrupted.", int(signal.SIGTERM): "Terminated."}
#: The signals the watcher saw, first first.
_RECEIVED: list[int] = []


def received() -> KeyboardInterrupt | None:
    """The interrupt a signal caught by the watcher stands for, or None: a statement it
    cancelled may fail with a QueryCancelledError before Python's own handler runs."""
    if not _RECEIVED:
        return None
    return Terminated() if _RECEIVED[0] == signal.SIGTERM else KeyboardInterrupt()


def _raise_terminated(_signum: int, _frame: object) -> None:
    raise Terminated


def _watch(read_end: int, finished: threading.Event) -> None:
    """Cancel on the first SIGINT or SIGTERM; end the process if the main thread hangs."""
    while not finished.is_set():
        try:
            data = os.read(read_end, 16)
        except OSError:  # the pipe was closed: bitsift has finished
            return
        if not data:
            return
        caught = [s for s in data if s in _LINES]
        if not caught:
            continue
        _RECEIVED.extend(caught)
        cancel_all()
        if not finished.wait(GRACE_SECONDS):
            os.write(sys.stderr.fileno(), (_LINES[caught[0]] + "\n").encode())
            os._exit(128 + caught[0])


@contextmanager
def cancel_on_signals() -> Iterator[None]:
    """While the CLI runs: SIGTERM raises Terminated, and both signals cancel the engines'
    statements from a watcher thread. Handlers may only be set from the main thread: from any
    other, nothing changes."""
    if threading.current_thread() is not threading.main_thread():
        yield
        return
    _RECEIVED.clear()
    read_end, write_end = os.pipe()
    os.set_blocking(write_end, False)  # set_wakeup_fd needs a non-blocking descriptor
    finished = threading.Event()
    previous_term = signal.signal(signal.SIGTERM, _raise_terminated)
    previous_fd = signal.set_wakeup_fd(write_end, warn_on_full_buffer=False)
    watcher = threading.Thread(target=_watch, args=(read_end, finished), daemon=True,
                               name="bitsift-signals")
    watcher.start()
    try:
        yield
    finally:
        finished.set()
        signal.set_wakeup_fd(previous_fd)
        signal.signal(signal.SIGTERM, previous_term)
        os.write(write_end, b"\0")  # wakes the watcher, which sees `finished` and returns
        watcher.join()
        os.close(write_end)
        os.close(read_end)
