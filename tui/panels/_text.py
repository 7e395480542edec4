"""Plain text of what a panel shows, for the status lines and the tests."""

from __future__ import annotations

from rich.console import Console


def plain(*renderables, width: int = 100) -> str:
    """The renderables as plain text, ``width`` columns wide."""
    console = Console(width=width, record=True, file=_Null(), color_system=None)
    for r in renderables:
        console.print(r)
    return console.export_text()


class _Null:
    """A stream that drops what it is given (the console only records)."""

    def write(self, _text: str) -> int:
        return 0

    def flush(self) -> None:
        pass
