"""One module per tab of the workbench."""

from __future__ import annotations

from typing import Protocol, cast

from textual.dom import DOMNode

from roomconv.errors import RoomconvError


class Workbench(Protocol):
    """What the panes use of the app they run in (``tui.app.RoomconvApp``) beyond ``App``:
    the session's positions, the tab hand-off, the status line (``report``; errors stay on
    it) and the hearing caution (no sound before ``caution_confirmed()``)."""

    session: list[dict]

    def send_to(self, tab: str, path: str) -> None: ...

    def report(self, where: str, text: str, *, error: bool = False) -> None: ...

    def report_from_thread(self, where: str, text: str, *, error: bool = False) -> None: ...

    def caution_confirmed(self) -> bool: ...

    def ask_caution(self, where: str) -> None: ...


def workbench(node: DOMNode) -> Workbench:
    """The app ``node`` runs in, as the workbench: its session and its tab hand-off.

    Textual types ``node.app`` as a plain ``App``; every pane runs inside ``RoomconvApp``."""
    return cast(Workbench, node.app)


def error_text(exc: BaseException | str) -> str:
    """What a failed job says in the status line: the message of a refusal (our own errors
    and the system's file errors already name the file), else the error's kind and text."""
    if isinstance(exc, str):
        return exc
    if isinstance(exc, RoomconvError | OSError):
        return str(exc)
    return f"{type(exc).__name__}: {exc}"
