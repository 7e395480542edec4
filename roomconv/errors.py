"""One exception family whose messages a user can act on.

The CLI maps :class:`InputError` to exit code 2 and any other :class:`RoomconvError` to 1.
:class:`InputError` is also a :class:`ValueError`, so code using the library can catch the
built-in type without knowing this module.
"""

from __future__ import annotations

from os import PathLike

__all__ = ["RoomconvError", "InputError", "OutputExistsError", "DeviceError", "describe"]


class RoomconvError(Exception):
    """Base class: something went wrong that roomconv can explain in one line.

    Attributes
    ----------
    exit_code : int
        The process exit code the command line returns for this error (1).

    Examples
    --------
    >>> RoomconvError("the worker pool stopped").exit_code
    1
    """

    exit_code = 1


class InputError(RoomconvError, ValueError):
    """The user's input (a file, a value, an option) cannot be used as given.

    A :class:`ValueError` as well, so ``except ValueError`` in library code catches it.

    Attributes
    ----------
    exit_code : int
        2, the conventional exit code for a usage error.

    Examples
    --------
    >>> try:
    ...     raise InputError("rate -1 Hz must be positive")
    ... except ValueError as exc:
    ...     print(exc, exc.exit_code)
    rate -1 Hz must be positive 2
    """

    exit_code = 2


class OutputExistsError(InputError):
    """An output file exists already and overwriting was not asked for.

    Examples
    --------
    >>> isinstance(OutputExistsError("out.wav exists"), InputError)
    True
    """


class DeviceError(RoomconvError):
    """No sound card path: PortAudio missing, no device, or the device refused the stream.

    Examples
    --------
    >>> DeviceError("no output device").exit_code
    2
    """

    exit_code = 2


def describe(path: str | PathLike[str], problem: str, hint: str | None = None) -> str:
    """Build the standard message: ``<path>: <problem> (<what to do>)``.

    Parameters
    ----------
    path : str or path-like
        The file (or option) the message is about.
    problem : str
        What is wrong with it.
    hint : str, optional
        What to do about it.

    Returns
    -------
    str
        One line.

    Examples
    --------
    >>> describe("room.toml", "not found", "check the path")
    'room.toml: not found (check the path)'
    """
    msg = f"{path}: {problem}"
    if hint:
        msg += f" ({hint})"
    return msg
