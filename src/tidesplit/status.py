"""The status of a series: ``ok``, ``ok`` with a note, or why it was left unsplit.

A status is text, as every front shows it: ``"ok"``; ``"ok; dropped period 168: ..."``
(split, with a note); or a reason (``"has 5 points; at least two periods (8) are
needed"``), in which case the series has no components. Test it with ``is_split``.
"""

from __future__ import annotations

from collections.abc import Sequence

import numpy as np

OK = "ok"


def is_split(status: str) -> bool:
    """Whether a series with this status was split (its components are there).

    >>> is_split("ok"), is_split("ok; dropped period 168: ..."), is_split("too short")
    (True, True, False)
    """
    return status == OK or status.startswith(OK + "; ")


def split_mask(statuses: Sequence[str]) -> np.ndarray:
    """``is_split`` of each status, as a boolean array.

    >>> split_mask(["ok", "every value is missing"]).tolist()
    [True, False]
    """
    if isinstance(statuses, list) and statuses.count(OK) == len(statuses):
        # every one plainly ok (the common case): no pass in Python
        return np.ones(len(statuses), dtype=bool)
    return np.fromiter((is_split(s) for s in statuses), dtype=bool, count=len(statuses))


def with_note(status: str, note: str) -> str:
    """A split series' status with a note added.

    >>> with_note(with_note("ok", "dropped period 7"), "adjusted is NULL at 1 point(s)")
    'ok; dropped period 7; adjusted is NULL at 1 point(s)'
    """
    return f"{status}; {note}"
