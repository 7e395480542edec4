"""The ``tui`` command: start the terminal workbench."""

from __future__ import annotations

from .common import Command

__all__ = ["COMMANDS"]


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

    return tui_main([])


COMMANDS = [Command("tui", "the terminal workbench (Textual)", lambda p: None, run_tui)]
