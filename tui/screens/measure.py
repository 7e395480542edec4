"""Measure tab: devices and channels, sweep settings, the caution, a level check, the sweep
with a progress bar, and the extracted IR's quality; each measurement adds a position to the
session. Without a sound card the tab says so and still imports recordings or rehearses on a
simulated room."""

from __future__ import annotations

from pathlib import Path

from textual import on, work
from textual.app import ComposeResult
from textual.containers import Horizontal, VerticalScroll
from textual.widgets import Button, Checkbox, DataTable, Input, Label, ProgressBar, Select, Static
from textual.worker import get_current_worker

from roomconv import validate
from roomconv.errors import InputError, RoomconvError
from roomconv.jobs.progress import Cancelled
from roomconv.safety import caution_text
from tui.screens import workbench


class MeasurePane(VerticalScroll):
    def compose(self) -> ComposeResult:
        yield Static("checking sound devices…", id="ms-devices", classes="status")
        with Horizontal(classes="row"):
            yield Label("Device")
            yield Select(
                [("system default", "default")], value="default", allow_blank=False, id="ms-device"
            )
            yield Label("Out ch")
            yield Input("1", id="ms-out-ch", classes="narrow")
            yield Label("In ch")
            yield Input("1", id="ms-in-ch", classes="narrow")
        with Horizontal(classes="row"):
            yield Label("Loopback channel (counting from 1, optional)")
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
            text = (
                (f"{len(devs)} sound device(s) found; choose one below")
                if devs
                else "no sound device found: import recordings or rehearse on a simulated room"
            )
        except RoomconvError as exc:
            text = f"no sound card path ({exc}); import recordings or rehearse on a simulated room"
        options = [("system default", "default")] + [
            (f"{d['index']}: {d['name']} ({d['inputs']} in / {d['outputs']} out)", str(d["index"]))
            for d in devs
        ]
        self.app.call_from_thread(self.query_one("#ms-device", Select).set_options, options)
        self.app.call_from_thread(self.query_one("#ms-devices", Static).update, text)

    def number(self, selector: str, label: str) -> float:
        """A field's number, or a refusal naming the field."""
        text = self.query_one(selector, Input).value.strip()
        try:
            return float(text)
        except ValueError:
            raise InputError(f"{label}: '{text}' is not a number") from None

    def channel(self, selector: str, label: str) -> int | None:
        """A 1-based channel field (empty: none)."""
        text = self.query_one(selector, Input).value.strip()
        if not text:
            return None
        if not text.isdigit() or int(text) < 1:
            raise InputError(f"{label}: '{text}' is not a channel number (channels count from 1)")
        return int(text)

    def channels(self, selector: str, label: str) -> tuple[int, ...]:
        return validate.channel_list(self.query_one(selector, Input).value, label)

    def sweep(self):
        from roomconv.measure.sweep import Sweep

        return Sweep(
            f_low=self.number("#ms-low", "Sweep start Hz"),
            f_high=self.number("#ms-high", "Sweep stop Hz"),
            duration=self.number("#ms-duration", "Duration s"),
            level_dbfs=self.number("#ms-level", "Level dBFS"),
            silence_post=self.number("#ms-silence", "Silence s"),
        )

    def simulated_room(self) -> str | None:
        return self.query_one("#ms-sim", Input).value.strip() or None

    def confirm(self) -> None:
        """The caution is on screen; sound plays only once its box is ticked."""
        if not self.query_one("#ms-ack", Checkbox).value:
            raise InputError(
                "read the hearing and equipment caution and tick the box before any sound is played"
            )

    def card(self) -> dict:
        """The sound card fields, as the measurement jobs take them."""
        choice = self.query_one("#ms-device", Select).value
        return {
            "device": None if choice in ("default", Select.BLANK) else int(str(choice)),
            "output_channel": self.channel("#ms-out-ch", "Out ch") or 1,
            "input_channels": self.channels("#ms-in-ch", "In ch"),
        }

    @on(Button.Pressed, "#ms-level-check")
    def level_pressed(self) -> None:
        self.level_check()

    @work(thread=True, exclusive=True, group="measure")
    def level_check(self) -> None:
        """A quiet 1 kHz tone, ramped, with a live input meter."""
        from roomconv.jobs.measure import LEVEL_CHECK_DBFS, level_check

        app = self.app
        meter = self.query_one("#ms-meter", Static)

        def show(peak_db, frac):
            bar = "█" * int(max(0.0, min(1.0, (peak_db + 80) / 80)) * 40)
            app.call_from_thread(
                meter.update, f"input meter: {bar:<40} {peak_db:6.1f} dBFS ({100 * frac:3.0f} %)"
            )

        try:
            sim = self.simulated_room()
            peak = level_check(
                simulate=sim,
                confirm=None if sim else self.confirm,
                on_level=show,
                **({} if sim else self.card()),
            )
            app.call_from_thread(
                self.query_one("#ms-status", Static).update,
                f"level check: input peak {peak:.1f} dBFS for a "
                f"{LEVEL_CHECK_DBFS:g} dBFS tone; aim for the sweep to peak "
                "10-20 dB below full scale at the microphone",
            )
        except RoomconvError as exc:
            app.call_from_thread(app.notify, str(exc), severity="error", title="Level check")

    @on(Button.Pressed, "#ms-run")
    def run_pressed(self) -> None:
        self.measure()

    def progress(self, stage: str, fraction: float, message: str | None = None) -> None:
        """The jobs' progress callback: the bar, and a notice for each message."""
        if get_current_worker().is_cancelled:
            raise Cancelled()
        self.app.call_from_thread(
            self.query_one("#ms-progress", ProgressBar).update, progress=fraction
        )
        if message:
            self.app.call_from_thread(self.app.notify, message, title="Measure")

    def position(self) -> tuple[str, Path, Path]:
        """The next position's name, response file and quality file."""
        from roomconv.jobs.naming import position_output

        folder = Path(self.query_one("#ms-folder", Input).value)
        next_name = f"P{len(workbench(self).session) + 1}"
        name = self.query_one("#ms-name", Input).value.strip() or next_name
        out, quality = position_output(folder, name)
        return name, out, quality

    @work(thread=True, exclusive=True, group="measure")
    def measure(self) -> None:
        from roomconv.jobs.guard import make_folders
        from roomconv.jobs.measure import measure_position

        app = self.app
        try:
            s = self.sweep()
            sim = self.simulated_room()
            ref = self.channel("#ms-ref", "Loopback channel")
            name, out, quality = self.position()
            if sim is None:
                self.confirm()
            make_folders(out.parent)
            res = measure_position(
                out,
                s,
                simulate=sim,
                reference_channel=ref,
                sim_latency_samples=256,
                sim_noise_dbfs=-90.0,
                match_simulated_rate=True,
                json_path=quality,
                confirm=None if sim else self.confirm,
                progress=self.progress,
                **({} if sim else self.card()),
            )
            self.show_position(name, res)
        except Cancelled:
            app.call_from_thread(
                self.query_one("#ms-status", Static).update, "measurement cancelled; nothing saved"
            )
        except RoomconvError as exc:
            app.call_from_thread(app.notify, str(exc), severity="error", title="Measure")

    @on(Button.Pressed, "#ms-import")
    def import_pressed(self) -> None:
        self.import_recording()

    @work(thread=True, exclusive=True, group="measure")
    def import_recording(self) -> None:
        from roomconv.jobs.guard import make_folders
        from roomconv.jobs.measure import extract_recording

        app = self.app
        try:
            rec = Path(self.query_one("#ms-rec", Input).value)
            sweep = Path(self.query_one("#ms-sweep", Input).value)
            ref = self.channel("#ms-ref", "Loopback channel")
            name, out, quality = self.position()
            make_folders(out.parent)
            res = extract_recording(
                rec, sweep, out, reference_channel=ref, json_path=quality, progress=self.progress
            )
            for n in res.notes:
                app.call_from_thread(app.notify, n, title="Import")
            self.show_position(name, res)
        except Cancelled:
            app.call_from_thread(
                self.query_one("#ms-status", Static).update, "import cancelled; nothing saved"
            )
        except RoomconvError as exc:
            app.call_from_thread(app.notify, str(exc), severity="error", title="Import")

    def show_position(self, name: str, res) -> None:
        """Add a measured position to the session and its table."""
        app = self.app
        session = workbench(self).session
        q = res.quality
        session.append({"name": name, "file": res.output, "quality": q})
        row = (
            name,
            str(res.output),
            f"{min(q['ir']['inr_db']):.1f}",
            f"{max(q['recording']['peak_dbfs']):.1f}",
            str(sum(q["recording"]["clipped_samples"])),
            str(len(q["warnings"])),
        )
        app.call_from_thread(self.query_one("#ms-positions", DataTable).add_row, *row)
        nxt = f"P{len(session) + 1}"
        app.call_from_thread(setattr, self.query_one("#ms-name", Input), "value", nxt)
        app.call_from_thread(self.query_one("#ms-progress", ProgressBar).update, progress=1.0)
        app.call_from_thread(
            self.query_one("#ms-status", Static).update,
            f"{name}: impulse-to-noise ratio (INR) "
            f"{min(q['ir']['inr_db']):.1f} dB; " + ("; ".join(q["warnings"][:2]) or "no warnings"),
        )
