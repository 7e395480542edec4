"""One exception family whose messages a user can act on.

The CLI maps :class:`InputError` to exit code 2 and any other :class:`RoomconvError` to 1.
"""

from __future__ import annotations


class RoomconvError(Exception):
    """Base class: something went wrong that roomconv can explain in one line."""

    exit_code = 1


class InputError(RoomconvError):
    """The user's input (a file, a value, an option) cannot be used as given."""

    exit_code = 2


class OutputExistsError(InputError):
    """An output file exists already and ``--force`` was not given."""


class DeviceError(RoomconvError):
    """No sound card path: PortAudio missing, no device, or the device refused the stream."""

    exit_code = 2


def describe(path, problem: str, hint: str | None = None) -> str:
    """Build the standard message: ``<path>: <problem> (<what to do>)``."""
    msg = f"{path}: {problem}"
    if hint:
        msg += f" ({hint})"
    return msg
