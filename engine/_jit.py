"""The one place that sets numba's compile options, and a context manager for thread counts.

Kernels use ``@jit`` or ``@jit_parallel`` from here and never set their own options. ``fastmath`` is a
set of flags that keeps NaN and infinity handling correct (grades hold NaNs) and keeps arithmetic
exactly as written: only ``nsz`` (the sign of zero may be ignored). Contraction into fused
multiply-adds, reassociation and approximate functions are left out on purpose: separations that sit
exactly on lag-bin edges (down-hole pairs at multiples of the composite length, grids) must fall in
the same bin in the kernels as in the slow references and for any thread count.
"""

from __future__ import annotations

import contextlib

import numba

FASTMATH = {"nsz"}
OPTIONS = dict(nogil=True, cache=True, fastmath=FASTMATH)


def jit(function=None, **extra):
    """Compile a serial kernel with the project's options."""
    decorator = numba.njit(**{**OPTIONS, **extra})
    return decorator if function is None else decorator(function)


def jit_parallel(function=None, **extra):
    """Compile a parallel kernel (``prange`` loops) with the project's options."""
    decorator = numba.njit(parallel=True, **{**OPTIONS, **extra})
    return decorator if function is None else decorator(function)


@contextlib.contextmanager
def threads(count: int | None):
    """Run the block with ``count`` numba threads (None: leave as is); restore it afterwards."""
    if count is None:
        yield numba.get_num_threads()
        return
    before = numba.get_num_threads()
    count = max(1, min(int(count), numba.config.NUMBA_NUM_THREADS))
    numba.set_num_threads(count)
    try:
        yield count
    finally:
        numba.set_num_threads(before)


@jit
def segmented_running_max(group_start, values, tags):
    """Running maximum of ``values`` restarted where ``group_start`` is true, with the tag of the
    element that holds it. Returns (maximum, tag) arrays of the same length."""
    n = values.shape[0]
    best = values.copy()
    best_tag = tags.copy()
    for i in range(1, n):
        if not group_start[i] and best[i - 1] >= values[i]:
            best[i] = best[i - 1]
            best_tag[i] = best_tag[i - 1]
    return best, best_tag
