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
from roomconv.safety import caution_text


class Cancelled(Exception):
    pass


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
            yield Select([(n, n) for n in ("none", "peak", "truepeak", "loudness")],
                         value="none", allow_blank=False, id="rn-normalize")
        with Horizontal(classes="row"):
            yield Button("Render queue", id="rn-run", variant="primary")
            yield Button("Cancel", id="rn-cancel")
            yield Button("Preview 10 s", id="rn-preview")
            yield Checkbox("I have read the caution below", id="rn-ack")
        yield Static("job", id="rn-job-label", classes="status")
        yield ProgressBar(total=1.0, show_eta=False, id="rn-job")
        yield Static("overall", classes="status")
        yield ProgressBar(total=1.0, show_eta=False, id="rn-all")
        yield Static("", id="rn-status", classes="status")
        yield Static(caution_text(), classes="caution")

    cancel_event: threading.Event | None = None

    def settings(self):
        from roomconv.render.offline import RenderSettings
        try:
            return RenderSettings(mix=float(self.query_one("#rn-mix", Input).value),
                                  predelay_ms=float(self.query_one("#rn-predelay", Input).value),
                                  gain_db=float(self.query_one("#rn-gain", Input).value),
                                  normalize=self.query_one("#rn-normalize", Select).value,
                                  match_ir_level=True).check()
        except InputError:
            raise  # the library's own refusal says what is wrong already
        except ValueError as exc:
            raise RoomconvError(f"wet/dry, pre-delay and gain must be numbers ({exc})") from None

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
        from roomconv.audio import write_provenance
        from roomconv.render.offline import render_file
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
                raise RoomconvError("type one or more dry files first")
            folder = Path(self.query_one("#rn-out", Input).value)
            folder.mkdir(parents=True, exist_ok=True)
        except (RoomconvError, OSError) as exc:
            app.call_from_thread(app.notify, str(exc), severity="error", title="Render")
            return
        done, failed = 0, []
        for k, dry in enumerate(drys):
            out = folder / f"{dry.stem}__{ir.stem}.wav"
            app.call_from_thread(label.update, f"job {k + 1}/{len(drys)}: {out.name}")

            def tick(frac, k=k):
                if cancel.is_set():
                    raise Cancelled()
                app.call_from_thread(job_bar.update, progress=frac)
                app.call_from_thread(all_bar.update, progress=(k + frac) / len(drys))
            try:
                rep = render_file(dry, ir, out, s, force=True, progress=tick)
                write_provenance(out, [dry, ir], s.as_dict(), force=True)
                done += 1
                for w in rep.warnings:
                    app.call_from_thread(app.notify, w, severity="warning", title=out.name)
            except Cancelled:
                app.call_from_thread(status.update, f"cancelled after {done} file(s)")
                return
            except RoomconvError as exc:
                failed.append(f"{dry.name}: {exc}")
                app.call_from_thread(app.notify, str(exc), severity="error", title=dry.name)
        app.call_from_thread(all_bar.update, progress=1.0)
        msg = f"rendered {done} of {len(drys)} into {folder}"
        if failed:
            msg += f"; {len(failed)} failed"
        app.call_from_thread(status.update, msg)

    @on(Button.Pressed, "#rn-preview")
    def preview_pressed(self) -> None:
        if not self.query_one("#rn-ack", Checkbox).value:
            self.app.notify("read the caution and tick the box before any sound is played",
                            severity="warning", title="Preview")
            return
        self.preview()

    @work(thread=True, exclusive=True, group="preview")
    def preview(self) -> None:
        from roomconv.audio import read_audio
        from roomconv.measure.capture import load_sounddevice
        from roomconv.render.offline import render_arrays
        from roomconv.safety import OutputLimiter, apply_ramps
        app = self.app
        try:
            sd = load_sounddevice()
            drys = shlex.split(self.query_one("#rn-dry", Input).value)
            dry, rate = read_audio(drys[0])
            ir, ir_rate = read_audio(self.query_one("#rn-ir", Input).value)
            y = render_arrays(dry[: 10 * rate], ir, rate, self.settings(), ir_rate=ir_rate)
            y = OutputLimiter(rate).process(apply_ramps(y * 10 ** (-12 / 20), rate))
            sd.play(y.astype("float32"), rate, blocking=True)
        except (RoomconvError, IndexError) as exc:
            app.call_from_thread(app.notify, str(exc) or "nothing to preview",
                                 severity="error", title="Preview")
