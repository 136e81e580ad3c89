"""Compile policy, limits and the thread-count context manager.

One place decides how kernels are compiled. ``fastmath`` is off: its ``nnan``/``ninf``
flags would delete the NaN checks we rely on, and the safe subset buys nothing
(measured, see the stack notes). ``error_model="numpy"`` gives IEEE division everywhere.
"""

from __future__ import annotations

import contextlib
import os

#: Options for every serial kernel.
JIT = dict(cache=True, fastmath=False, error_model="numpy", nogil=True)
#: Options for kernels with a ``prange`` loop.
JIT_PARALLEL = dict(JIT, parallel=True)

#: Default memory budget for one loaded volume or one frame's accumulators (bytes).
DEFAULT_MEMORY_BUDGET = 8 * 1024**3


def memory_budget() -> int:
    """Bytes a single volume or frame may take; ``TRACER_MEMORY_BUDGET_MB`` overrides."""
    value = os.environ.get("TRACER_MEMORY_BUDGET_MB")
    if value is None:
        return DEFAULT_MEMORY_BUDGET
    try:
        megabytes = float(value)
    except ValueError:
        from .errors import UserError

        raise UserError(f"TRACER_MEMORY_BUDGET_MB={value!r}: not a number of megabytes")
    return int(megabytes * 1024**2)


def check_threads(n: int | None) -> None:
    """Refuse a thread count below 1 or above the cores numba sees (``NUMBA_NUM_THREADS``); None is fine."""
    if n is None:
        return
    import numba

    most = numba.config.NUMBA_NUM_THREADS
    if isinstance(n, bool) or not isinstance(n, int) or not 1 <= n <= most:
        from .errors import UserError

        raise UserError(f"--threads: must be a whole number from 1 to {most} (the cores numba sees), got {n!r}; "
                        "leave it out to use them all")


@contextlib.contextmanager
def num_threads(n: int | None):
    """Run the body with ``n`` numba threads, then restore the previous count.

    ``numba.set_num_threads`` is thread-local, so this affects only the calling thread.
    ``None`` leaves the count unchanged. A count below 1 or above the cores numba sees
    (``NUMBA_NUM_THREADS``) is refused with a :class:`tracer.UserError`.
    """
    import numba

    if n is None:
        yield
        return
    check_threads(n)
    previous = numba.get_num_threads()
    numba.set_num_threads(n)
    try:
        yield
    finally:
        numba.set_num_threads(previous)
