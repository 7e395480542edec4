"""The roomconv workbench: Measure, Analyze, Render and Room tabs, a help overlay, and
notices for errors. Start with ``roomconv tui`` or ``roomconv-tui``."""

from __future__ import annotations

from textual.app import App, ComposeResult
from textual.binding import Binding
from textual.containers import Vertical
from textual.screen import ModalScreen
from textual.theme import Theme
from textual.widgets import Footer, Header, Input, Static, TabbedContent, TabPane

from tui.screens.analyze import AnalyzePane
from tui.screens.measure import MeasurePane
from tui.screens.render import RenderPane
from tui.screens.room import RoomPane

HELP = """\
Keys
  m  Measure      a  Analyze      r  Render      o  Room
  ?  this help    q  quit         x  cancel running work
  Tab / Shift+Tab  move between fields; Enter on a button runs it.
  Long work runs in the background; x (or Render's Cancel) stops it.
  Errors appear as notices in the corner.

Tabs
  Measure  sweep settings, caution, level check, measure or import a recording;
           each result becomes a position of the session.
  Analyze  ISO 3382 parameters per band, warnings, decay curves, averages, export.
  Render   dry files through an IR: wet/dry, pre-delay, gain, normalization, queue.
  Room     a shoebox room and its materials; predicted T as you type; synthesize."""


#: The workbench's own colours: a deep blue-grey ground, a sea-green primary, a brass accent.
#: Registered under this name and set in ``RoomconvApp.__init__``; every style uses its
#: variables ($primary, $accent, $warning, …), so the whole app follows it.
THEME = Theme(
    name="roomconv-harbour",
    primary="#3A9E8F",
    secondary="#6C8EAD",
    accent="#C9A04E",
    warning="#E08A3C",
    error="#D9534F",
    success="#6DB36D",
    foreground="#DCE3E8",
    background="#141A20",
    surface="#1B232B",
    panel="#24303A",
    dark=True,
)


class HelpScreen(ModalScreen):
    BINDINGS = [Binding("escape,question_mark,q", "dismiss", "close")]

    def compose(self) -> ComposeResult:
        with Vertical(id="help-box"):
            yield Static(HELP)


class RoomconvApp(App):
    TITLE = "roomconv"
    SUB_TITLE = "room impulse responses"
    CSS_PATH = "app.tcss"
    BINDINGS = [
        Binding("m", "tab('measure')", "Measure"),
        Binding("a", "tab('analyze')", "Analyze"),
        Binding("r", "tab('render')", "Render"),
        Binding("o", "tab('room')", "Room"),
        Binding("question_mark,f1", "help", "Help"),
        Binding("x", "cancel", "Cancel work"),
        Binding("q", "quit", "Quit"),
    ]

    def __init__(self):
        super().__init__()
        self.session: list[dict] = []
        self.register_theme(THEME)
        self.theme = THEME.name

    def compose(self) -> ComposeResult:
        yield Header()
        with TabbedContent(initial="measure", id="tabs"):
            with TabPane("Measure", id="measure"):
                yield MeasurePane()
            with TabPane("Analyze", id="analyze"):
                yield AnalyzePane()
            with TabPane("Render", id="render"):
                yield RenderPane()
            with TabPane("Room", id="room"):
                yield RoomPane()
        yield Footer()

    def check_action(self, action: str, parameters) -> bool | None:
        # Single-letter keys must type into inputs, not switch tabs.
        return not (action in ("tab", "quit", "help", "cancel") and isinstance(self.focused, Input))

    def action_tab(self, name: str) -> None:
        self.query_one("#tabs", TabbedContent).active = name

    def action_help(self) -> None:
        self.push_screen(HelpScreen())

    def action_cancel(self) -> None:
        """Cancel every running job: renders stop at the next block, other work is dropped
        when its current step returns."""
        running = [w for w in self.workers if w.is_running]
        for w in running:
            w.cancel()
        render = self.query(RenderPane)
        for pane in render:
            pane.cancel()
        self.notify(f"cancelled {len(running)} running job(s)" if running else "nothing is running")

    def send_to(self, tab: str, path: str) -> None:
        """Hand a file to another tab (Room → Analyze / Render)."""
        if tab == "analyze":
            box = self.query_one("#an-files", Input)
            box.value = (box.value + " " + path).strip()
        else:
            self.query_one("#rn-ir", Input).value = path
        self.action_tab(tab)
        self.notify(f"{path} sent to {tab}")


def terminal_problem(stdin=None, stdout=None, env=None) -> str | None:
    """Why the workbench cannot run here, or None. Without an interactive terminal Textual
    would wait for input that never comes."""
    import os
    import sys

    stdin = sys.stdin if stdin is None else stdin
    stdout = sys.stdout if stdout is None else stdout
    env = os.environ if env is None else env

    def tty(stream):
        try:
            return stream is not None and stream.isatty()
        except (AttributeError, ValueError):
            return False

    if not tty(stdin):
        return "standard input is not a terminal"
    if not tty(stdout):
        return "standard output is not a terminal"
    if env.get("TERM", "") in ("", "dumb", "unknown"):
        return f"the terminal type TERM={env.get('TERM', '')!r} cannot draw the workbench"
    return None


def main(argv: list[str] | None = None) -> int:
    """Entry point of ``roomconv-tui`` (``argv`` None: the process's arguments) and of
    ``roomconv tui`` (``argv`` []). Returns the exit code: 2 when no terminal can be used."""
    import sys

    args = sys.argv[1:] if argv is None else argv
    if args and args[0] in ("-h", "--help"):
        print("usage: roomconv-tui\n\nThe roomconv terminal workbench (no options).")
        return 0
    if args:
        print(
            f"roomconv-tui: error: unrecognized arguments: {' '.join(args)} (the workbench "
            "takes no options)",
            file=sys.stderr,
        )
        return 2
    problem = terminal_problem()
    if problem:
        print(
            f"roomconv-tui: error: {problem}; the workbench needs an interactive terminal "
            "(use the roomconv sub-commands in scripts and pipes)",
            file=sys.stderr,
        )
        return 2
    RoomconvApp().run()
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
