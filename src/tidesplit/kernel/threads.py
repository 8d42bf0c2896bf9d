"""Launching numba's parallel kernels safely from any thread.

numba's ``workqueue`` threading layer (its fallback where neither OpenMP nor TBB is
available) aborts the process when two threads launch parallel kernels at once. We learn
the layer on the first launch and, under ``workqueue`` only, run launches one at a time.
"""

from __future__ import annotations

import threading
from collections.abc import Callable
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
