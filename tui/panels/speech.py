"""Speech panel: the talker and noise conditions for the STI, and the STI of an analysis.

The panel only gathers values and shows results; the conditions come from
:func:`roomconv.jobs.speech.speech_conditions` and the STI from the analysis job.
"""

from __future__ import annotations

import contextlib
from pathlib import Path

from rich.console import Group
from rich.table import Table
from rich.text import Text
from textual import on
from textual.app import ComposeResult
from textual.containers import Horizontal, Vertical
from textual.widgets import Button, Checkbox, Input, Label, Select, Static, Switch

from roomconv.analysis.sti import CAUTIONS as STI_CAUTIONS
from roomconv.analysis.sti import SpeechConditions
from roomconv.errors import InputError, RoomconvError
from roomconv.jobs.speech import parse_octave_levels, speech_conditions
from tui.panels._text import plain

__all__ = ["SpeechPanel"]

_OCTAVES = ("125", "250", "500", "1k", "2k", "4k", "8k")


def _number(text: str, what: str) -> float | None:
    """A typed number, None when the field is empty."""
    t = text.strip()
    if not t:
        return None
    try:
        return float(t)
    except ValueError:
        raise InputError(f"{what}: '{t}' is not a number") from None


def _fmt(v) -> str:
    return "—" if v is None else f"{v:.2f}"


class SpeechPanel(Vertical):
    """Speech level, background noise, voice and STIPA for the STI, and its results.

    ``conditions()`` gives the job layer's :class:`SpeechConditions` (None when the STI is
    off); ``show(document)`` displays the STI held in an analysis document.
    """

    #: The last results shown, as plain text.
    shown_text: str = ""
    #: The status line's text.
    status_text: str = ""

    DEFAULT_CSS = """
    SpeechPanel { height: auto; }
    SpeechPanel Horizontal { height: auto; }
    SpeechPanel Label { padding: 1 1 0 0; }
    SpeechPanel Input { width: 1fr; }
    SpeechPanel .sp-short { width: 12; }
    SpeechPanel Static { height: auto; }
    """

    def compose(self) -> ComposeResult:
        with Horizontal():
            yield Label("STI on")
            yield Switch(value=False, id="sp-on")
            yield Label("Voice")
            yield Select(
                [("male", "male"), ("female", "female")],
                value="male",
                allow_blank=False,
                id="sp-voice",
            )
            yield Checkbox("STIPA", id="sp-stipa")
        with Horizontal():
            yield Label("Speech dB(A)")
            yield Input(placeholder="60", id="sp-level", classes="sp-short")
            yield Label("Noise 125 Hz…8 kHz dB")
            yield Input(placeholder="45,40,35,30,27,25,22 (empty: none)", id="sp-noise")
        with Horizontal():
            yield Label("or noise file")
            yield Input(placeholder="noise.wav", id="sp-noise-file")
            yield Label("FS sine dB SPL")
            yield Input(placeholder="e.g. 120", id="sp-noise-cal", classes="sp-short")
            yield Button("Check", id="sp-check")
        yield Static("", id="sp-status")
        yield Static("", id="sp-result")
        yield Static("", id="sp-cautions")

    # -- input -----------------------------------------------------------------------------
    def set_status(self, text: str, error: bool = False) -> None:
        """One line inside the panel: what was understood, or what is wrong."""
        self.status_text = text
        self.query_one("#sp-status", Static).update(Text(text, style="bold red" if error else ""))

    def conditions(self) -> SpeechConditions | None:
        """The STI conditions from the fields, None when the STI is off.

        Raises
        ------
        InputError
            For any bad field; the message is shown in the panel's status line too.
        """
        if not self.query_one("#sp-on", Switch).value:
            return None
        try:
            cond = self._read()
        except RoomconvError as exc:
            self.set_status(str(exc), error=True)
            raise InputError(str(exc)) from None
        except (OSError, ValueError) as exc:  # a file the reader could not open, say
            msg = f"speech settings: {exc}"
            self.set_status(msg, error=True)
            raise InputError(msg) from None
        self.set_status(f"STI conditions: {cond.origin}")
        return cond

    def _read(self) -> SpeechConditions:
        level = _number(self.query_one("#sp-level", Input).value, "speech level")
        noise_text = self.query_one("#sp-noise", Input).value.strip()
        noise = parse_octave_levels(noise_text) if noise_text else None
        file_text = self.query_one("#sp-noise-file", Input).value.strip()
        cal = _number(self.query_one("#sp-noise-cal", Input).value, "noise calibration")
        voice = str(self.query_one("#sp-voice", Select).value)
        stipa = bool(self.query_one("#sp-stipa", Checkbox).value)
        return speech_conditions(
            speech_level_dba=level,
            noise_db=noise,
            noise_file=Path(file_text) if file_text else None,
            noise_calibration_db=cal,
            voice=voice,
            stipa=stipa,
        )

    @on(Button.Pressed, "#sp-check")
    def _check(self) -> None:
        if not self.query_one("#sp-on", Switch).value:
            self.set_status("STI is off: switch it on to add the STI to the next analysis")
            return
        with contextlib.suppress(InputError):  # already shown in the status line
            self.conditions()

    # -- results ---------------------------------------------------------------------------
    def show(self, document: dict | None) -> None:
        """Display the STI of an analysis document (per position, average, cautions)."""
        result = self.query_one("#sp-result", Static)
        cautions = self.query_one("#sp-cautions", Static)
        if not document or "sti" not in document.get("average", {}):
            self.shown_text = "This analysis has no STI: switch the STI on and analyse again."
            result.update(self.shown_text)
            cautions.update("")
            return
        table = Table(
            title="STI (" + document.get("settings", {}).get("sti", {}).get("origin", "") + ")",
            expand=False,
            pad_edge=False,
        )
        table.add_column("position")
        table.add_column("STI", justify="right")
        table.add_column("band")
        for f in _OCTAVES:
            table.add_column(f"MTI {f}", justify="right")
        lines: list[Text] = []
        for p in document.get("positions", []):
            s = p.get("sti")
            if s is None:
                continue
            name = f"{Path(str(p.get('file', '?'))).name} ch{p.get('channel', '?')}"
            table.add_row(
                name, _fmt(s.get("value")), s.get("band") or "—", *(_fmt(m) for m in s["mti"])
            )
            if s.get("value") is None and s.get("reason"):
                lines.append(Text(f"{name}: no STI ({s['reason']})", style="yellow"))
            for w in s.get("warnings", []):
                lines.append(Text(f"! {name}: {w}", style="yellow"))
        avg = document["average"]["sti"]
        if avg.get("value") is None:
            lines.append(Text(f"Average STI: not evaluable ({avg.get('reason')})", style="bold"))
        else:
            spread = (
                "" if avg.get("std") is None else f" ± {avg['std']:.2f}, lowest {avg['min']:.2f}"
            )
            lines.append(
                Text(
                    f"Average STI {avg['value']:.2f}{spread} over {avg['n']} position(s), "
                    f"band {avg['band']}",
                    style="bold",
                )
            )
        for w in avg.get("warnings", []):
            lines.append(Text(f"! {w}", style="yellow"))
        texts = document.get("cautions") or list(STI_CAUTIONS)
        caution_text = Text("\n".join(f"Caution: {c}" for c in texts), style="italic")
        result.update(Group(table, *lines))
        cautions.update(caution_text)
        self.shown_text = plain(table, *lines, caution_text)
