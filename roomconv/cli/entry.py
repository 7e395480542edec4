"""The program's entry point: the parser built from an explicit list of command groups, the
stop signals, and the translation of errors into one line and an exit code."""

from __future__ import annotations

import argparse
import sys
import traceback

from .. import __version__
from ..errors import OutputExistsError, RoomconvError
from . import (
    analysis,
    calibrate,
    demo,
    export,
    measure,
    office,
    plan,
    render,
    study,
    synth,
    workbench,
)
from .common import Parser, common_options

__all__ = ["build_parser", "command_groups", "main", "Interrupted"]


def command_groups() -> list:
    """Every command, in the order ``--help`` lists them (registered here, not on import)."""
    return [
        *measure.COMMANDS,
        *analysis.COMMANDS,
        *plan.COMMANDS,
        *office.COMMANDS,
        *export.COMMANDS,
        *calibrate.COMMANDS,
        *synth.COMMANDS,
        *render.COMMANDS,
        *study.COMMANDS,
        *demo.COMMANDS,
        *workbench.COMMANDS,
    ]


def build_parser() -> argparse.ArgumentParser:
    """The ``roomconv`` parser: the common options and one sub-parser per command of every
    group in :func:`command_groups`.

    Returns
    -------
    argparse.ArgumentParser

    Examples
    --------
    >>> build_parser().parse_args(["sweep", "s.wav"]).command
    'sweep'
    """
    parser = Parser(
        prog="roomconv",
        parents=[common_options()],
        description="Measure, analyse, synthesize and render through room impulse responses.",
    )
    parser.add_argument("--version", action="version", version=f"roomconv {__version__}")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND")
    for cmd in command_groups():
        p = sub.add_parser(
            cmd.name, help=cmd.help, description=cmd.help, parents=[common_options(True)]
        )
        cmd.configure(p)
        p.set_defaults(func=cmd.run)
    return parser


class Interrupted(KeyboardInterrupt):
    """SIGTERM or SIGHUP, raised where the program is so that clean-up code runs as on
    Ctrl-C."""

    def __init__(self, signum: int):
        super().__init__(signum)
        self.signum = signum


_STOP_SIGNALS = ("SIGINT", "SIGTERM", "SIGHUP")


def _ignore_stop_signals() -> None:
    import signal

    for name in _STOP_SIGNALS:
        sig = getattr(signal, name, None)
        if sig is not None:
            signal.signal(sig, signal.SIG_IGN)


def _raise_interrupted(signum, _frame):
    # One interrupt is enough: a second one must not cut the clean-up short.
    _ignore_stop_signals()
    raise Interrupted(signum)


def _install_signal_handlers() -> dict:
    """Ctrl-C, SIGTERM and SIGHUP end a run the same way: temporary files removed, exit
    128+n."""
    import signal
    import threading

    if threading.current_thread() is not threading.main_thread():
        return {}
    old = {}
    for name in _STOP_SIGNALS:
        sig = getattr(signal, name, None)
        if sig is not None:
            old[sig] = signal.signal(sig, _raise_interrupted)
    return old


def _restore_signal_handlers(old: dict) -> None:
    import signal

    for sig, handler in old.items():
        signal.signal(sig, handler)


def main(argv: list[str] | None = None) -> int:
    """Run the command line: parse ``argv``, run the command, turn errors into exit codes.

    Parameters
    ----------
    argv : list of str, optional
        The arguments after the program's name (default: ``sys.argv[1:]``).

    Returns
    -------
    int
        0 on success, 2 for a refused input or option (one line naming it), 1 for any
        other failure; a failed command removes the files it created.

    Examples
    --------
    >>> main(["--version"])  # doctest: +ELLIPSIS
    roomconv ...
    0
    """
    parser = build_parser()
    try:
        args = parser.parse_args(argv)
    except SystemExit as exc:  # --help, --version or a refused option: already printed
        return exc.code if isinstance(exc.code, int) else 2
    if not getattr(args, "func", None):
        parser.print_help()
        return 2
    from .. import audio

    audio.reset_run_state()
    # The terminal workbench keeps its own key and signal handling.
    old = _install_signal_handlers() if args.command != "tui" else {}
    try:
        return _run(args)
    finally:
        # After a failure this removes what the run left unfinished; after success there
        # is nothing of that kind, and only folders created but left empty go. A signal
        # now would only interrupt the clean-up.
        if old:
            _ignore_stop_signals()
        audio.end_run()
        _restore_signal_handlers(old)


def _roll_back() -> None:
    """A command that fails half-way leaves none of its own files: what it wrote new goes."""
    from .. import audio

    audio.end_run(failed=True)


def _run(args) -> int:
    import signal

    try:
        return int(args.func(args) or 0)
    except RoomconvError as exc:
        if args.debug:
            traceback.print_exc()
        _roll_back()
        # The library says what exists; replacing it is this front end's option.
        hint = "; pass --force to replace it" if isinstance(exc, OutputExistsError) else ""
        print(f"roomconv: error: {exc}{hint}", file=sys.stderr)
        return exc.exit_code
    except KeyboardInterrupt as exc:
        signum = getattr(exc, "signum", signal.SIGINT)
        from .. import audio

        audio.end_run()
        print(
            f"roomconv: interrupted by {signal.Signals(signum).name}; unfinished files "
            "removed, finished outputs kept",
            file=sys.stderr,
        )
        return 128 + int(signum)
    except Exception as exc:  # noqa: BLE001 - the last line of defence for users
        if args.debug:
            traceback.print_exc()
        _roll_back()
        print(
            f"roomconv: internal error: {type(exc).__name__}: {exc} "
            "(run again with --debug for details and report it)",
            file=sys.stderr,
        )
        return 1
