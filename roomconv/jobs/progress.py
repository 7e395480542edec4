"""The one progress protocol every job reports through, and a callback that ignores it.

A front end passes any callable ``progress(stage, fraction, message)``: the CLI draws it with
``rich``, the TUI moves its bars, the demo counts its steps, tests record the calls.
"""

from __future__ import annotations

from collections.abc import Callable

__all__ = ["ProgressCallback", "silent", "Cancelled"]


#: ``progress(stage, fraction, message)``: ``stage`` says what runs now in a few plain words
#: (``"render"``, ``"extract"``, a file name), ``fraction`` the part of it done (0 to 1),
#: ``message`` a note for the person watching (a warning, a refusal) or None. A callback may
#: raise :class:`Cancelled` to stop the job; the job then removes what it had started writing.
ProgressCallback = Callable[[str, float, "str | None"], None]


def silent(stage: str, fraction: float, message: str | None = None) -> None:
    """A progress callback that shows nothing.

    Examples
    --------
    >>> silent("render", 0.5) is None
    True
    """
    return None


class Cancelled(Exception):
    """Raised by a progress callback to stop the job it reports on.

    Examples
    --------
    >>> def stop_at_half(stage, fraction, message):
    ...     if fraction >= 0.5:
    ...         raise Cancelled(stage)
    >>> stop_at_half("render", 0.6, None)
    Traceback (most recent call last):
    ...
    roomconv.jobs.progress.Cancelled: render
    """
