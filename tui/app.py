"""The roomconv workbench: Measure, Analyze, Render and Room tabs, a one-line caution with
the full text a key away, a status line that keeps the last error, a help overlay, and the
session saved and opened as a study file. Start with ``roomconv tui [study.toml]`` or
``roomconv-tui [study.toml]``."""

from __future__ import annotations

import time
from pathlib import Path

from textual import on
from textual.app import App, ComposeResult
from textual.binding import Binding
from textual.containers import Horizontal, Vertical, VerticalScroll
from textual.screen import ModalScreen
from textual.theme import Theme
from textual.widgets import (
    Button,
    Checkbox,
    Footer,
    Input,
    Select,
    Static,
    TabbedContent,
    TabPane,
)
from textual.worker import WorkerState

from roomconv.jobs.naming import unused_name
from roomconv.safety import caution_text
from tui.screens.analyze import AnalyzePane
from tui.screens.measure import MeasurePane
from tui.screens.render import RenderPane
from tui.screens.room import RoomPane
from tui.widgets import reflow

#: Help text, kept under 62 columns a line so the overlay never wraps a sentence at 80×24.
HELP = """\
[b]Keys[/b]
  m Measure   a Analyze   r Render   o Room
  c  the full hearing and equipment caution
  s  save the session (Ctrl+S also works inside a field)
  ?  this help    x  stop running work    q  quit
  Tab, Shift+Tab  move between fields and buttons
  Enter           run the button that has the focus
  Esc             leave a field, so the letter keys work again

[b]Tabs[/b]
  Measure  sweep, sound card or simulated room, level check;
           each measurement becomes a position of the session.
  Analyze  ISO 3382 parameters per band, warnings, decays.
  Render   dry files through a response: wet/dry, pre-delay,
           level, format; a queue with a bar per file.
  Room     a rectangular room and its materials; synthesize.

[b]Safety[/b]
  No sound plays until the caution has been shown and ticked.
  Output is ramped, limited and capped at -1 dBFS.

[b]Files[/b]
  Nothing is replaced without asking. A taken position name
  gets a free one (P1-2) and the status line says so.
  The status line at the bottom keeps the last error."""

#: The caution in one line; ``c`` opens :func:`roomconv.safety.caution_text` in full.
CAUTION_LINE = "⚠ Sound can harm ears and speakers: volume low first. c: full caution"

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

#: Tick boxes never carried from one session to the next: the caution is confirmed afresh,
#: and replacing files is a decision made each time.
NOT_SAVED_SUFFIXES = ("-ack", "-replace")

#: Letter keys that would type into a field: off while a field has the focus.
LETTER_ACTIONS = ("tab", "quit", "help", "cancel", "caution", "save_session")


class HelpScreen(ModalScreen):
    BINDINGS = [Binding("escape,question_mark,q", "dismiss", "close")]

    def compose(self) -> ComposeResult:
        with VerticalScroll(id="help-box"):
            yield Static(HELP, id="help-text")


class CautionScreen(ModalScreen[bool]):
    """The full hearing and equipment caution; its button confirms it has been read."""

    BINDINGS = [Binding("escape", "dismiss(False)", "close")]

    def compose(self) -> ComposeResult:
        with Vertical(id="caution-box"):
            with VerticalScroll(id="caution-scroll"):
                yield Static(reflow(caution_text()), id="caution-text")
            with Horizontal(classes="line buttons"):
                yield Button("I have read it", id="caution-ok", variant="warning", compact=True)
                yield Button("Close", id="caution-close", compact=True)

    @on(Button.Pressed, "#caution-ok")
    def ok(self) -> None:
        self.dismiss(True)

    @on(Button.Pressed, "#caution-close")
    def close(self) -> None:
        self.dismiss(False)


class ReplaceScreen(ModalScreen[str]):
    """Ask before a file is replaced: "replace", "new" (a free name) or "cancel"."""

    BINDINGS = [Binding("escape", "dismiss('cancel')", "cancel")]

    def __init__(self, path: Path, free: Path):
        super().__init__()
        self.path, self.free = path, free

    def compose(self) -> ComposeResult:
        with Vertical(id="replace-box"):
            yield Static(f"{self.path} exists.\nReplace it with this session?", id="replace-text")
            with Horizontal(classes="line buttons"):
                yield Button("Replace", id="replace-yes", variant="warning", compact=True)
                yield Button(f"Save as {self.free.name}", id="replace-new", compact=True)
                yield Button("Cancel", id="replace-no", compact=True)

    @on(Button.Pressed)
    def chosen(self, event: Button.Pressed) -> None:
        answer = {"replace-yes": "replace", "replace-new": "new"}.get(event.button.id or "")
        self.dismiss(answer or "cancel")


