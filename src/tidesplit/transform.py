"""Log and Box-Cox transforms, their inverses, and Guerrero's automatic lambda.

Box-Cox: ``(y ** lam - 1) / lam``, and ``log(y)`` at ``lam == 0`` (Box & Cox 1964). We use
scipy's ufuncs for the formula and its inverse rather than writing them again (imported on
first use: scipy.special costs a third of a second to import, and most splits need none).
"""

from __future__ import annotations

import numpy as np

from .kernel.guerrero import LOWER, UPPER, guerrero_batch

DEFAULT_BOUNDS = (LOWER, UPPER)


def forward(values: np.ndarray, lambdas: np.ndarray) -> np.ndarray:
    """Box-Cox of each value with its own lambda (NaN stays NaN; lambda 0 is the log).

    >>> forward(np.array([1.0, np.e]), np.array([0.0, 0.0])).round(6).tolist()
    [0.0, 1.0]
    """
    from scipy.special import boxcox

    return boxcox(values, lambdas)


def inverse(values: np.ndarray, lambdas: np.ndarray) -> np.ndarray:
    """Back from the Box-Cox scale.

    >>> lams = np.array([0.5, 0.5])
    >>> inverse(forward(np.array([2.0, 5.0]), lams), lams).round(12).tolist()
    [2.0, 5.0]
    """
    from scipy.special import inv_boxcox

    return inv_boxcox(values, lambdas)


def guerrero_lambda(
    values: np.ndarray, period: int, bounds: tuple[float, float] = DEFAULT_BOUNDS
) -> float:
    """Guerrero's (1993) lambda within ``bounds`` (default [0, 1], from the log to no
    transform) for one positive series; NaN if it cannot be chosen.

    >>> y = np.exp(np.linspace(0, 3, 48)) * (1.2 + np.sin(np.arange(48) * np.pi / 6)) * 10
    >>> 0.0 <= guerrero_lambda(y, 12) <= 1.0
    True
    """
    y = np.ascontiguousarray(values, dtype=np.float64)
    out = np.empty(1)
    guerrero_batch(
        y,
        np.array([0, y.size], dtype=np.int64),
        np.array([period], dtype=np.int64),
        np.ones(1, dtype=np.bool_),
        np.array([bounds], dtype=np.float64),
        out,
    )
    return float(out[0])


def guerrero_lambdas(
    values: np.ndarray,
    offsets: np.ndarray,
    periods: np.ndarray,
    active: np.ndarray,
    bounds: np.ndarray | None = None,
) -> np.ndarray:
    """Guerrero's lambda for every active series of a batch (NaN for the others), each
    searched within its row of ``bounds`` (series x 2; default [0, 1] for all)."""
    out = np.empty(offsets.size - 1)
    if bounds is None:
        bounds = np.tile(np.array(DEFAULT_BOUNDS), (offsets.size - 1, 1))
    guerrero_batch(values, offsets, periods, active, np.ascontiguousarray(bounds), out)
    return out


def bound_notes(lambdas: np.ndarray, bounds: np.ndarray) -> list[str | None]:
    """Per series, a note when its chosen lambda sits on a bound of its search interval
    (the criterion would go further that way), else None.

    >>> bound_notes(np.array([0.0, 0.4]), np.array([[0.0, 1.0], [0.0, 1.0]]))
    ['Box-Cox lambda at the bound 0 of [0, 1]', None]
    """
    notes: list[str | None] = []
    for lam, (lower, upper) in zip(lambdas, bounds, strict=True):
        if lam in (lower, upper):
            notes.append(f"Box-Cox lambda at the bound {lam:g} of [{lower:g}, {upper:g}]")
        else:
            notes.append(None)
    return notes
