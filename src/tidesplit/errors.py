"""The two errors every front raises: a bad argument, and a series that cannot be split."""

from __future__ import annotations


class ParamError(ValueError):
    """An argument that no series could be split with; the message names the argument."""


class SplitError(ValueError):
    """A series that cannot be split; the message names the series and the reason."""
