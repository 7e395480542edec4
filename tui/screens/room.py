"""Room tab: a shoebox room, its materials, absorber patches and air; a to-scale plan with
the source and receiver and the predicted reverberation times, both updated as you type;
synthesize a response and send it to Analyze or Render.

Layout: the primary action and its result on top; below, the settings (scrolling) beside
the plan; the prediction table at the bottom. The right-hand column holds the plan alone
so that a treatment-planning panel can sit under it later.
"""

from __future__ import annotations

from pathlib import Path

from textual import on, work
from textual.app import ComposeResult
from textual.containers import Horizontal, Vertical, VerticalScroll
from textual.widgets import Button, Checkbox, DataTable, Input, Label, Select, Static
from textual.worker import get_current_worker

from roomconv import validate
from roomconv.errors import RoomconvError
from roomconv.jobs.synth import (
    build_room,
    parse_absorber,
    parse_band_values,
    parse_patch,
    parse_triple,
    receivers_of,
    room_size,
)
from roomconv.synth.materials import MATERIALS, OCTAVES
from roomconv.synth.room import SURFACES, RoomModel, eyring, sabine
from tui.panels import TreatmentPanel
from tui.plots import RoomPlan
from tui.screens import error_text, workbench

DEFAULTS = {
    "left": "plaster",
    "right": "plaster",
    "front": "wood-panel",
    "back": "plaster",
    "floor": "carpet",
    "ceiling": "acoustic-tile",
}
#: Sample rates offered for the synthesized response, Hz.
RATES = (44100, 48000, 88200, 96000)


