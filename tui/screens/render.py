"""Render tab: dry files and an IR, wet/dry, pre-delay, gain and normalization; render to
files as a queue with a bar per job and overall; preview through the sound card."""

from __future__ import annotations

import shlex
import threading
from pathlib import Path

from textual import on, work
from textual.app import ComposeResult
from textual.containers import Horizontal, VerticalScroll
from textual.widgets import Button, Checkbox, Input, Label, ProgressBar, Select, Static

from roomconv.errors import InputError, RoomconvError
from roomconv.jobs.progress import Cancelled
from roomconv.safety import caution_text


class RenderPane(VerticalScroll):
    def compose(self) -> ComposeResult:
        with Horizontal(classes="row"):
            yield Label("Dry files")
            yield Input(placeholder="take1.wav take2.wav …", id="rn-dry")
        with Horizontal(classes="row"):
            yield Label("IR")
            yield Input(placeholder="hall.wav", id="rn-ir")
            yield Label("Output folder")
            yield Input("rendered", id="rn-out")
        with Horizontal(classes="row"):
            yield Label("Wet/dry")
            yield Input("1.0", id="rn-mix", classes="narrow")
            yield Label("Pre-delay ms")
            yield Input("0", id="rn-predelay", classes="narrow")
            yield Label("Gain dB")
            yield Input("0", id="rn-gain", classes="narrow")
        with Horizontal(classes="row"):
            yield Label("Normalize")
            yield Select(
                [(n, n) for n in ("none", "peak", "truepeak", "loudness")],
                value="none",
                allow_blank=False,
                id="rn-normalize",
            )
        with Horizontal(classes="row"):
            yield Button("Render queue", id="rn-run", variant="primary")
            yield Button("Cancel", id="rn-cancel")
            yield Button("Preview 10 s", id="rn-preview")
            yield Checkbox("I have read the caution below", id="rn-ack")
            yield Checkbox("Replace existing files", id="rn-replace")
        yield Static("job", id="rn-job-label", classes="status")
        yield ProgressBar(total=1.0, show_eta=False, id="rn-job")
        yield Static("overall", classes="status")
        yield ProgressBar(total=1.0, show_eta=False, id="rn-all")
        yield Static("", id="rn-status", classes="status")
        yield Static(caution_text(), classes="caution")

    cancel_event: threading.Event | None = None

    def number(self, selector: str, label: str) -> float:
        """A field's number, or a refusal naming the field."""
        text = self.query_one(selector, Input).value.strip()
        try:
            return float(text)
        except ValueError:
            raise InputError(f"{label}: '{text}' is not a number") from None

    def settings(self):
        from roomconv.render.offline import RenderSettings

        return RenderSettings(
            mix=self.number("#rn-mix", "Wet/dry"),
            predelay_ms=self.number("#rn-predelay", "Pre-delay ms"),
            gain_db=self.number("#rn-gain", "Gain dB"),
            normalize=str(self.query_one("#rn-normalize", Select).value),
            match_ir_level=True,
        ).check()

    @on(Button.Pressed, "#rn-run")
    def run_pressed(self) -> None:
        self.cancel_event = threading.Event()
        self.render_queue(self.cancel_event)

    @on(Button.Pressed, "#rn-cancel")
    def cancel(self) -> None:
        if self.cancel_event is not None:
            self.cancel_event.set()

    @work(thread=True, exclusive=True, group="render")
    def render_queue(self, cancel: threading.Event) -> None:
        from roomconv.jobs.render import render_many

        app = self.app
        job_bar = self.query_one("#rn-job", ProgressBar)
        all_bar = self.query_one("#rn-all", ProgressBar)
        status = self.query_one("#rn-status", Static)
        label = self.query_one("#rn-job-label", Static)
        try:
            s = self.settings()
            drys = [Path(p) for p in shlex.split(self.query_one("#rn-dry", Input).value)]
            ir = Path(self.query_one("#rn-ir", Input).value)
            if not drys:
                raise InputError("Dry files: type one or more dry files first")
            folder = Path(self.query_one("#rn-out", Input).value)
        except RoomconvError as exc:
            app.call_from_thread(app.notify, str(exc), severity="error", title="Render")
            return

        def progress(stage: str, frac: float, message: str | None = None) -> None:
            if cancel.is_set():
                raise Cancelled()
            k = int(stage.split("/", 1)[0]) - 1
            app.call_from_thread(label.update, f"job {stage}")
            app.call_from_thread(job_bar.update, progress=frac)
            app.call_from_thread(all_bar.update, progress=(k + frac) / len(drys))
            if message:
                app.call_from_thread(app.notify, message, severity="error", title="Render")

        try:
            res = render_many(
                drys,
                ir,
                folder,
                s,
                progress=progress,
                force=self.query_one("#rn-replace", Checkbox).value,
            )
        except RoomconvError as exc:
            app.call_from_thread(app.notify, str(exc), severity="error", title="Render")
            return
        for rep in res.reports:
            for w in rep.warnings:
                app.call_from_thread(app.notify, w, severity="warning", title=rep.output.name)
        if res.cancelled:
            app.call_from_thread(status.update, f"cancelled after {len(res.reports)} file(s)")
            return
        app.call_from_thread(all_bar.update, progress=1.0)
        msg = f"rendered {len(res.reports)} of {len(drys)} into {folder}"
        if res.failed:
            msg += f"; {len(res.failed)} failed"
        app.call_from_thread(status.update, msg)

    @on(Button.Pressed, "#rn-preview")
    def preview_pressed(self) -> None:
        if not self.query_one("#rn-ack", Checkbox).value:
            self.app.notify(
                "read the caution and tick the box before any sound is played",
                severity="warning",
                title="Preview",
            )
            return
        self.preview()

    @work(thread=True, exclusive=True, group="preview")
    def preview(self) -> None:
        from roomconv.jobs.render import preview

        app = self.app
        try:
            drys = shlex.split(self.query_one("#rn-dry", Input).value)
            if not drys:
                raise InputError("Dry files: type a dry file to preview")
            preview(
                drys[0],
                self.query_one("#rn-ir", Input).value,
                self.settings(),
                confirm=self.confirm,
            )
        except RoomconvError as exc:
            app.call_from_thread(app.notify, str(exc), severity="error", title="Preview")

    def confirm(self) -> None:
        if not self.query_one("#rn-ack", Checkbox).value:
            raise InputError("read the caution and tick the box before any sound is played")
