"""Room tab: dimensions, materials per surface, source and receiver; predicted reverberation
times update as you type; synthesize an IR and send it to Analyze or Render."""

from __future__ import annotations

from pathlib import Path

from textual import on, work
from textual.app import ComposeResult
from textual.containers import Horizontal, VerticalScroll
from textual.widgets import Button, Checkbox, DataTable, Input, Label, Select, Static
from textual.worker import get_current_worker

from roomconv.errors import RoomconvError
from roomconv.jobs.synth import parse_triple, room_size
from roomconv.synth.materials import MATERIALS, OCTAVES
from roomconv.synth.room import SURFACES, RoomModel, eyring, sabine
from tui.screens import workbench

DEFAULTS = {
    "left": "plaster",
    "right": "plaster",
    "front": "wood-panel",
    "back": "plaster",
    "floor": "carpet",
    "ceiling": "acoustic-tile",
}


class RoomPane(VerticalScroll):
    def compose(self) -> ComposeResult:
        names = sorted(MATERIALS)
        with Horizontal(classes="row"):
            yield Label("Size L×W×H m")
            yield Input("12x8x3.5", id="room-size")
        with Horizontal(classes="row"):
            yield Label("Source X,Y,Z")
            yield Input("3,2,1.5", id="room-source")
            yield Label("Receiver X,Y,Z")
            yield Input("9,5,1.2", id="room-receiver")
        for a, b in (("left", "right"), ("front", "back"), ("floor", "ceiling")):
            with Horizontal(classes="row"):
                for s in (a, b):
                    yield Label(f"{s:>7}")
                    yield Select(
                        [(n, n) for n in names], value=DEFAULTS[s], allow_blank=False, id=f"mat-{s}"
                    )
        yield Static("", id="room-status", classes="status")
        yield DataTable(id="room-prediction")
        with Horizontal(classes="row"):
            yield Label("Stereo")
            yield Select(
                [
                    ("mono", "mono"),
                    ("spaced 0.5 m", "spaced:0.5"),
                    ("coincident 90°", "coincident:90"),
                ],
                value="mono",
                allow_blank=False,
                id="room-stereo",
            )
            yield Label("Save IR as")
            yield Input("room.wav", id="room-out")
            yield Checkbox("Replace an existing file", id="room-replace")
        with Horizontal(classes="row"):
            yield Button("Synthesize", id="room-synth", variant="primary")
            yield Button("→ Analyze", id="room-to-analyze")
            yield Button("→ Render", id="room-to-render")

    def on_mount(self) -> None:
        table = self.query_one("#room-prediction", DataTable)
        table.add_columns("band Hz", *[str(b) for b in OCTAVES])
        self.update_prediction()

    def room(self) -> RoomModel:
        L, W, H = room_size(self.query_one("#room-size", Input).value)
        surfaces = {s: str(self.query_one(f"#mat-{s}", Select).value) for s in SURFACES}
        return RoomModel(L, W, H, surfaces)

    @on(Input.Changed)
    @on(Select.Changed)
    def update_prediction(self, _event=None) -> None:
        status = self.query_one("#room-status", Static)
        table = self.query_one("#room-prediction", DataTable)
        try:
            room = self.room()
        except (ValueError, RoomconvError) as exc:
            status.update(f"cannot predict: {exc}")
            return
        sab, eyr = sabine(room), eyring(room)
        table.clear()
        table.add_row("Sabine s", *[f"{sab[b]:.2f}" for b in OCTAVES])
        table.add_row("Eyring s", *[f"{eyr[b]:.2f}" for b in OCTAVES])
        status.update(f"V = {room.volume:.0f} m³, S = {room.total_area:.0f} m²")

    @on(Button.Pressed, "#room-synth")
    def synth_pressed(self) -> None:
        self.synthesize()

    @work(thread=True, exclusive=True, group="room")
    def synthesize(self) -> None:
        from roomconv.jobs.synth import synthesize_room

        app = self.app
        try:
            room = self.room()
            src = parse_triple(self.query_one("#room-source", Input).value, "source position")
            rcv = parse_triple(self.query_one("#room-receiver", Input).value, "receiver position")
            out = Path(self.query_one("#room-out", Input).value)
            stereo = str(self.query_one("#room-stereo", Select).value)
            res = synthesize_room(
                out,
                room,
                source_m=src,
                receiver_m=rcv,
                stereo=None if stereo == "mono" else stereo,
                seed=0,
                force=self.query_one("#room-replace", Checkbox).value,
            )
        except RoomconvError as exc:
            app.call_from_thread(app.notify, str(exc), severity="error", title="Room")
            return
        if get_current_worker().is_cancelled:
            return
        ir, rate = res.ir, res.result.rate
        app.call_from_thread(
            self.query_one("#room-status", Static).update,
            f"wrote {out} ({ir.shape[1]} ch, {ir.shape[0] / rate:.2f} s)"
            f"; {res.result.image_count} image sources",
        )
        app.call_from_thread(app.notify, f"synthesized {out}", title="Room")

    @on(Button.Pressed, "#room-to-analyze")
    def to_analyze(self) -> None:
        out = self.query_one("#room-out", Input).value
        workbench(self).send_to("analyze", out)

    @on(Button.Pressed, "#room-to-render")
    def to_render(self) -> None:
        out = self.query_one("#room-out", Input).value
        workbench(self).send_to("render", out)