class RoomPane(Vertical):
    #: The last synthesis' result line, kept under the prediction.
    _written = ""
    #: The material names the surface choices offer.
    _names: list[str] = sorted(MATERIALS)

    DEFAULT_CSS = """
    RoomPane { height: 1fr; }
    RoomPane #room-actions { height: auto; margin: 0; }
    RoomPane #room-actions Button { margin: 0 1 0 0; }
    RoomPane #room-status { height: auto; max-height: 3; margin: 0; }
    RoomPane #room-body { height: 1fr; min-height: 10; }
    RoomPane #room-controls { width: 48%; max-width: 64; min-width: 36; }
    RoomPane #room-side { width: 1fr; }
    RoomPane #room-treatment-box { height: 1fr; min-height: 6; }
    RoomPane .heading { text-style: bold; height: auto; }
    RoomPane .field { height: 1; margin: 0; }
    RoomPane .field Label { width: 14; padding: 0 1 0 0; }
    RoomPane .field Input { width: 1fr; }
    RoomPane .field Select { width: 1fr; }
    RoomPane .field Checkbox { width: auto; height: 1; border: none; padding: 0; }
    RoomPane #room-prediction { height: auto; max-height: 4; margin: 0; }
    """

    def compose(self) -> ComposeResult:
        names = sorted(MATERIALS)
        with Horizontal(id="room-actions"):
            yield Button("Synthesize", id="room-synth", variant="primary", compact=True)
            yield Button("→ Analyze", id="room-to-analyze", compact=True)
            yield Button("→ Render", id="room-to-render", compact=True)
        yield Static("", id="room-status", classes="status")
        with Horizontal(id="room-body"):
            with VerticalScroll(id="room-controls", can_focus=False):
                yield from _field("Size L×W×H m", Input("12x8x3.5", id="room-size", compact=True))
                yield from _field("Source X,Y,Z", Input("3,2,1.5", id="room-source", compact=True))
                yield from _field(
                    "Receiver X,Y,Z", Input("9,5,1.2", id="room-receiver", compact=True)
                )
                for s in SURFACES:
                    yield from _field(
                        s.capitalize(),
                        Select(
                            [(n, n) for n in names],
                            value=DEFAULTS[s],
                            allow_blank=False,
                            id=f"mat-{s}",
                            compact=True,
                        ),
                    )
                yield from _field(
                    "Patches",
                    Input(
                        placeholder="floor:audience:40, back:curtain:12",
                        id="room-patches",
                        compact=True,
                        tooltip="part of a surface covered by another material: "
                        "SURFACE:MATERIAL:AREA_M2, comma-separated",
                    ),
                )
                yield from _field(
                    "Absorbers",
                    Input(
                        placeholder="audience:30 (material:m², free-standing)",
                        id="room-absorbers",
                        compact=True,
                    ),
                )
                yield from _field(
                    "Materials file",
                    Input(
                        placeholder="blank: built-in only; or extra.toml / .json",
                        id="room-materials-file",
                        compact=True,
                    ),
                )
                yield from _field("Air °C", Input("20", id="room-temp", compact=True))
                yield from _field("Humidity %", Input("50", id="room-humidity", compact=True))
                yield from _field(
                    "Sample rate",
                    Select(
                        [(f"{r} Hz", r) for r in RATES],
                        value=48000,
                        allow_blank=False,
                        id="room-rate",
                        compact=True,
                    ),
                )
                yield from _field(
                    "Tail from",
                    Select(
                        [("Eyring", "eyring"), ("Sabine", "sabine")],
                        value="eyring",
                        allow_blank=False,
                        id="room-formula",
                        compact=True,
                    ),
                )
                yield from _field(
                    "Tail T s",
                    Input(
                        placeholder="blank: predicted; or 500:1.8,1000:1.6",
                        id="room-rt60",
                        compact=True,
                    ),
                )
                yield from _field(
                    "Length s",
                    Input(placeholder="blank: automatic", id="room-length", compact=True),
                )
                yield from _field(
                    "Peak dBFS",
                    Input(placeholder="blank: as computed", id="room-peak", compact=True),
                )
                yield from _field("Noise seed", Input("0", id="room-seed", compact=True))
                yield from _field(
                    "Stereo",
                    Select(
                        [
                            ("mono", "mono"),
                            ("spaced 0.5 m", "spaced:0.5"),
                            ("coincident 90°", "coincident:90"),
                        ],
                        value="mono",
                        allow_blank=False,
                        id="room-stereo",
                        compact=True,
                    ),
                )
                yield from _field("Save IR as", Input("room.wav", id="room-out", compact=True))
                with Horizontal(classes="field"):
                    yield Label("")
                    yield Checkbox("Replace an existing file", id="room-replace", compact=True)
            with Vertical(id="room-side"):
                yield RoomPlan(id="room-plan")
                with VerticalScroll(id="room-treatment-box"):
                    yield Static(
                        "Treatment planning: measured decay times from the Analyze tab, "
                        "this room's size",
                        classes="heading",
                    )
                    yield TreatmentPanel(id="room-treatment")
        yield DataTable(id="room-prediction", cursor_type="none", zebra_stripes=True)

    def on_mount(self) -> None:
        table = self.query_one("#room-prediction", DataTable)
        table.can_focus = False
        table.add_columns("band Hz", *[str(b) for b in OCTAVES])
        self.update_prediction()

    # --- reading the fields ------------------------------------------------------------
    def value(self, wid: str) -> str:
        return self.query_one(f"#{wid}", Input).value.strip()

    def materials_file(self) -> Path | None:
        text = self.value("room-materials-file")
        return Path(text) if text else None

    def room(self) -> RoomModel:
        """The room the fields describe; raises an InputError naming the field at fault."""
        size = room_size(self.value("room-size"))
        patches = tuple(_items(self.value("room-patches"), "Patches", parse_patch))
        absorbers = tuple(_items(self.value("room-absorbers"), "Absorbers", parse_absorber))
        temp = validate.in_range(
            _number(self.value("room-temp"), "Air °C"), "air temperature", -20.0, 50.0, unit="°C"
        )
        hum = validate.in_range(
            _number(self.value("room-humidity"), "Humidity %"),
            "relative humidity",
            0.0,
            100.0,
            unit="%",
            lo_open=True,
        )
        surfaces = {s: str(self.query_one(f"#mat-{s}", Select).value) for s in SURFACES}
        return build_room(
            size,
            materials=surfaces,
            patches=patches,
            absorbers=absorbers,
            temperature_c=temp,
            humidity_pct=hum,
            materials_file=self.materials_file(),
        )

    def positions(self):
        src = parse_triple(self.value("room-source"), "source position")
        rcv = parse_triple(self.value("room-receiver"), "receiver position")
        return src, rcv

    # --- as you type -------------------------------------------------------------------
    @on(Input.Changed, "#room-materials-file")
    def materials_file_changed(self, _event=None) -> None:
        """Offer the file's materials on every surface once it can be read; back to the
        built-in ones when the field is cleared (a surface using a material that went away
        returns to its default)."""
        from roomconv.jobs.synth import materials_table

        path = self.materials_file()
        try:
            names = sorted(materials_table(materials_file=path)) if path else sorted(MATERIALS)
        except Exception:  # half-typed names are normal; the prediction line says why
            names = sorted(MATERIALS)
        if names == self._names:
            return
        self._names = names
        for surface in SURFACES:
            box = self.query_one(f"#mat-{surface}", Select)
            keep = box.value if box.value in names else DEFAULTS[surface]
            with self.prevent(Select.Changed):
                box.set_options([(n, n) for n in names])
                box.value = keep

    @on(Input.Changed)
    @on(Select.Changed)
    def update_prediction(self, _event=None) -> None:
        status = self.query_one("#room-status", Static)
        table = self.query_one("#room-prediction", DataTable)
        plan = self.query_one("#room-plan", RoomPlan)
        try:
            room = self.room()
            sab, eyr = sabine(room), eyring(room)
        except Exception as exc:  # nothing typed may end the session
            status.update(f"cannot predict: {exc}")
            try:
                L, W, _H = room_size(self.value("room-size"))
            except (ValueError, RoomconvError):
                plan.problem(f"no plan: {exc}")
                return
            self._draw_plan(plan, L, W)
            return
        self.query_one(TreatmentPanel).set_room(dims_m=(room.length, room.width, room.height))
        table.clear()
        table.add_row("Sabine s", *[f"{sab[b]:.2f}" for b in OCTAVES])
        table.add_row("Eyring s", *[f"{eyr[b]:.2f}" for b in OCTAVES])
        note = self._draw_plan(plan, room.length, room.width)
        text = f"V = {room.volume:.0f} m³, S = {room.total_area:.0f} m²"
        if note:
            text += f" · {note}"
        if self._written:
            text += f"\n{self._written}"
        status.update(text)

    def _draw_plan(self, plan: RoomPlan, L: float, W: float) -> str:
        """Redraw the plan; returns a note when a position cannot be read."""
        walls = {s: str(self.query_one(f"#mat-{s}", Select).value) for s in SURFACES}
        note = ""
        try:
            src = parse_triple(self.value("room-source"), "source position")[:2]
        except (ValueError, RoomconvError) as exc:
            src, note = None, str(exc)
        try:
            rcv = [parse_triple(self.value("room-receiver"), "receiver position")[:2]]
        except (ValueError, RoomconvError) as exc:
            rcv, note = [], str(exc)
        plan.show(L, W, src, rcv, walls)
        return note

    # --- synthesis ---------------------------------------------------------------------
    @on(Button.Pressed, "#room-synth")
    def synth_pressed(self) -> None:
        self.synthesize()

    def report_error(self, title: str, exc: BaseException) -> None:
        """Show a failed job's reason; the one place the Room tab reports errors from."""
        text = error_text(exc)
        # The app's status line keeps the last error (and shows it as a notice too).
        workbench(self).report(title, text, error=True)
        self.query_one("#room-status", Static).update(f"{title} failed: {text}")

    def _settings(self) -> dict:
        """Every synthesis setting from the fields; raises an InputError naming the field."""
        stereo = str(self.query_one("#room-stereo", Select).value)
        stereo_value = None if stereo == "mono" else stereo
        rate = int(self.query_one("#room-rate", Select).value)  # type: ignore[arg-type]
        length_text = self.value("room-length")
        length = (
            validate.positive(_number(length_text, "Length s"), "response length", unit="s")
            if length_text
            else None
        )
        peak_text = self.value("room-peak")
        peak = (
            validate.in_range(
                _number(peak_text, "Peak dBFS"), "peak level", -100.0, 0.0, unit="dBFS"
            )
            if peak_text
            else None
        )
        seed = validate.count(self.value("room-seed") or "0", "noise seed", 0, 2**32 - 1)
        rt_text = self.value("room-rt60")
        out = self.value("room-out")
        if not out:
            raise _field_error("Save IR as", "type a file name for the response (e.g. room.wav)")
        return {
            "stereo": stereo_value,
            "rate_hz": rate,
            "length_s": length,
            "peak_dbfs": peak,
            "seed": seed,
            "rt60_s": parse_band_values(rt_text, "tail reverberation time") if rt_text else None,
            "prediction": str(self.query_one("#room-formula", Select).value),
            "output": Path(out),
        }

    @work(thread=True, exclusive=True, group="room", exit_on_error=False)
    def synthesize(self) -> None:
        from roomconv.audio import sidecar_path
        from roomconv.jobs.naming import unused_name
        from roomconv.jobs.synth import synthesize_room

        app = self.app
        try:
            room = self.room()
            src, rcv = self.positions()
            s = self._settings()
            receivers_of(s["stereo"])
            wanted = s.pop("output")
            replace = self.query_one("#room-replace", Checkbox).value
            out = (
                wanted
                if replace
                else unused_name(wanted, lambda p: (sidecar_path(p, "provenance"),))
            )
            app.call_from_thread(
                self.query_one("#room-status", Static).update, f"synthesizing {out}…"
            )
            res = synthesize_room(
                out,
                room,
                source_m=src,
                receiver_m=rcv,
                materials_file=self.materials_file(),
                force=replace,
                settings={"front_end": "workbench"},
                **s,
            )
        except Exception as exc:  # every failure is shown; none may end the session
            app.call_from_thread(self.report_error, "Synthesize", exc)
            return
        if get_current_worker().is_cancelled:
            return
        app.call_from_thread(self._synthesized, res, wanted)

    def _synthesized(self, res, wanted: Path) -> None:
        ir, rate = res.ir, res.result.rate
        out = res.output
        renamed = out != wanted
        self._written = (
            f"wrote {out} ({ir.shape[1]} ch, {ir.shape[0] / rate:.2f} s, {rate} Hz); "
            f"{res.result.image_count} image sources"
            + (f" · {wanted.name} exists, so this one is {out.name}" if renamed else "")
        )
        if renamed:
            # The hand-off buttons send the file just written.
            with self.prevent(Input.Changed):
                self.query_one("#room-out", Input).value = str(out)
        self.update_prediction()
        self.app.notify(
            f"synthesized {out}"
            + (f" ({wanted.name} exists; nothing replaced)" if renamed else ""),
            title="Room",
        )

    @on(Button.Pressed, "#room-to-analyze")
    def to_analyze(self) -> None:
        workbench(self).send_to("analyze", self.value("room-out"))

    @on(Button.Pressed, "#room-to-render")
    def to_render(self) -> None:
        workbench(self).send_to("render", self.value("room-out"))


def _field(label: str, widget) -> ComposeResult:
    with Horizontal(classes="field"):
        yield Label(label)
        yield widget


def _field_error(field: str, text: str):
    from roomconv.errors import InputError

    return InputError(f"{field}: {text}")


def _number(text: str, field: str) -> float:
    try:
        return float(text)
    except ValueError:
        raise _field_error(field, f"'{text}' is not a number") from None


def _items(text: str, field: str, parse) -> list:
    """Comma-separated items of a field, each parsed; an error names the field."""
    out = []
    for item in (t.strip() for t in text.split(",")):
        if not item:
            continue
        try:
            out.append(parse(item))
        except (ValueError, RoomconvError) as exc:
            raise _field_error(field, str(exc)) from None
    return out
