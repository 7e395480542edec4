"""Room tab: dimensions, materials per surface, source and receiver; predicted reverberation
times update as you type; synthesize an IR and send it to Analyze or Render."""

from __future__ import annotations

from pathlib import Path

from textual import on, work
from textual.worker import get_current_worker
from textual.app import ComposeResult
from textual.containers import Horizontal, VerticalScroll
from textual.widgets import Button, DataTable, Input, Label, Select, Static

from roomconv.cli_synth import parse_triple
from roomconv.errors import RoomconvError
from roomconv.synth.materials import MATERIALS, OCTAVES
from roomconv.synth.room import SURFACES, RoomModel, eyring, sabine

DEFAULTS = {"left": "plaster", "right": "plaster", "front": "wood-panel", "back": "plaster",
            "floor": "carpet", "ceiling": "acoustic-tile"}


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
                    yield Select([(n, n) for n in names], value=DEFAULTS[s], allow_blank=False,
                                 id=f"mat-{s}")
        yield Static("", id="room-status", classes="status")
        yield DataTable(id="room-prediction")
        with Horizontal(classes="row"):
            yield Label("Stereo")
            yield Select([("mono", "mono"), ("spaced 0.5 m", "spaced:0.5"),
                          ("coincident 90°", "coincident:90")], value="mono",
                         allow_blank=False, id="room-stereo")
            yield Label("Save IR as")
            yield Input("room.wav", id="room-out")
        with Horizontal(classes="row"):
            yield Button("Synthesize", id="room-synth", variant="primary")
            yield Button("→ Analyze", id="room-to-analyze")
            yield Button("→ Render", id="room-to-render")

    def on_mount(self) -> None:
        table = self.query_one("#room-prediction", DataTable)
        table.add_columns("band Hz", *[str(b) for b in OCTAVES])
        self.update_prediction()

    def room(self) -> RoomModel:
        L, W, H = parse_triple(self.query_one("#room-size", Input).value, "size", sep="x")
        surfaces = {s: self.query_one(f"#mat-{s}", Select).value for s in SURFACES}
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
        from roomconv.audio import write_audio, write_provenance
        from roomconv.synth.generate import Receivers, synthesize
        app = self.app
        try:
            room = self.room()
            src = parse_triple(self.query_one("#room-source", Input).value, "source")
            rcv = parse_triple(self.query_one("#room-receiver", Input).value, "receiver")
            out = Path(self.query_one("#room-out", Input).value)
            stereo = self.query_one("#room-stereo", Select).value
            res = synthesize(room, src, rcv, receivers=Receivers.parse(stereo), seed=0)
            write_audio(out, res.ir, res.rate, force=True)
            write_provenance(out, [], {"room": [room.length, room.width, room.height],
                                       "surfaces": room.surfaces, "source": list(src),
                                       "receiver": list(rcv), "stereo": stereo},
                             force=True)
        except (ValueError, RoomconvError) as exc:
            app.call_from_thread(app.notify, str(exc), severity="error", title="Room")
            return
        if get_current_worker().is_cancelled:
            return
        app.last_synth = out
        app.call_from_thread(self.query_one("#room-status", Static).update,
                             f"wrote {out} ({res.ir.shape[1]} ch, {res.ir.shape[0] / res.rate:.2f} s)"
                             f"; {res.image_count} image sources")
        app.call_from_thread(app.notify, f"synthesized {out}", title="Room")

    @on(Button.Pressed, "#room-to-analyze")
    def to_analyze(self) -> None:
        out = self.query_one("#room-out", Input).value
        self.app.send_to("analyze", out)

    @on(Button.Pressed, "#room-to-render")
    def to_render(self) -> None:
        out = self.query_one("#room-out", Input).value
        self.app.send_to("render", out)
