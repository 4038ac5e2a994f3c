"""Run a block of numerical work with the BLAS library on one thread.

A diagnosis does many small dense operations (30 x 30 Cholesky factors,
thousands of short matrix products).  OpenBLAS hands each of them to its
worker threads, and on a two-core laptop the hand-offs cost more than the
arithmetic: the 200-part benchmark ran 95 ms on one thread against 145 ms on
two.  The sparse factorization (SuperLU) does not use BLAS threads at all.

Large networks are no exception: their dense products (100 readings x
100,000 parts) are memory-bound and gain little from a second thread, while
on a machine whose cores are busy with other work OpenBLAS's waiting threads
cost far more than they save -- on the 100,000-part scale benchmark, with the
two cores shared by other jobs, a diagnosis took 99-105 s with the library's
threads against 51-57 s on one (docs/performance.md).  So the diagnosis and
the advice run on one BLAS thread whatever the size.

This module finds the OpenBLAS libraries numpy and SciPy have loaded (the
ones bundled with their wheels) and sets their thread count for the duration
of a ``with`` block, then restores it.  Where it cannot find them (another
BLAS, another platform) it does nothing: only speed depends on it.  It does
the job of the ``threadpoolctl`` package for the two libraries we ship with,
without the dependency.
"""

from __future__ import annotations

import contextlib
import ctypes
import threading

__all__ = ["one_thread", "threads_for"]

_SETTERS = ("scipy_openblas_set_num_threads64_", "scipy_openblas_set_num_threads",
            "openblas_set_num_threads64_", "openblas_set_num_threads")
_GETTERS = ("scipy_openblas_get_num_threads64_", "scipy_openblas_get_num_threads",
            "openblas_get_num_threads64_", "openblas_get_num_threads")
_lock = threading.Lock()
_found = None
_depth = 0


def _libraries():
    """(set, get) function pairs of the OpenBLAS libraries loaded in this process."""
    global _found
    if _found is not None:
        return _found
    _found = []
    try:
        paths = set()
        with open("/proc/self/maps", encoding="utf-8", errors="replace") as fh:
            for line in fh:
                name = line.rsplit(None, 1)[-1] if "/" in line else ""
                if "openblas" in name.lower() and ".so" in name:
                    paths.add(name)
        for path in sorted(paths):
            lib = ctypes.CDLL(path)
            setter = next((getattr(lib, n) for n in _SETTERS if hasattr(lib, n)), None)
            getter = next((getattr(lib, n) for n in _GETTERS if hasattr(lib, n)), None)
            if setter is not None and getter is not None:
                getter.restype = ctypes.c_int
                _found.append((setter, getter))
    except (OSError, ValueError):
        _found = []
    return _found


@contextlib.contextmanager
def one_thread():
    """Within the block, the loaded OpenBLAS libraries use one thread."""
    global _depth
    import numpy  # noqa: F401 - make sure numpy's BLAS is loaded before looking
    import scipy.linalg  # noqa: F401 - and SciPy's
    libs = _libraries()
    with _lock:
        _depth += 1
        saved = [get() for _, get in libs] if _depth == 1 else None
        if _depth == 1:
            for setter, _ in libs:
                setter(1)
    try:
        yield
    finally:
        with _lock:
            _depth -= 1
            if _depth == 0 and saved is not None:
                for (setter, _), n in zip(libs, saved):
                    setter(max(int(n), 1))


def threads_for(n_parts):
    """The BLAS threading for work on a circuit of ``n_parts`` parts: one thread.

    A board's many tiny products lose to the thread hand-offs; a large
    network's few big ones are memory-bound and, on a machine shared with
    other work, lose far more to threads waiting for a core (module
    docstring).  ``n_parts`` is kept so that callers state the size.
    """
    if n_parts < 0:
        raise ValueError(f"n_parts: must be at least 0, got {n_parts}")
    return one_thread()
