"""What every command module shares: the argument parser, option converters that add the
option's name to a library refusal, the caution prompt, and output to the terminal."""

from __future__ import annotations

import argparse
import re
import sys
from pathlib import Path

from .. import safety
from ..errors import InputError

__all__ = [
    "Command",
    "Parser",
    "common_options",
    "opt",
    "budget",
    "device_spec",
    "out",
    "note",
    "confirm_caution",
    "settings_of",
]


class Command:
    """One sub-command: its name, one line of help, ``configure(parser)`` adding its options
    and ``run(args) -> exit code``. Each command module lists its own in ``COMMANDS``."""

    def __init__(self, name: str, help: str, configure, run):
        self.name, self.help, self.configure, self.run = name, help, configure, run


class Parser(argparse.ArgumentParser):
    """argparse with two changes: a value that starts with ``-`` and a digit, a point,
    ``inf`` or ``nan`` is a value (so ``--room -5x4x3`` reaches the check that refuses it),
    and an error is one line that points to ``--help``."""

    def __init__(self, *args, **kwargs):
        super().__init__(*args, **kwargs)
        # argparse only takes "-5" and "-.5" as values; "-5x4x3" or "-inf" would be read as
        # unknown options and the real problem never reported.
        self._negative_number_matcher = re.compile(r"^-(\d|\.\d|inf|nan)", re.IGNORECASE)

    def error(self, message):
        """Print ``message`` as one line that points to ``--help`` and exit with code 2."""
        self.exit(2, f"{self.prog}: error: {message} (see {self.prog} --help)\n")


def common_options(suppress: bool = False) -> Parser:
    """``--debug`` and ``--quiet``, before or after the sub-command."""
    # Sub-command parsers must not reset a --debug given before the sub-command, so there
    # the options have no default of their own.
    kw: dict = {"default": argparse.SUPPRESS} if suppress else {}
    # A parent parser only lends its options; it is a Parser because the sub-command
    # parsers it is given to are.
    p = Parser(add_help=False)
    p.add_argument("--debug", action="store_true", help="show tracebacks on errors", **kw)
    p.add_argument(
        "--quiet", action="store_true", help="no progress bars or reports on stdout", **kw
    )
    return p


def opt(check, *cargs, **ckw):
    """An argparse ``type=`` built from a :mod:`roomconv.validate` check; argparse puts the
    option's name in front of the check's message."""

    def conv(text):
        try:
            return check(text, *cargs, **ckw)
        except InputError as exc:
            raise argparse.ArgumentTypeError(str(exc)) from None

    conv.__name__ = getattr(check, "__name__", "value")
    return conv


def budget(option: str, check, *cargs, **ckw):
    """Run a library check or job; its refusal is given the option's name in front (the
    library's own messages never name options)."""
    try:
        return check(*cargs, **ckw)
    except InputError as exc:
        raise InputError(f"{option}: {exc}") from None


def device_spec(text: str) -> int | str:
    """``--device``: a number is PortAudio's device index, anything else part of its name
    (sounddevice would otherwise look for a device whose *name* contains "0")."""
    return int(text) if text.strip().isdigit() else text


def out(msg: str, args) -> None:
    """A result line on stdout, unless ``--quiet``."""
    if not getattr(args, "quiet", False):
        print(msg)


def note(msg: str) -> None:
    """A note or warning on stderr."""
    print(f"roomconv: {msg}", file=sys.stderr)


def confirm_caution(args):
    """A confirmation callable for the jobs that play sound: shows the hearing and equipment
    caution, then requires ``--yes`` or a typed 'yes' on a terminal."""

    def confirm() -> None:
        print(safety.caution_text(), file=sys.stderr)
        if args.yes:
            return
        if not sys.stdin.isatty():
            raise InputError(
                "sound would be played: read the caution above and pass --yes "
                "to confirm (no terminal to ask on)"
            )
        reply = input("Type 'yes' to play the signal: ").strip().lower()
        if reply != "yes":
            raise InputError("measurement cancelled: the caution was not confirmed")

    return confirm


def settings_of(args) -> dict:
    """The options of a run as plain values, for a provenance sidecar."""
    skip = {"func", "debug", "quiet", "force"}
    return {
        k: (str(v) if isinstance(v, Path) else v) for k, v in vars(args).items() if k not in skip
    }
