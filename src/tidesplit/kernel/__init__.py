"""The numeric core: numba-compiled STL and helpers on flat arrays, nothing else imported."""

from __future__ import annotations

import sys


def _skip_blas_probe() -> None:
    """Let numba's first use go without importing ``scipy.linalg`` (about 0.1 s).

    Loading any compiled function, even from the cache, makes numba import
    ``numba.np.arraymath``, whose import probes for BLAS by importing
    ``scipy.linalg.cython_blas`` only to set a flag (``_HAVE_BLAS``). We import that module
    first with the probe answering from ``find_spec`` (is scipy's linalg there?) instead,
    which sets the same flag where scipy is installed (a dependency of ours). Anything that
    really uses BLAS or LAPACK (``np.dot``, ``np.linalg``) still imports scipy through
    numba's own check when it is compiled. Where numba's layout differs from the one this
    expects, nothing is changed.
    """
    if "numba.np.arraymath" in sys.modules or "scipy.linalg" in sys.modules:
        return
    from importlib.util import find_spec

    try:
        if find_spec("scipy.linalg") is None:
            return
        from numba.np import linalg
    except (ImportError, ValueError):
        return
    probe = getattr(linalg, "ensure_blas", None)
    if probe is None:
        return
    linalg.ensure_blas = lambda: None
    try:
        import numba.np.arraymath as arraymath
    finally:
        linalg.ensure_blas = probe
    if getattr(arraymath, "ensure_blas", None) is not None:
        arraymath.ensure_blas = probe


_skip_blas_probe()
