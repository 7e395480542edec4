"""The ``tui`` command: start the terminal workbench, optionally on a study file."""

from __future__ import annotations

from .common import Command

__all__ = ["COMMANDS"]


def configure_tui(p):
    """Add the options of ``roomconv tui`` to its sub-parser ``p`` (an argparse parser)."""
    p.add_argument(
        "study",
        nargs="?",
        default=None,
        metavar="STUDY.toml",
        help="a study file to open as the session (written by the workbench's Save key or "
        "'roomconv study init')",
    )


def run_tui(a):
    """Run ``roomconv tui``: start the terminal workbench.

    Parameters
    ----------
    a : argparse.Namespace
        The parsed options of the command.

    Returns
    -------
    int
        The exit code: 0 on success (a refused input raises and exits with 2).
    """
    # Imported here: the workbench needs Textual, which the other commands do not load.
    from tui.app import main as tui_main

    return tui_main([a.study] if a.study else [])


COMMANDS = [Command("tui", "the terminal workbench (Textual)", configure_tui, run_tui)]
