"""Render tab: the actions, the overall bar and a queue with a bar per file on top (visible
at 80×24), the settings below: dry files, response, output folder, wet/dry, pre-delay, gain,
level normalization and its target, output format and workers. The queue runs on the batch
runner (a pool of worker processes; finished files whose provenance verifies are skipped);
the preview plays through the one safe-play path."""

from __future__ import annotations

import shlex
import threading
from pathlib import Path

from textual import on, work
from textual.app import ComposeResult
from textual.containers import Horizontal, Vertical, VerticalScroll
from textual.widgets import Button, Checkbox, DataTable, Input, Label, ProgressBar, Select, Static

from roomconv.errors import InputError
from roomconv.jobs.progress import Cancelled
from tui.screens import error_text, workbench

#: Normalization modes and the unit of their target (ITU-R BS.1770 for dBTP and LUFS).
NORMALIZE_UNITS = {"none": "", "peak": "dBFS", "truepeak": "dBTP", "loudness": "LUFS"}
#: Output formats offered: soundfile subtypes with plain names.
FORMATS = (
    ("32-bit float", "FLOAT"),
    ("24-bit", "PCM_24"),
    ("16-bit", "PCM_16"),
    ("64-bit float", "DOUBLE"),
)
BAR_CELLS = 12


def text_bar(fraction: float, width: int = BAR_CELLS) -> str:
    """A job's bar in the queue table: ``██████░░░░░░  50 %``."""
    f = min(1.0, max(0.0, fraction))
    n = int(round(f * width))
    return f"{'█' * n}{'░' * (width - n)} {100 * f:3.0f} %"


def start_process_helpers() -> None:
    """Start multiprocessing's resource tracker with the real standard error.

    The batch runner's worker processes need the tracker; starting it passes
    ``sys.stderr.fileno()`` to the new process, and inside the app ``sys.stderr`` is
    Textual's print capture, whose file number is -1 ("bad value(s) in fds_to_keep")."""
    import contextlib
    import sys
    from multiprocessing import resource_tracker

    real = sys.__stderr__
    if real is None:
        return
    with contextlib.redirect_stderr(real):
        resource_tracker.ensure_running()


def _line(*children) -> Horizontal:
    return Horizontal(*children, classes="line")