class RoomconvApp(App):
    TITLE = "roomconv"
    SUB_TITLE = "room impulse responses"
    CSS_PATH = "app.tcss"
    BINDINGS = [
        Binding("m", "tab('measure')", "Measure"),
        Binding("a", "tab('analyze')", "Analyze"),
        Binding("r", "tab('render')", "Render"),
        Binding("o", "tab('room')", "Room"),
        Binding("c", "caution", "Caution"),
        Binding("s", "save_session", "Save"),
        Binding("ctrl+s", "save_anywhere", "Save", show=False),
        Binding("question_mark,f1", "help", "Help"),
        Binding("x", "cancel", "Stop"),
        Binding("escape", "leave_field", "Leave field", show=False),
        Binding("q", "quit", "Quit"),
    ]

    def __init__(self, study: str | Path | None = None):
        super().__init__()
        self.session: list[dict] = []
        self.study_path: Path | None = Path(study) if study is not None else None
        self.last_error: str | None = None
        self.register_theme(THEME)
        self.theme = THEME.name

    def compose(self) -> ComposeResult:
        with Horizontal(id="banner"):
            yield Static(CAUTION_LINE, id="caution-line")
            yield Checkbox("read", id="caution-ack", compact=True)
        with TabbedContent(initial="measure", id="tabs"):
            with TabPane("Measure", id="measure"):
                yield MeasurePane()
            with TabPane("Analyze", id="analyze"):
                yield AnalyzePane()
            with TabPane("Render", id="render"):
                yield RenderPane()
            with TabPane("Room", id="room"):
                yield RoomPane()
        yield Static("ready", id="status-line")
        yield Footer()

    def on_mount(self) -> None:
        # Scroll containers take the focus by default: an invisible stop where typed letters
        # would switch tabs. Scrolling still works with the mouse and from the fields inside.
        for node in self.query("#tabs VerticalScroll"):
            node.can_focus = False
        if self.study_path is not None:
            self.open_session(self.study_path)
        self.call_after_refresh(self.focus_pane, "measure")

    # --- status line ------------------------------------------------------------------
    def report(self, where: str, text: str, *, error: bool = False) -> None:
        """Show a message in the status line. An error stays on the line (after the newest
        message) until another error replaces it; it also appears as a notice."""
        stamp = time.strftime("%H:%M:%S")
        line = f"{where}: {text}"
        if error:
            self.last_error = f"{stamp} {line}"
            self.notify(text, title=where, severity="error", timeout=8)
        status = self.query_one("#status-line", Static)
        if error:
            status.update(f"[b $error]✖ {self.last_error}[/]")
        elif self.last_error:
            status.update(f"{line}  [$error]│ last error {self.last_error}[/]")
        else:
            status.update(line)

    def report_from_thread(self, where: str, text: str, *, error: bool = False) -> None:
        self.call_from_thread(lambda: self.report(where, text, error=error))

    def on_worker_state_changed(self, event) -> None:
        # The net under every worker started with exit_on_error=False: an error it did not
        # catch still reaches the status line instead of vanishing.
        if event.state == WorkerState.ERROR and event.worker.error is not None:
            err = event.worker.error
            self.report(event.worker.name or "work", f"{type(err).__name__}: {err}", error=True)

    def _handle_exception(self, error: Exception) -> None:
        # The last net, for workers started with the default exit_on_error=True: Textual
        # hands their failure here to end the app; the workbench shows it and goes on.
        # Any other exception still ends the app as Textual intends.
        from textual.worker import WorkerFailed

        if isinstance(error, WorkerFailed) and self.screen_stack:
            err = error.error
            self.report("Work", f"{type(err).__name__}: {err}", error=True)
            return
        super()._handle_exception(error)

    # --- caution ----------------------------------------------------------------------
    def caution_confirmed(self) -> bool:
        return self.query_one("#caution-ack", Checkbox).value

    def ask_caution(self, where: str) -> None:
        """Nothing may sound yet: show the full caution and say so."""
        self.report(where, "read the caution and confirm it before any sound; nothing was played")
        self.action_caution()

    def action_caution(self) -> None:
        def answered(ok: bool | None) -> None:
            if ok:
                self._caution_read = True
                self.query_one("#caution-ack", Checkbox).value = True
                self.report("Caution", "confirmed; keep the volume low and raise it gradually")

        self.push_screen(CautionScreen(), answered)

    _caution_read = False

    @on(Checkbox.Changed, "#caution-ack")
    def caution_ticked(self, event: Checkbox.Changed) -> None:
        if event.value and not self._caution_read:
            # The tick counts only once the full text has been on screen.
            event.checkbox.value = False
            self.action_caution()

    # --- keys and focus ---------------------------------------------------------------
    def check_action(self, action: str, parameters) -> bool | None:
        # Letter keys must type into fields, not switch tabs.
        if action in LETTER_ACTIONS and isinstance(self.focused, Input):
            return False
        if action == "leave_field":
            return isinstance(self.focused, Input)
        return True

    def action_tab(self, name: str) -> None:
        # Drop the focus first: a widget left focused in the tab being hidden would make the
        # tabs switch back to it. The new tab's widgets can take the focus once shown.
        self.set_focus(None)
        self.query_one("#tabs", TabbedContent).active = name
        self.call_after_refresh(self.focus_pane, name)

    def focus_pane(self, name: str, tries: int = 5) -> None:
        """Put the focus on the tab's main button, so the focus moves with the tab (a
        widget left focused in a hidden tab would pull the view back) and letters work.
        A tab still being laid out is tried again after the next refresh."""
        if not self.screen_stack or self.query_one("#tabs", TabbedContent).active != name:
            return
        pane = self.query_one(f"#{name}", TabPane)
        for selector in ("Button.-primary", "Button", "Select", "Input"):
            found = [w for w in pane.query(selector) if w.focusable]
            if found:
                found[0].focus()
                return
        if tries > 0:
            self.call_after_refresh(self.focus_pane, name, tries - 1)

    @on(TabbedContent.TabActivated)
    def tab_activated(self, event: TabbedContent.TabActivated) -> None:
        # A click on a tab label: move the focus as the keys do.
        if not self.screen_stack:
            return  # the app is closing
        focused = self.focused
        pane = event.pane
        if (
            focused is not None
            and pane is not None
            and pane not in focused.ancestors
            and event.tabbed_content.query_one("Tabs") is not focused
        ):
            self.call_after_refresh(self.focus_pane, pane.id or "measure")

    def action_leave_field(self) -> None:
        self.focus_pane(self.query_one("#tabs", TabbedContent).active or "measure")

    def action_help(self) -> None:
        self.push_screen(HelpScreen())

    def action_cancel(self) -> None:
        """Stop every running job: renders and measurements at their next progress step,
        other work when its current step returns."""
        running = [w for w in self.workers if w.is_running]
        for w in running:
            w.cancel()
        for pane in self.query(RenderPane):
            pane.cancel()
        self.report("Stop", f"stopping {len(running)} job(s)" if running else "nothing is running")

    def send_to(self, tab: str, path: str) -> None:
        """Hand a file to another tab (Room → Analyze / Render); the focus goes with it."""
        if tab == "analyze":
            box = self.query_one("#an-files", Input)
            box.value = (box.value + " " + path).strip()
        else:
            self.query_one("#rn-ir", Input).value = path
        self.action_tab(tab)
        self.report("Room", f"{path} sent to {tab}")

    # --- session ----------------------------------------------------------------------
    def field_values(self) -> dict:
        """Every field of every tab by its id, as the study file's [workbench] table."""
        values: dict = {}
        for w in self.query("#tabs Input, #tabs Select, #tabs Checkbox"):
            if not w.id or w.id.endswith(NOT_SAVED_SUFFIXES):
                continue
            if isinstance(w, Input):
                values[w.id] = w.value
            elif isinstance(w, Checkbox):
                values[w.id] = bool(w.value)
            elif isinstance(w, Select) and w.value is not Select.BLANK:
                values[w.id] = str(w.value)
        return values

    def set_fields(self, values: dict) -> list[str]:
        """Fill fields from a [workbench] table; returns the keys that fit no field."""
        unused = []
        for key, value in values.items():
            found = self.query(f"#{key}") if key.replace("-", "").isalnum() else None
            w = found.first() if found else None
            try:
                if isinstance(w, Input):
                    w.value = str(value)
                elif isinstance(w, Checkbox) and not key.endswith(NOT_SAVED_SUFFIXES):
                    w.value = bool(value)
                elif isinstance(w, Select):
                    w.value = value
                else:
                    unused.append(key)
            except Exception:  # noqa: BLE001 - a value a choice list no longer has
                unused.append(key)
        return unused

    def session_path(self) -> Path:
        if self.study_path is not None:
            return self.study_path
        return Path(self.query_one("#ms-folder", Input).value.strip() or ".") / "session.toml"

    def action_save_session(self) -> None:
        path = self.session_path()
        if not self.session:
            self.report("Save", "measure at least one position before saving the session")
            return
        if path.exists():

            def answered(choice: str | None) -> None:
                if choice in ("replace", "new"):
                    # The file is replaced only on the user's own answer "Replace".
                    replace = choice == "replace"
                    self.save_session(path if replace else unused_name(path), force=replace)
                else:
                    self.report("Save", f"not saved; {path} left as it was")

            self.push_screen(ReplaceScreen(path, unused_name(path)), answered)
        else:
            self.save_session(path)

    def action_save_anywhere(self) -> None:
        """Ctrl+S: the Save key, also from inside a field (where ``s`` is a letter)."""
        self.action_save_session()

    def save_session(self, path: Path, *, force: bool = False) -> None:
        from roomconv.jobs.study import save_workbench_session

        measure = self.query_one(MeasurePane)
        positions = [(p["name"], Path(p["file"]), p.get("quality_file")) for p in self.session]
        try:
            written = save_workbench_session(
                path,
                positions,
                title="Workbench session",
                notes=measure.notes(),
                room=measure.conditions(),
                sweep=measure.sweep_record(),
                workbench=self.field_values(),
                force=force,
            )
        except Exception as exc:  # noqa: BLE001 - nothing a save meets may end the session
            self.report("Save", str(exc), error=True)
            return
        self.study_path = written
        self.report("Save", f"session saved in {written} ({len(positions)} position(s))")

    def open_session(self, path: Path) -> None:
        """Load a study file: its positions into the session, its fields into the tabs."""
        from roomconv.jobs.study import check_study

        try:
            check = check_study(path)
        except Exception as exc:  # noqa: BLE001 - a bad file is reported, the app goes on
            self.study_path = None
            self.report("Open", f"{exc}; starting an empty session", error=True)
            return
        st = check.study
        measure = self.query_one(MeasurePane)
        measure.restore_settings(st)
        unused = self.set_fields(st.workbench)
        measure.restore_positions(st.responses)
        note = f"; {len(check.missing)} response file(s) missing" if check.missing else ""
        if unused:
            note += f"; fields not restored: {', '.join(unused[:4])}"
        self.report("Open", f"{path}: {len(st.responses)} position(s){note}")


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


