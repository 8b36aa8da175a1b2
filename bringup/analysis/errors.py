"""The one error of the measurement core."""

from __future__ import annotations

from bringup.errors import InputError

__all__ = ["AnalysisError"]


class AnalysisError(InputError):
    """The data cannot be measured: too few samples, one level only, no edge, no fit.

    ``str(err)`` is one line saying what is missing. Callers add where the data came from
    (the CLI prefixes the file name; the runner records it as the step's reason).
    """
