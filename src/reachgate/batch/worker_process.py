"""A cluster worker process set up for checking cases while it runs reachgate's tasks.

A Dask worker is a process its owner configured; two of its settings cost a case checked in
it far more CPU time than the same case in one of scan's own local workers:

- the C heap. glibc's malloc serves blocks above its mmap threshold with fresh pages and
  raises that threshold by itself (up to 32 MiB) once such blocks are freed, so a process
  that allocates and frees arrays of one size again and again reuses its heap. Any of the
  MALLOC_*_ variables below in a process's environment turns that adjustment off, and Dask's
  nanny starts every worker with MALLOC_TRIM_THRESHOLD_=65536 (its default
  ``distributed.nanny.pre-spawn-environ``): every temporary array above 128 KiB is then
  mapped, zero-filled page by page and unmapped again. A 60 s case of the scan benchmark
  made about 22 000 page faults in such a worker against 100 to 200 in a local worker, and
  took twice its CPU time (measured; tests/benchmarks/bench_scan.py --dask prints both).
- BLAS threads. A worker started without the nanny (``dask worker --no-nanny``) or outside
  Dask's defaults runs OpenBLAS with a thread per core; on the small matrices of a check they
  only contend (2.5 times the CPU time per case with two threads in one process on two
  cores, measured). OpenBLAS ignores a count set from a task's thread once the process's
  main thread has set one: such a worker keeps its count.

steady_worker() sets both for the duration of a task: the malloc thresholds at the values
glibc's own adjustment reaches, and one BLAS thread (threadpoolctl). On leaving, the free
memory goes back to the system (malloc_trim, what Dask's memory documentation advises) and
the settings return to what they were, so the worker is left as its owner configured it.
keep_heap() does the heap part for good in worker processes of our own.
"""

from __future__ import annotations

import ctypes
import ctypes.util
import os
import threading
from collections.abc import Iterator, Mapping
from contextlib import ExitStack, contextmanager

#: Variables that fix glibc's malloc thresholds (and so turn off its own adjustment).
PINNING_VARIABLES = (
    "MALLOC_TRIM_THRESHOLD_",
    "MALLOC_MMAP_THRESHOLD_",
    "MALLOC_TOP_PAD_",
    "MALLOC_MMAP_MAX_",
)
#: mallopt parameter numbers (glibc malloc.h).
M_TRIM_THRESHOLD = -1
M_MMAP_THRESHOLD = -3
#: glibc's defaults for the two thresholds (malloc.c: DEFAULT_MMAP_THRESHOLD_MIN,
#: DEFAULT_TRIM_THRESHOLD), restored when the environment does not name them, bytes.
GLIBC_DEFAULT_THRESHOLD = 128 * 1024
#: During a task: the ceiling of glibc's own mmap-threshold adjustment on 64-bit machines
#: (DEFAULT_MMAP_THRESHOLD_MAX, 32 MiB), and twice that for trimming, as glibc sets it.
TASK_MMAP_THRESHOLD = 32 * 1024 * 1024
TASK_TRIM_THRESHOLD = 2 * TASK_MMAP_THRESHOLD
#: BLAS threads while a task runs: the cluster's worker threads already fill the cores.
TASK_BLAS_THREADS = 1

_lock = threading.Lock()
_active = 0  # tasks of this process inside steady_worker()
_undo: ExitStack | None = None  # how to put the process back, while _active > 0


def _glibc():
    """The C library if it is glibc (with mallopt and malloc_trim), else None."""
    try:
        os.confstr("CS_GNU_LIBC_VERSION")
        libc = ctypes.CDLL(ctypes.util.find_library("c") or "libc.so.6")
        libc.mallopt.argtypes = (ctypes.c_int, ctypes.c_int)
        libc.malloc_trim.argtypes = (ctypes.c_size_t,)
    except (ValueError, OSError, AttributeError):  # not glibc, or no C library found
        return None
    return libc


def pinned_thresholds(environ: Mapping[str, str] = os.environ) -> tuple[int, int] | None:
    """(trim, mmap) thresholds in bytes that the environment fixed; None when glibc adjusts
    them itself (none of PINNING_VARIABLES set) or when a value is not a plain number (the
    heap is then left alone, since it could not be put back)."""
    if not any(name in environ for name in PINNING_VARIABLES):
        return None
    try:
        trim = int(environ.get("MALLOC_TRIM_THRESHOLD_", GLIBC_DEFAULT_THRESHOLD))
        mmap = int(environ.get("MALLOC_MMAP_THRESHOLD_", GLIBC_DEFAULT_THRESHOLD))
    except ValueError:
        return None
    return trim, mmap


def _raise_thresholds(libc) -> None:
    libc.mallopt(M_MMAP_THRESHOLD, TASK_MMAP_THRESHOLD)
    libc.mallopt(M_TRIM_THRESHOLD, TASK_TRIM_THRESHOLD)


def keep_heap() -> None:
    """For a worker process of our own (the local pools of scan and place), for the rest of
    its life: the heap kept for reuse when its environment pinned the thresholds. A scan
    started from a process that ran a Dask LocalCluster inherits the nanny's
    MALLOC_TRIM_THRESHOLD_ (the nanny sets it in the process that starts it)."""
    libc = _glibc() if pinned_thresholds() else None
    if libc is not None:
        _raise_thresholds(libc)


def _settle(stack: ExitStack) -> None:
    """Set this process up for checking cases; push onto stack what puts it back."""
    pinned = pinned_thresholds()
    libc = _glibc() if pinned else None
    if libc is not None:
        trim, mmap = pinned

        def restore_heap() -> None:
            libc.mallopt(M_MMAP_THRESHOLD, mmap)
            libc.mallopt(M_TRIM_THRESHOLD, trim)
            libc.malloc_trim(0)

        _raise_thresholds(libc)
        stack.callback(restore_heap)
    from threadpoolctl import threadpool_limits

    stack.enter_context(threadpool_limits(TASK_BLAS_THREADS, user_api="blas"))


@contextmanager
def steady_worker() -> Iterator[None]:
    """Inside: large blocks stay in the heap for reuse and BLAS runs one thread (see the
    module's text). Nested or concurrent uses in one process (a worker with several threads)
    share one setting; the last to leave puts the process back."""
    global _active, _undo
    with _lock:
        if _active == 0:
            with ExitStack() as stack:
                _settle(stack)
                _undo = stack.pop_all()
        _active += 1
    try:
        yield
    finally:
        with _lock:
            _active -= 1
            if _active == 0:
                undo, _undo = _undo, None
                undo.close()
