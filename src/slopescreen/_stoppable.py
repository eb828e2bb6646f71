"""Long compiled kernels that Ctrl-C and SIGTERM can stop.

Python acts on a signal only in the main thread and only between bytecodes, so a compiled
kernel running there delays Ctrl-C until it returns (15-20 s for the global kernels of
Priority-Flood filling, flats and flow accumulation on 10^8 cells). :func:`call` runs the
kernel on a worker thread instead (every kernel of the package is compiled with
``nogil=True``) while the main thread waits in short, interruptible steps. When a signal's
exception arrives (KeyboardInterrupt, or the command line's termination on SIGTERM), the
main thread raises the kernel's stop flag, waits for the kernel to notice it (a loop of a
serial kernel polls the flag every :data:`POLL` steps and returns at once), then re-raises.
The kernel's partial output is never used: the exception ends the stage.

Without a signal nothing changes: the kernel runs to its end on the worker thread and its
results are bit-identical to a call on the main thread. Called from any other thread (a
figure thread, a Dask worker), the kernel runs in that thread directly: signals never
reach it there.
"""

from __future__ import annotations

import threading

import numpy as np

POLL = 1 << 16
"""Steps of a serial kernel's main loop between two looks at the stop flag (a few ms)."""


def new_flag() -> np.ndarray:
    """A stop flag: one uint8, 0 to go on, 1 to stop."""
    return np.zeros(1, dtype=np.uint8)


def call(kernel, *args, stop: bool = False):
    """``kernel(*args)``, or ``kernel(*args, flag)`` with ``stop``, interruptible by signals.

    Parameters
    ----------
    kernel : callable
        A compiled kernel (or any function that releases the GIL while it works).
    *args
        Its arguments.
    stop : bool
        The kernel takes a stop flag (:func:`new_flag`) as its last argument
        and returns early once the flag is set.

    Returns
    -------
    The kernel's return value.

    Examples
    --------
    >>> import numpy as np
    >>> int(call(np.add, 1, 2))
    3
    """
    flag = new_flag()
    full = (*args, flag) if stop else args
    if threading.current_thread() is not threading.main_thread():
        return kernel(*full)
    out: dict = {}
    done = threading.Event()

    def work():
        try:
            out["value"] = kernel(*full)
        except BaseException as exc:  # handed to the main thread, raised there
            out["error"] = exc
        finally:
            done.set()

    # waiting on an Event, not Thread.join: an interrupted join marks a running thread as
    # stopped (CPython 3.11, bpo-45274), after which it could not be waited for
    threading.Thread(target=work, name="slopescreen-kernel", daemon=True).start()
    try:
        while not done.wait(0.1):
            pass
    except BaseException:
        flag[0] = 1
        _wait(done)
        raise
    if "error" in out:
        raise out["error"]
    return out["value"]


def _wait(done: threading.Event) -> None:
    """Wait for the stopping kernel; a second signal meanwhile does not leave it running."""
    while not done.is_set():
        try:
            done.wait(0.1)
        except BaseException:  # noqa: PERF203 - a repeated Ctrl-C; the first one is raised
            continue