USAGE = """\
usage: roomconv-tui [STUDY.toml]

The roomconv terminal workbench. With a study file, the session it holds (positions,
settings, notes) is opened; the Save key (s) writes the session back as a study file."""


def main(argv: list[str] | None = None) -> int:
    """Entry point of ``roomconv-tui`` (``argv`` None: the process's arguments) and of
    ``roomconv tui`` (``argv`` its arguments). Returns the exit code: 2 when the arguments
    or the terminal cannot be used."""
    import sys

    args = sys.argv[1:] if argv is None else argv
    if args and args[0] in ("-h", "--help"):
        print(USAGE)
        return 0
    if len(args) > 1 or (args and args[0].startswith("-")):
        print(
            f"roomconv-tui: error: unrecognized arguments: {' '.join(args)} (the workbench "
            "takes one study file at most)",
            file=sys.stderr,
        )
        return 2
    study = Path(args[0]) if args else None
    if study is not None and not study.is_file():
        print(
            f"roomconv-tui: error: study file {study}: not found; give an existing .toml file "
            "or none (the Save key writes one)",
            file=sys.stderr,
        )
        return 2
    if study is not None:
        from roomconv.errors import InputError
        from roomconv.jobs.study import check_study

        # A malformed study file is refused by name before anything else, with or without
        # a terminal, rather than opened as an empty session that hides the fault.
        try:
            check_study(study)
        except InputError as exc:
            print(f"roomconv-tui: error: {exc}", file=sys.stderr)
            return 2
    problem = terminal_problem()
    if problem:
        print(
            f"roomconv-tui: error: {problem}; the workbench needs an interactive terminal "
            "(use the roomconv sub-commands in scripts and pipes)",
            file=sys.stderr,
        )
        return 2
    from tui.screens.render import start_process_helpers

    # Before the app captures standard error (see start_process_helpers).
    start_process_helpers()
    RoomconvApp(study).run()
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
