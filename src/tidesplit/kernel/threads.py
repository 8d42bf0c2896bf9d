"""Launching numba's parallel kernels safely from any thread.

numba's ``workqueue`` threading layer (its fallback where neither OpenMP nor TBB is
available) aborts the process when two threads launch parallel kernels at once. We learn
the layer on the first launch and, under ``workqueue`` only, run launches one at a time.
BLAS's own threads are held to one while a caller with threads of its own works.
"""

from __future__ import annotations

import threading
from collections.abc import Callable, Iterator
from contextlib import contextmanager, nullcontext
from typing import Any

import numba

_lock = threading.Lock()
_layer: str | None = None


def launch(kernel: Callable[..., Any], *args: Any) -> Any:
    """Run a ``parallel=True`` kernel, serialised only where the threading layer needs it."""
    global _layer
    if _layer is None:
        with _lock:
            result = kernel(*args)
            _layer = numba.threading_layer()
            return result
    if _layer == "workqueue":
        with _lock:
            return kernel(*args)
    return kernel(*args)


# BLAS (numpy's matrix products, used by the linear-map shortcut) starts threads of its own.
# Under DuckDB, whose threads already fill the cores, two calls each asking BLAS for every
# core halved the speed of a whole query in our measurements, so the callers that bring
# their own threads hold BLAS to one thread while they work. The limit is process-wide;
# a count of holders makes the first one set it and the last one restore it, and these two
# are often different DuckDB threads.
#
# threadpoolctl (3.8 and later) lets only one "controlling" thread change OpenBLAS's
# process-wide pool and silently ignores the others while that thread lives. DuckDB's
# threads live as long as the database, so a worker that set the limit would keep control:
# the restore from another worker would be dropped, and so would every later change by the
# user's own code. So after each change we hand control back (a no-op where this thread
# does not hold it, for instance inside the user's own ``threadpool_limits`` block).
_blas_lock = threading.Lock()
_blas_holders = 0
_blas_limit: Any = None
_blas_controller: Any = None


def _release_blas_control() -> None:
    try:
        from threadpoolctl import OpenBLASController
    except ImportError:  # pragma: no cover - a threadpoolctl without the class
        return
    release = getattr(OpenBLASController, "clear_controlling_thread", None)
    if release is not None:  # threadpoolctl before 3.8 has no controlling thread
        release()


@contextmanager
def single_threaded_blas() -> Iterator[None]:
    """Hold BLAS to one thread for the duration (re-entrant across threads)."""
    global _blas_holders, _blas_limit, _blas_controller
    with _blas_lock:
        if _blas_holders == 0:
            if _blas_controller is None:
                from threadpoolctl import ThreadpoolController

                _blas_controller = ThreadpoolController()
            _blas_limit = _blas_controller.limit(limits=1, user_api="blas")
            _release_blas_control()
        _blas_holders += 1
    try:
        yield
    finally:
        with _blas_lock:
            _blas_holders -= 1
            if _blas_holders == 0:
                _blas_limit.restore_original_limits()
                _release_blas_control()
                _blas_limit = None


def blas_for(parallel: bool) -> Any:
    """A context for matrix products: BLAS as it is when we parallelise ourselves, one BLAS
    thread when the caller brings its own threads."""
    return nullcontext() if parallel else single_threaded_blas()
