"""Plain text of what a panel shows, for the status lines and the tests."""

from __future__ import annotations

import io

from rich.console import Console


def plain(*renderables, width: int = 100) -> str:
    """The renderables as plain text, ``width`` columns wide."""
    # The console only records: what it writes to its stream is dropped.
    console = Console(width=width, record=True, file=io.StringIO(), color_system=None)
    for r in renderables:
        console.print(r)
    return console.export_text()
