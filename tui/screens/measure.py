"""Measure tab: the actions, the input meter, progress and the positions measured so far on
top (visible at 80×24 without scrolling), the settings below: sweep, sample rate, sound card
or simulated room, channels, where to save, room conditions and notes. Each measurement adds
a position to the session; a taken name gets a free one (``P1-2``) and the status says so."""

from __future__ import annotations

import contextlib
from pathlib import Path

from textual import on, work
from textual.app import ComposeResult
from textual.containers import Horizontal, Vertical, VerticalScroll
from textual.widgets import Button, DataTable, Input, Label, ProgressBar, Select, Static
from textual.worker import get_current_worker

from roomconv import validate
from roomconv.errors import InputError
from roomconv.jobs.naming import unused_name
from roomconv.jobs.progress import Cancelled
from tui.screens import error_text, workbench
from tui.widgets import level_meter

#: Sample rates offered; "auto" takes a simulated room's own rate, else 48 kHz.
RATES = ("auto", "44100", "48000", "88200", "96000")
AUTO_RATE_HZ = 48000


def _line(*children) -> Horizontal:
    return Horizontal(*children, classes="line")


class MeasurePane(Vertical):
    can_focus = False

    def compose(self) -> ComposeResult:
        with Horizontal(classes="line"):
            yield Button("Measure", id="ms-run", variant="primary", compact=True)
            yield Button("Level check", id="ms-level-check", compact=True)
            yield Button("Import", id="ms-import", compact=True)
            yield Label("Position")
            yield Input("P1", id="ms-name", classes="narrow", compact=True)
        yield Static(f"Input {level_meter(float('-inf'))}", id="ms-meter")
        with Horizontal(classes="line"):
            yield ProgressBar(total=1.0, show_eta=False, id="ms-progress")
            yield Static("", id="ms-stage")
        yield Static("no position measured yet", id="ms-status", classes="status")
        yield DataTable(id="ms-positions", cursor_type="none")
        with VerticalScroll(id="ms-settings", classes="settings"):
            yield _line(
                Label("Sweep from"),
                Input("20", id="ms-low", classes="narrow", compact=True),
                Label("to"),
                Input("20000", id="ms-high", classes="narrow", compact=True),
                Label("Hz  length"),
                Input("5", id="ms-duration", classes="narrow", compact=True),
                Label("s  level"),
                Input("-20", id="ms-level", classes="narrow", compact=True),
                Label("dBFS"),
            )
            yield _line(
                Label("Repeats"),
                Input("1", id="ms-repeats", classes="narrow", compact=True),
                Label("silence after"),
                Input("2", id="ms-silence", classes="narrow", compact=True),
                Label("s  Sample rate"),
                Select(
                    [(r if r == "auto" else f"{r} Hz", r) for r in RATES],
                    value="auto",
                    allow_blank=False,
                    id="ms-rate",
                    compact=True,
                ),
            )
            yield _line(
                Label("Sound card"),
                Select(
                    [("system default", "default")],
                    value="default",
                    allow_blank=False,
                    id="ms-device",
                    compact=True,
                ),
            )
            yield _line(
                Label("Output ch"),
                Input("1", id="ms-out-ch", classes="narrow", compact=True),
                Label("Input ch"),
                Input("1", id="ms-in-ch", classes="narrow", compact=True),
                Label("Loopback channel"),
                Input("", placeholder="none", id="ms-ref", classes="narrow", compact=True),
            )
            yield _line(
                Label("Simulated room"),
                Input(
                    placeholder="room.wav: rehearse without a sound card", id="ms-sim", compact=True
                ),
            )
            yield _line(
                Label("Save in"),
                Input("session", id="ms-folder", compact=True),
                Label("Room"),
                Input("Room 1", id="ms-room", compact=True),
            )
            yield _line(
                Label("Temperature"),
                Input("20", id="ms-temperature", classes="narrow", compact=True),
                Label("°C  Humidity"),
                Input("50", id="ms-humidity", classes="narrow", compact=True),
                Label("%"),
            )
            yield _line(
                Label("Strength reference"),
                Input(placeholder="cal.json, for G", id="ms-cal", compact=True),
                Label("from"),
                Input("", placeholder="P1", id="ms-cal-from", classes="narrow", compact=True),
                Label("at"),
                Input("3", id="ms-cal-distance", classes="narrow", compact=True),
                Label("m"),
                Button("Make", id="ms-calibrate", compact=True),
            )
            yield _line(
                Label("Notes"), Input(placeholder="door closed, …", id="ms-notes", compact=True)
            )
            yield _line(
                Label("Import: recording"),
                Input(placeholder="recording.wav", id="ms-rec", compact=True),
                Label("sweep"),
                Input(placeholder="sweep.wav", id="ms-sweep", compact=True),
            )
            yield Static("checking sound devices…", id="ms-devices", classes="status")

    def on_mount(self) -> None:
        t = self.query_one("#ms-positions", DataTable)
        t.can_focus = False
        t.add_columns("position", "file", "INR dB", "peak dBFS", "clipped", "warnings")
        self.probe_devices()

    # --- fields -----------------------------------------------------------------------
    def text(self, selector: str) -> str:
        return self.query_one(selector, Input).value.strip()

    def number(self, selector: str, label: str) -> float:
        """A field's number, or a refusal naming the field."""
        text = self.text(selector)
        try:
            value = float(text)
        except ValueError:
            raise InputError(f"{label}: '{text}' is not a number; type a number") from None
        if value != value or value in (float("inf"), float("-inf")):
            raise InputError(f"{label}: '{text}' is not a finite number; type a number")
        return value

    def whole(self, selector: str, label: str, low: int = 1) -> int:
        text = self.text(selector)
        if not text.isdigit() or int(text) < low:
            raise InputError(f"{label}: '{text}' is not a whole number of at least {low}")
        return int(text)

    def channel(self, selector: str, label: str) -> int | None:
        """A 1-based channel field (empty: none)."""
        text = self.text(selector)
        if not text:
            return None
        if not text.isdigit() or int(text) < 1:
            raise InputError(
                f"{label}: '{text}' is not a channel number; channels count from 1, "
                "leave it empty for none"
            )
        return int(text)

    def rate_choice(self) -> int | None:
        choice = str(self.query_one("#ms-rate", Select).value)
        return None if choice == "auto" else int(choice)

    def sweep(self):
        from roomconv.measure.sweep import Sweep

        return Sweep(
            rate=self.rate_choice() or AUTO_RATE_HZ,
            f_low=self.number("#ms-low", "Sweep from (Hz)"),
            f_high=self.number("#ms-high", "Sweep to (Hz)"),
            duration=self.number("#ms-duration", "Sweep length (s)"),
            level_dbfs=self.number("#ms-level", "Sweep level (dBFS)"),
            silence_post=self.number("#ms-silence", "Silence after (s)"),
            repeats=self.whole("#ms-repeats", "Repeats"),
        )

    def simulated_room(self) -> str | None:
        return self.text("#ms-sim") or None

    def card(self) -> dict:
        """The sound card fields, as the measurement jobs take them."""
        choice = self.query_one("#ms-device", Select).value
        return {
            "device": None if choice in ("default", Select.BLANK) else int(str(choice)),
            "output_channel": self.channel("#ms-out-ch", "Output ch") or 1,
            "input_channels": validate.channel_list(self.text("#ms-in-ch"), "Input ch"),
        }

    def notes(self) -> str:
        return self.text("#ms-notes")

    def conditions(self) -> dict:
        """Room name, temperature and humidity for the study file (unreadable ones left out:
        a study never holds a number nobody gave)."""
        out: dict = {"name": self.text("#ms-room") or "Room 1"}
        for key, sel in (("temperature_c", "#ms-temperature"), ("humidity_pct", "#ms-humidity")):
            with contextlib.suppress(InputError):
                out[key] = self.number(sel, key)
        return out

    def sweep_record(self) -> dict:
        """The sweep as the study file's [sweep] table; values that do not parse are left
        out (they stay in the workbench fields)."""
        rec: dict = {}
        for key, sel in (
            ("f_low_hz", "#ms-low"),
            ("f_high_hz", "#ms-high"),
            ("duration_s", "#ms-duration"),
            ("level_dbfs", "#ms-level"),
            ("silence_s", "#ms-silence"),
        ):
            with contextlib.suppress(InputError):
                rec[key] = self.number(sel, key)
        with contextlib.suppress(InputError):
            rec["repeats"] = self.whole("#ms-repeats", "Repeats")
        used = {p.get("rate_hz") for p in workbench(self).session} - {None}
        rec["rate_hz"] = used.pop() if len(used) == 1 else self.rate_choice()
        return rec

    def restore_settings(self, st) -> None:
        """Fill the sweep and conditions from a study file's [sweep], [room] and notes (the
        [workbench] table, applied afterwards, has the last word)."""
        sw = st.sweep
        pairs = [
            ("#ms-low", sw.f_low_hz),
            ("#ms-high", sw.f_high_hz),
            ("#ms-duration", sw.duration_s),
            ("#ms-level", sw.level_dbfs),
            ("#ms-silence", sw.silence_s),
            ("#ms-repeats", sw.repeats),
            ("#ms-temperature", st.room.temperature_c),
            ("#ms-humidity", st.room.humidity_pct),
        ]
        for sel, v in pairs:
            if v is not None:
                self.query_one(sel, Input).value = f"{v:g}"
        if st.room.name:
            self.query_one("#ms-room", Input).value = st.room.name
        if st.notes:
            self.query_one("#ms-notes", Input).value = st.notes
        if sw.rate_hz is not None and str(sw.rate_hz) in RATES:
            self.query_one("#ms-rate", Select).value = str(sw.rate_hz)

    def restore_positions(self, responses) -> None:
        """The study file's responses as the session's positions, with their quality rows."""
        import json

        for r in responses:
            quality: dict = {}
            if r.quality_file is not None and r.quality_file.is_file():
                try:
                    quality = json.loads(r.quality_file.read_text())
                except (OSError, ValueError):
                    quality = {}
            self.add_position(r.receiver, r.file, quality, r.quality_file)
        self.query_one("#ms-name", Input).value = self.next_name()

    # --- devices ----------------------------------------------------------------------
    @work(thread=True, group="devices", exit_on_error=False)
    def probe_devices(self) -> None:
        devs = []
        try:
            from roomconv.measure.capture import list_devices

            devs = list_devices()
            text = (
                (f"{len(devs)} sound device(s) found; choose one under Sound card")
                if devs
                else "no sound device found: import recordings or rehearse on a simulated room"
            )
        except Exception as exc:  # noqa: BLE001 - no PortAudio, no card: say so and go on
            text = f"no sound card path ({exc}); import recordings or rehearse on a simulated room"
        options = [("system default", "default")] + [
            (f"{d['index']}: {d['name']} ({d['inputs']} in / {d['outputs']} out)", str(d["index"]))
            for d in devs
        ]
        self.app.call_from_thread(self.query_one("#ms-device", Select).set_options, options)
        self.app.call_from_thread(self.query_one("#ms-devices", Static).update, text)

    # --- actions ----------------------------------------------------------------------
    def fail(self, where: str, exc: BaseException) -> None:
        """From a worker: the error on the status line, the bar shown as failed."""
        text = error_text(exc)
        self.app.call_from_thread(self.query_one("#ms-stage", Static).update, "failed")
        self.app.call_from_thread(self.query_one("#ms-status", Static).update, f"{where} failed")
        workbench(self).report_from_thread(where, text, error=True)

    def sound_allowed(self, where: str) -> bool:
        """A sound card needs the caution confirmed; a simulated room plays nothing."""
        if self.simulated_room() or workbench(self).caution_confirmed():
            return True
        workbench(self).ask_caution(where)
        return False

    @on(Button.Pressed, "#ms-level-check")
    def level_pressed(self) -> None:
        if self.sound_allowed("Level check"):
            self.level_check()

    def confirm(self) -> None:
        """Called by the jobs just before a sound card plays."""
        if not workbench(self).caution_confirmed():
            raise InputError("the caution is not confirmed; nothing was played")

    def show_level(self, peak_db: float, fraction: float) -> None:
        """The jobs' level callback (worker thread): the meter line."""
        if get_current_worker().is_cancelled:
            raise Cancelled()
        self.app.call_from_thread(
            self.query_one("#ms-meter", Static).update,
            f"Input {level_meter(peak_db)} {100 * fraction:3.0f} %",
        )

    @work(thread=True, exclusive=True, group="measure", exit_on_error=False)
    def level_check(self) -> None:
        """A quiet 1 kHz tone, ramped, with a live input meter."""
        from roomconv.jobs.measure import LEVEL_CHECK_DBFS, level_check

        try:
            sim = self.simulated_room()
            peak = level_check(
                simulate=sim,
                confirm=None if sim else self.confirm,
                on_level=self.show_level,
                **({} if sim else self.card()),
            )
        except Cancelled:
            workbench(self).report_from_thread("Level check", "stopped")
            return
        except Exception as exc:  # noqa: BLE001 - every failure is shown, none ends the app
            self.fail("Level check", exc)
            return
        self.app.call_from_thread(
            self.query_one("#ms-status", Static).update,
            f"level check: input peak {peak:.1f} dBFS for a {LEVEL_CHECK_DBFS:g} dBFS tone; "
            "aim for the sweep to peak 10-20 dB below full scale at the microphone",
        )

    @on(Button.Pressed, "#ms-run")
    def run_pressed(self) -> None:
        if self.sound_allowed("Measure"):
            self.query_one("#ms-stage", Static).update("starting")
            self.measure()

    def progress(self, stage: str, fraction: float, message: str | None = None) -> None:
        """The jobs' progress callback: the bar and its stage; messages to the status line."""
        if get_current_worker().is_cancelled:
            raise Cancelled()
        self.app.call_from_thread(
            self.query_one("#ms-progress", ProgressBar).update, progress=fraction
        )
        self.app.call_from_thread(self.query_one("#ms-stage", Static).update, stage)
        if message:
            workbench(self).report_from_thread("Measure", message)

    def next_name(self) -> str:
        taken = {p["name"] for p in workbench(self).session}
        k = len(workbench(self).session) + 1
        while f"P{k}" in taken:
            k += 1
        return f"P{k}"

    def position(self) -> tuple[str, Path, Path, str | None]:
        """The next position's name, response and quality files, and a note when the name
        asked for was taken (by the session or by files on disk) and a free one is used."""
        from roomconv.audio import sidecar_path
        from roomconv.jobs.naming import position_output

        folder = Path(self.text("#ms-folder") or ".")
        asked = self.text("#ms-name") or self.next_name()
        if any(c in asked for c in "/\\") or asked in (".", ".."):
            raise InputError(f"Position: '{asked}' is not a plain name; use letters and digits")
        taken = {p["name"] for p in workbench(self).session}

        def free(name: str) -> bool:
            out, quality = position_output(folder, name)
            paths = (out, quality, sidecar_path(out, "provenance"))
            return name not in taken and not any(p.exists() for p in paths)

        name, k = asked, 2
        while not free(name):
            name, k = f"{asked}-{k}", k + 1
        out, quality = position_output(folder, name)
        note = None if name == asked else f"{asked} is taken; measuring as {name}"
        return name, out, quality, note

    @work(thread=True, exclusive=True, group="measure", exit_on_error=False)
    def measure(self) -> None:
        from roomconv.jobs.guard import make_folders
        from roomconv.jobs.measure import measure_position

        try:
            s = self.sweep()
            sim = self.simulated_room()
            ref = self.channel("#ms-ref", "Loopback channel")
            card = {} if sim else self.card()
            name, out, quality, note = self.position()
            if note:
                workbench(self).report_from_thread("Measure", note)
            make_folders(out.parent)
            res = measure_position(
                out,
                s,
                simulate=sim,
                reference_channel=ref,
                sim_latency_samples=256,
                sim_noise_dbfs=-90.0,
                # "auto" measures a simulated room at its own rate; a rate chosen on purpose
                # that differs from the room's is refused by the job.
                match_simulated_rate=self.rate_choice() is None,
                json_path=quality,
                confirm=None if sim else self.confirm,
                progress=self.progress,
                on_level=self.show_level,
                **card,
            )
        except Cancelled:
            self.app.call_from_thread(self.query_one("#ms-stage", Static).update, "stopped")
            workbench(self).report_from_thread("Measure", "stopped; nothing saved")
            return
        except Exception as exc:  # noqa: BLE001 - every failure is shown, none ends the app
            self.fail("Measure", exc)
            return
        self.app.call_from_thread(self.measured, name, res, quality, note)

    @on(Button.Pressed, "#ms-import")
    def import_pressed(self) -> None:
        self.import_recording()

    @work(thread=True, exclusive=True, group="measure", exit_on_error=False)
    def import_recording(self) -> None:
        from roomconv.jobs.guard import make_folders
        from roomconv.jobs.measure import extract_recording

        try:
            rec, sweep = self.text("#ms-rec"), self.text("#ms-sweep")
            if not rec or not sweep:
                raise InputError("Import: type the recording and the sweep file that was played")
            ref = self.channel("#ms-ref", "Loopback channel")
            name, out, quality, note = self.position()
            make_folders(out.parent)
            res = extract_recording(
                Path(rec),
                Path(sweep),
                out,
                reference_channel=ref,
                json_path=quality,
                progress=self.progress,
            )
        except Cancelled:
            workbench(self).report_from_thread("Import", "stopped; nothing saved")
            return
        except Exception as exc:  # noqa: BLE001 - every failure is shown, none ends the app
            self.fail("Import", exc)
            return
        for n in res.notes:
            workbench(self).report_from_thread("Import", n)
        self.app.call_from_thread(self.measured, name, res, quality, note)

    @on(Button.Pressed, "#ms-calibrate")
    def calibrate_pressed(self) -> None:
        self.calibrate()

    @work(thread=True, exclusive=True, group="measure", exit_on_error=False)
    def calibrate(self) -> None:
        """A strength reference for G from a position measured in a free field (the source
        at the given distance), written to the Strength reference file; a taken name gets a
        free one."""
        from roomconv.jobs.calibrate import calibrate_free_field

        session = workbench(self).session
        try:
            target = self.text("#ms-cal")
            if not target:
                raise InputError("Strength reference: type the file to write, e.g. cal.json")
            asked = self.text("#ms-cal-from") or (session[-1]["name"] if session else "")
            found = [p for p in session if p["name"] == asked]
            if not found:
                raise InputError(
                    f"Strength reference from: '{asked}' is not a position of this session; "
                    "measure the source in a free field first"
                )
            distance = self.number("#ms-cal-distance", "Strength reference at (m)")
            out = Path(target)
            free = unused_name(out)
            res = calibrate_free_field(found[0]["file"], free, distance_m=distance)
        except Exception as exc:  # noqa: BLE001 - every failure is shown, none ends the app
            self.fail("Strength reference", exc)
            return
        note = f"{out.name} exists; wrote {free.name}" if free != out else f"wrote {free}"
        extra = f" ({'; '.join(res.notes)})" if res.notes else ""
        workbench(self).report_from_thread(
            "Strength reference", f"{note} from {found[0]['name']} at {distance:g} m{extra}"
        )
        if free != out:
            self.app.call_from_thread(setattr, self.query_one("#ms-cal", Input), "value", str(free))

    def measured(self, name: str, res, quality_file: Path, note: str | None) -> None:
        """Add a measured position to the session and its table (on the app's thread)."""
        rate = res.extraction.rate
        self.add_position(name, res.output, res.quality, quality_file, rate)
        self.query_one("#ms-name", Input).value = self.next_name()
        self.query_one("#ms-progress", ProgressBar).update(progress=1.0)
        self.query_one("#ms-stage", Static).update("done")
        q = res.quality
        warns = "; ".join(q.get("warnings", [])[:2]) or "no warnings"
        self.query_one("#ms-status", Static).update(
            f"{name}: {res.output.name} at {rate} Hz, impulse-to-noise ratio (INR) "
            f"{min(q['ir']['inr_db']):.1f} dB; {warns}"
        )
        workbench(self).report("Measure", note or f"{name} saved as {res.output}")

    def add_position(self, name, file, quality: dict, quality_file=None, rate=None) -> None:
        workbench(self).session.append(
            {
                "name": name,
                "file": Path(file),
                "quality": quality,
                "quality_file": quality_file,
                "rate_hz": rate,
            }
        )

        def pick(path: tuple[str, str], how) -> str:
            try:
                return how(quality[path[0]][path[1]])
            except (KeyError, TypeError, ValueError):
                return "—"

        self.query_one("#ms-positions", DataTable).add_row(
            name,
            Path(file).name,
            pick(("ir", "inr_db"), lambda v: f"{min(v):.1f}"),
            pick(("recording", "peak_dbfs"), lambda v: f"{max(v):.1f}"),
            pick(("recording", "clipped_samples"), lambda v: str(sum(v))),
            str(len(quality.get("warnings", []))) if quality else "—",
        )
