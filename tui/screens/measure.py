"""Measure tab: devices and channels, sweep settings, the caution, a level check, the sweep
with a progress bar, and the extracted IR's quality; each measurement adds a position to the
session. Without a sound card the tab says so and still imports recordings or rehearses on a
simulated room."""

from __future__ import annotations

import time
from pathlib import Path

from textual import on, work
from textual.worker import get_current_worker
from textual.app import ComposeResult
from textual.containers import Horizontal, VerticalScroll
from textual.widgets import (Button, Checkbox, DataTable, Input, Label, ProgressBar, Select,
                             Static)

from roomconv.errors import InputError, RoomconvError
from roomconv.safety import caution_text


class MeasurePane(VerticalScroll):
    def compose(self) -> ComposeResult:
        yield Static("checking sound devices…", id="ms-devices", classes="status")
        with Horizontal(classes="row"):
            yield Label("Device")
            yield Select([("system default", "default")], value="default", allow_blank=False,
                         id="ms-device")
            yield Label("Out ch")
            yield Input("1", id="ms-out-ch", classes="narrow")
            yield Label("In ch")
            yield Input("1", id="ms-in-ch", classes="narrow")
        with Horizontal(classes="row"):
            yield Label("Loopback channel (0-based, optional)")
            yield Input("", id="ms-ref", classes="narrow")
        with Horizontal(classes="row"):
            yield Label("Sweep Hz")
            yield Input("20", id="ms-low", classes="narrow")
            yield Input("20000", id="ms-high", classes="narrow")
            yield Label("Duration s")
            yield Input("5", id="ms-duration", classes="narrow")
        with Horizontal(classes="row"):
            yield Label("Level dBFS")
            yield Input("-20", id="ms-level", classes="narrow")
            yield Label("Silence s")
            yield Input("2", id="ms-silence", classes="narrow")
        with Horizontal(classes="row"):
            yield Label("Simulated room IR")
            yield Input(placeholder="room.wav (rehearse without a sound card)", id="ms-sim")
        with Horizontal(classes="row"):
            yield Label("Position")
            yield Input("P1", id="ms-name", classes="narrow")
            yield Label("Save in")
            yield Input("session", id="ms-folder")
        yield Static(caution_text(), classes="caution")
        with Horizontal(classes="row"):
            yield Checkbox("I have read the caution", id="ms-ack")
            yield Button("Level check", id="ms-level-check")
            yield Button("Measure", id="ms-run", variant="primary")
        with Horizontal(classes="row"):
            yield Label("Import recording")
            yield Input(placeholder="recording.wav", id="ms-rec")
            yield Label("Sweep file")
            yield Input(placeholder="sweep.wav", id="ms-sweep")
            yield Button("Import", id="ms-import")
        yield Static("input meter: —", id="ms-meter", classes="status")
        yield ProgressBar(total=1.0, show_eta=False, id="ms-progress")
        yield Static("", id="ms-status", classes="status")
        yield DataTable(id="ms-positions")

    def on_mount(self) -> None:
        t = self.query_one("#ms-positions", DataTable)
        t.add_columns("position", "file", "INR dB", "peak dBFS", "clipped", "warnings")
        self.probe_devices()

    @work(thread=True, group="devices")
    def probe_devices(self) -> None:
        from roomconv.measure.capture import list_devices
        devs = []
        try:
            devs = list_devices()
            text = (f"{len(devs)} sound device(s) found; choose one below") if devs else \
                "no sound device found: import recordings or rehearse on a simulated room"
        except RoomconvError as exc:
            text = f"no sound card path ({exc}); import recordings or rehearse on a simulated room"
        options = [("system default", "default")] + [
            (f"{d['index']}: {d['name']} ({d['inputs']} in / {d['outputs']} out)",
             str(d["index"])) for d in devs]
        self.app.call_from_thread(self.query_one("#ms-device", Select).set_options, options)
        self.app.call_from_thread(self.query_one("#ms-devices", Static).update, text)

    def sweep(self):
        from roomconv.measure.sweep import Sweep
        v = lambda i: float(self.query_one(i, Input).value)  # noqa: E731
        try:
            return Sweep(f_low=v("#ms-low"), f_high=v("#ms-high"), duration=v("#ms-duration"),
                         level_dbfs=v("#ms-level"), silence_post=v("#ms-silence"))
        except InputError:
            raise  # the library's own refusal says what is wrong already
        except ValueError:
            raise RoomconvError("sweep settings must be numbers") from None

    def device(self):
        from roomconv.audio import read_audio
        from roomconv.measure.capture import SimulatedDevice, SoundCard
        sim = self.query_one("#ms-sim", Input).value.strip()
        ref = self.query_one("#ms-ref", Input).value.strip()
        if sim:
            ir, _ = read_audio(sim, what="simulated room IR")
            return SimulatedDevice(ir, latency_samples=256, noise_dbfs=-90,
                                   loopback=bool(ref)), True
        if not self.query_one("#ms-ack", Checkbox).value:
            raise RoomconvError("read the hearing and equipment caution and tick the box "
                                "before any sound is played")
        choice = self.query_one("#ms-device", Select).value
        dev = None if choice in ("default", Select.BLANK) else int(choice)
        ins = tuple(int(c) for c in self.query_one("#ms-in-ch", Input).value.split(","))
        out = int(self.query_one("#ms-out-ch", Input).value)
        return SoundCard(device=dev, output_channel=out, input_channels=ins), False

    @on(Button.Pressed, "#ms-level-check")
    def level_pressed(self) -> None:
        self.level_check()

    @work(thread=True, exclusive=True, group="measure")
    def level_check(self) -> None:
        """A 2 s, 1 kHz tone at −40 dBFS, ramped, with a live input meter."""
        import numpy as np
        from roomconv.measure.capture import metered_playrec
        from roomconv.safety import apply_ramps
        app = self.app
        meter = self.query_one("#ms-meter", Static)
        peaks = []

        def show(peak_db, frac):
            peaks.append(peak_db)
            bar = "█" * int(max(0.0, min(1.0, (peak_db + 80) / 80)) * 40)
            app.call_from_thread(meter.update, f"input meter: {bar:<40} {peak_db:6.1f} dBFS "
                                               f"({100 * frac:3.0f} %)")
        try:
            device, _ = self.device()
            rate = 48000
            t = np.arange(2 * rate) / rate
            tone = apply_ramps(10 ** (-40 / 20) * np.sin(2 * np.pi * 1000 * t), rate)
            metered_playrec(device, tone, rate, show)
            app.call_from_thread(self.query_one("#ms-status", Static).update,
                                 f"level check: input peak {max(peaks):.1f} dBFS for a "
                                 "-40 dBFS tone; aim for the sweep to peak 10-20 dB below "
                                 "full scale at the microphone")
        except RoomconvError as exc:
            app.call_from_thread(app.notify, str(exc), severity="error", title="Level check")

    @on(Button.Pressed, "#ms-run")
    def run_pressed(self) -> None:
        self.measure()

    @work(thread=True, exclusive=True, group="measure")
    def measure(self) -> None:
        from roomconv.measure.capture import run_measurement
        from roomconv.measure.deconvolve import extract_ir
        from roomconv.measure.sweep import sweep_signal
        from roomconv.safety import check_level
        app = self.app
        bar = self.query_one("#ms-progress", ProgressBar)
        try:
            s = self.sweep()
            check_level(s.level_dbfs)
            device, simulated = self.device()
            ref_txt = self.query_one("#ms-ref", Input).value.strip()
            ref = int(ref_txt) if ref_txt else None
            app.call_from_thread(bar.update, progress=0.0)
            if not simulated:
                # The sweep blocks in playrec; show elapsed time from a timer thread.
                import threading
                stop = threading.Event()
                total = s.n_total / s.rate + 0.5

                def ticker():
                    t0 = time.monotonic()
                    while not stop.wait(0.2):
                        app.call_from_thread(bar.update,
                                             progress=min(0.95, (time.monotonic() - t0) / total))
                threading.Thread(target=ticker, daemon=True).start()
            rec = run_measurement(device, sweep_signal(s), s.rate)
            if not simulated:
                stop.set()
            app.call_from_thread(bar.update, progress=0.97)
            ex = extract_ir(rec, s.rate, sweep=s, reference_channel=ref)
            if get_current_worker().is_cancelled:
                app.call_from_thread(self.query_one("#ms-status", Static).update,
                                     "measurement cancelled; nothing saved")
                return
            self.save_position(ex, [])
            app.call_from_thread(bar.update, progress=1.0)
        except RoomconvError as exc:
            app.call_from_thread(app.notify, str(exc), severity="error", title="Measure")

    @on(Button.Pressed, "#ms-import")
    def import_pressed(self) -> None:
        self.import_recording()

    @work(thread=True, exclusive=True, group="measure")
    def import_recording(self) -> None:
        from roomconv.measure.files import extract_files
        app = self.app
        try:
            rec = Path(self.query_one("#ms-rec", Input).value)
            sweep = Path(self.query_one("#ms-sweep", Input).value)
            ref_txt = self.query_one("#ms-ref", Input).value.strip()
            ex, notes = extract_files(rec, sweep, reference_channel=int(ref_txt)
                                      if ref_txt else None)
            for n in notes:
                app.call_from_thread(app.notify, n, title="Import")
            self.save_position(ex, [rec, sweep])
        except (RoomconvError, ValueError) as exc:
            app.call_from_thread(app.notify, str(exc), severity="error", title="Import")

    def save_position(self, ex, inputs) -> None:
        from roomconv.audio import write_audio, write_json, write_provenance
        app = self.app
        folder = Path(self.query_one("#ms-folder", Input).value)
        folder.mkdir(parents=True, exist_ok=True)
        name = self.query_one("#ms-name", Input).value.strip() or f"P{len(app.session) + 1}"
        out = folder / f"{name}.wav"
        write_audio(out, ex.ir, ex.rate, force=True, inputs=inputs)
        write_json(folder / f"{name}.quality.json", ex.quality, force=True, inputs=inputs)
        write_provenance(out, inputs, {"quality": ex.quality}, force=True)
        q = ex.quality
        app.session.append({"name": name, "file": out, "quality": q})
        row = (name, str(out), f"{min(q['ir']['inr_db']):.1f}",
               f"{max(q['recording']['peak_dbfs']):.1f}",
               str(sum(q["recording"]["clipped_samples"])), str(len(q["warnings"])))
        app.call_from_thread(self.query_one("#ms-positions", DataTable).add_row, *row)
        nxt = f"P{len(app.session) + 1}"
        app.call_from_thread(setattr, self.query_one("#ms-name", Input), "value", nxt)
        app.call_from_thread(self.query_one("#ms-status", Static).update,
                             f"{name}: impulse-to-noise ratio (INR) "
                             f"{min(q['ir']['inr_db']):.1f} dB; "
                             + ("; ".join(q["warnings"][:2]) or "no warnings"))