class RenderPane(Vertical):
    can_focus = False
    cancel_event: threading.Event | None = None

    def compose(self) -> ComposeResult:
        with Horizontal(classes="line"):
            yield Button("Render queue", id="rn-run", variant="primary", compact=True)
            yield Button("Stop", id="rn-cancel", compact=True)
            yield Button("Preview 10 s", id="rn-preview", compact=True)
            yield Checkbox("Replace existing files", id="rn-replace", compact=True)
        with Horizontal(classes="line"):
            yield Label("All")
            yield ProgressBar(total=1.0, show_eta=False, id="rn-all")
            yield Static("", id="rn-job-label")
        yield Static("nothing rendered yet", id="rn-status", classes="status")
        yield DataTable(id="rn-queue", cursor_type="none")
        with VerticalScroll(id="rn-settings", classes="settings"):
            yield _line(
                Label("Dry files"),
                Input(placeholder="take1.wav take2.wav …", id="rn-dry", compact=True),
            )
            yield _line(Label("Response"), Input(placeholder="hall.wav", id="rn-ir", compact=True))
            yield _line(Label("Output folder"), Input("rendered", id="rn-out", compact=True))
            yield _line(
                Label("Wet/dry"),
                Input("1.0", id="rn-mix", classes="narrow", compact=True),
                Label("Pre-delay"),
                Input("0", id="rn-predelay", classes="narrow", compact=True),
                Label("ms  Gain"),
                Input("0", id="rn-gain", classes="narrow", compact=True),
                Label("dB"),
            )
            yield _line(
                Label("Level"),
                Select(
                    [
                        ("as rendered", "none"),
                        ("peak", "peak"),
                        ("true peak", "truepeak"),
                        ("loudness", "loudness"),
                    ],
                    value="none",
                    allow_blank=False,
                    id="rn-normalize",
                    compact=True,
                ),
                Label("target"),
                Input("", placeholder="default", id="rn-target", classes="narrow", compact=True),
                Static("", id="rn-target-unit"),
            )
            yield _line(
                Label("Format"),
                Select(FORMATS, value="FLOAT", allow_blank=False, id="rn-format", compact=True),
                Label("Workers"),
                Input("2", id="rn-workers", classes="narrow", compact=True),
            )

    def on_mount(self) -> None:
        t = self.query_one("#rn-queue", DataTable)
        t.can_focus = False
        t.add_column("file", key="file")
        t.add_column("state", key="state")
        t.add_column("progress", key="bar")

    @on(Select.Changed, "#rn-normalize")
    def unit_changed(self, event: Select.Changed) -> None:
        unit = NORMALIZE_UNITS.get(str(event.value), "")
        self.query_one("#rn-target-unit", Static).update(unit)

    # --- fields -----------------------------------------------------------------------
    def number(self, selector: str, label: str) -> float:
        """A field's number, or a refusal naming the field."""
        text = self.query_one(selector, Input).value.strip()
        try:
            value = float(text)
        except ValueError:
            raise InputError(f"{label}: '{text}' is not a number; type a number") from None
        if value != value or value in (float("inf"), float("-inf")):
            raise InputError(f"{label}: '{text}' is not a finite number; type a number")
        return value

    def settings(self):
        from roomconv.render.offline import RenderSettings

        mode = str(self.query_one("#rn-normalize", Select).value)
        target = None
        if self.query_one("#rn-target", Input).value.strip():
            if mode == "none":
                raise InputError("Level target: choose peak, true peak or loudness first")
            target = self.number("#rn-target", f"Level target ({NORMALIZE_UNITS[mode]})")
        return RenderSettings(
            mix=self.number("#rn-mix", "Wet/dry"),
            predelay_ms=self.number("#rn-predelay", "Pre-delay (ms)"),
            gain_db=self.number("#rn-gain", "Gain (dB)"),
            normalize=mode,
            target=target,
            subtype=str(self.query_one("#rn-format", Select).value),
            match_ir_level=True,
        ).check()

    def inputs(self) -> tuple[list[Path], Path, Path]:
        try:
            drys = [Path(p) for p in shlex.split(self.query_one("#rn-dry", Input).value)]
        except ValueError as exc:
            raise InputError(f"Dry files: {exc}; check the quotes") from None
        if not drys:
            raise InputError("Dry files: type one or more dry files first")
        ir = self.query_one("#rn-ir", Input).value.strip()
        if not ir:
            raise InputError("Response: type the impulse response to render through")
        folder = Path(self.query_one("#rn-out", Input).value.strip() or "rendered")
        return drys, Path(ir), folder

    def worker_count(self) -> int:
        text = self.query_one("#rn-workers", Input).value.strip()
        if not text.isdigit() or not 1 <= int(text) <= 64:
            raise InputError(f"Workers: '{text}' is not a whole number from 1 to 64")
        return int(text)

    # --- queue ------------------------------------------------------------------------
    @on(Button.Pressed, "#rn-run")
    def run_pressed(self) -> None:
        self.cancel_event = threading.Event()
        self.query_one("#rn-status", Static).update("starting the workers…")
        self.render_queue(self.cancel_event)

    @on(Button.Pressed, "#rn-cancel")
    def cancel(self) -> None:
        if self.cancel_event is not None:
            self.cancel_event.set()

    def set_row(self, name: str, state: str | None = None, fraction: float | None = None) -> None:
        t = self.query_one("#rn-queue", DataTable)
        if name not in t.rows:
            t.add_row(name, "waiting", text_bar(0.0), key=name)
        if state is not None:
            t.update_cell(name, "state", state)
        if fraction is not None:
            t.update_cell(name, "bar", text_bar(fraction))

    def set_failed(self, name: str, why: str) -> None:
        t = self.query_one("#rn-queue", DataTable)
        if name not in t.rows:
            t.add_row(name, "", "", key=name)
        t.update_cell(name, "state", "failed")
        t.update_cell(name, "bar", why[:60])

    @work(thread=True, exclusive=True, group="render", exit_on_error=False)
    def render_queue(self, cancel: threading.Event) -> None:
        from roomconv.jobs.naming import render_output_name
        from roomconv.jobs.render import run_batch

        app = self.app
        status = self.query_one("#rn-status", Static)
        all_bar = self.query_one("#rn-all", ProgressBar)
        try:
            s = self.settings()
            drys, ir, folder = self.inputs()
            workers = min(self.worker_count(), len(drys))
            force = self.query_one("#rn-replace", Checkbox).value
        except Exception as exc:  # noqa: BLE001 - every failure is shown, none ends the app
            self.fail(exc)
            return
        names = [render_output_name(d, ir) for d in drys]
        app.call_from_thread(self.query_one("#rn-queue", DataTable).clear)
        for n in names:
            app.call_from_thread(self.set_row, n, "waiting", 0.0)
        app.call_from_thread(all_bar.update, progress=0.0)
        fractions = dict.fromkeys(names, 0.0)

        def overall() -> None:
            app.call_from_thread(all_bar.update, progress=sum(fractions.values()) / len(names))

        def on_event(kind: str, payload) -> None:
            # Raised here, Cancelled stops the runner: it cancels queued jobs and stops the
            # workers, which remove their unfinished files.
            if cancel.is_set():
                raise Cancelled()
            if kind == "start":
                app.call_from_thread(self.set_row, payload.name, "rendering", 0.0)
            elif kind == "progress":
                name, frac = payload
                fractions[name] = float(frac)
                app.call_from_thread(self.set_row, name, None, float(frac))
                overall()
            elif kind in ("done", "skip"):
                o = payload
                # The overall bar counts files written: a failed one adds nothing to it.
                fractions[o.job.name] = 0.0 if o.status == "failed" else 1.0
                if o.status == "failed":
                    app.call_from_thread(self.set_failed, o.job.name, o.message)
                elif o.status == "skipped":
                    app.call_from_thread(self.set_row, o.job.name, "done earlier", 1.0)
                else:
                    app.call_from_thread(self.set_row, o.job.name, "done", 1.0)
                overall()

        app.call_from_thread(status.update, f"rendering {len(names)} file(s) into {folder}…")
        try:
            start_process_helpers()
            res = run_batch(drys, [ir], folder, s, workers=workers, force=force, on_event=on_event)
        except Cancelled:
            from roomconv.audio import sidecar_path

            for n in names:
                if fractions[n] < 1.0:
                    # A worker may have finished (output, then its sidecar last) between two
                    # polls of the runner: that file is complete and stays.
                    out = folder / n
                    whole = out.exists() and sidecar_path(out, "provenance").exists()
                    app.call_from_thread(
                        self.set_row, n, "done" if whole else "stopped", 1.0 if whole else None
                    )
            app.call_from_thread(status.update, "stopped; unfinished files removed")
            workbench(self).report_from_thread("Render", "queue stopped")
            return
        except Exception as exc:  # noqa: BLE001 - every failure is shown, none ends the app
            self.fail(exc)
            return
        done, skipped, failed = res.count("done"), res.count("skipped"), res.failed
        msg = f"rendered {done} of {len(names)} into {res.out_dir}"
        if skipped:
            msg += f"; {skipped} done earlier (verified)"
        if failed:
            msg += f"; {len(failed)} failed"
            first = failed[0]
            workbench(self).report_from_thread(
                "Render", f"{first.job.name}: {first.message}", error=True
            )
        else:
            workbench(self).report_from_thread("Render", msg)
        for o in res.outcomes:
            for w in (o.report or {}).get("warnings", []):
                workbench(self).report_from_thread("Render", f"{o.job.name}: {w}")
        app.call_from_thread(status.update, msg)

    def fail(self, exc: BaseException) -> None:
        text = error_text(exc)
        self.app.call_from_thread(self.query_one("#rn-status", Static).update, "render failed")
        workbench(self).report_from_thread("Render", text, error=True)

    # --- preview ----------------------------------------------------------------------
    #: Replaces the sound card in tests: ``play(samples, rate)``.
    player = None

    @on(Button.Pressed, "#rn-preview")
    def preview_pressed(self) -> None:
        if not workbench(self).caution_confirmed():
            workbench(self).ask_caution("Preview")
            return
        self.preview()

    def confirm(self) -> None:
        if not workbench(self).caution_confirmed():
            raise InputError("the caution is not confirmed; nothing was played")

    @work(thread=True, exclusive=True, group="preview", exit_on_error=False)
    def preview(self) -> None:
        from roomconv.jobs.render import PREVIEW_ATTENUATION_DB, PREVIEW_S, preview

        try:
            drys, ir, _folder = self.inputs()
            workbench(self).report_from_thread(
                "Preview",
                f"playing {PREVIEW_S:g} s of {drys[0].name}, "
                f"{-PREVIEW_ATTENUATION_DB:g} dB below the render's level",
            )
            res = preview(drys[0], ir, self.settings(), confirm=self.confirm, play=self.player)
        except Exception as exc:  # noqa: BLE001 - every failure is shown, none ends the app
            text = error_text(exc)
            workbench(self).report_from_thread("Preview", text, error=True)
            return
        if res.ok:
            workbench(self).report_from_thread(
                "Preview", f"played {res.played_s:.1f} s, peak {res.peak_dbfs:.1f} dBFS"
            )
        else:
            workbench(self).report_from_thread("Preview", f"{res.message}", error=True)
