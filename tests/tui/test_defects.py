"""Each defect seen in the workbench, driven through Textual's Pilot at 80×24."""

import subprocess
import sys

import numpy as np
import pytest
import soundfile as sf
from textual.widgets import Button, Checkbox, Input, Select, Tabs

from tests.tui.pilot_helpers import (
    FS,
    confirm_caution,
    decaying_ir,
    dry_clip,
    press,
    quick_simulated_measure,
    settle,
    status,
    text_of,
)
from tui.app import HELP, RoomconvApp

pytestmark = pytest.mark.timeout(120)
SIZE = (80, 24)


async def test_preview_without_an_output_device_is_a_message(tmp_path):
    dry = dry_clip(tmp_path / "dry.wav")
    ir = decaying_ir(tmp_path / "ir.wav")
    played = []

    def no_device(samples, rate):
        # What PortAudio says when there is no default output device.
        raise OSError("Error querying device -1")

    app = RoomconvApp()
    async with app.run_test(size=SIZE) as pilot:
        await pilot.press("r")
        pane = app.query_one("RenderPane")
        pane.player = no_device
        app.query_one("#rn-dry").value = str(dry)
        app.query_one("#rn-ir").value = str(ir)
        # Caution not confirmed: the full text is shown and nothing is played.
        await press(app, pilot, "#rn-preview")
        await settle(app, pilot)
        assert app.screen.__class__.__name__ == "CautionScreen"
        await press(app, pilot, "#caution-ok")
        assert app.query_one("#caution-ack").value is True
        await press(app, pilot, "#rn-preview")
        await settle(app, pilot)
        assert app.is_running and played == []
        assert "Error querying device -1" in status(app)


async def test_preview_plays_capped_through_the_safe_path(tmp_path):
    dry = dry_clip(tmp_path / "dry.wav")
    ir = decaying_ir(tmp_path / "ir.wav")
    sent = []
    app = RoomconvApp()
    async with app.run_test(size=SIZE) as pilot:
        await pilot.press("r")
        app.query_one("RenderPane").player = lambda y, rate: sent.append((y, rate))
        app.query_one("#rn-dry").value = str(dry)
        app.query_one("#rn-ir").value = str(ir)
        app.query_one("#rn-gain").value = "40"  # far too loud on purpose
        confirm_caution(app)
        await press(app, pilot, "#rn-preview")
        await settle(app, pilot)
        y, rate = sent[0]
        # The cap: -1 dBFS = 10**(-1/20) of full scale (closed form).
        assert rate == FS and np.max(np.abs(y)) <= 10 ** (-1 / 20) + 1e-6
        assert y[0] == 0.0  # the fade-in starts from silence
        assert "played" in status(app)


@pytest.mark.parametrize("field,value", [("#ms-ref", "x"), ("#ms-duration", "five")])
async def test_non_numbers_in_fields_do_not_end_the_session(tmp_path, field, value):
    room = decaying_ir(tmp_path / "room.wav")
    app = RoomconvApp()
    async with app.run_test(size=SIZE) as pilot:
        app.query_one("#ms-sim").value = str(room)
        app.query_one("#ms-folder").value = str(tmp_path / "s")
        app.query_one(field).value = value
        await press(app, pilot, "#ms-run")
        await settle(app, pilot)
        assert app.is_running and app.return_code is None
        assert f"'{value}'" in status(app) and "✖" in status(app)
        assert text_of(app, "#ms-stage") == "failed"
        assert not (tmp_path / "s" / "P1.wav").exists()


async def test_a_44100_hz_simulated_room_is_measured_at_its_own_rate(tmp_path):
    room = decaying_ir(tmp_path / "room.wav", rate=44100)
    app = RoomconvApp()
    async with app.run_test(size=SIZE) as pilot:
        await quick_simulated_measure(app, pilot, room, tmp_path / "s")
        # The written file's header (libsndfile, an outside reader) says 44.1 kHz.
        assert sf.info(str(tmp_path / "s" / "P1.wav")).samplerate == 44100
        assert "44100 Hz" in text_of(app, "#ms-status")
        # The input meter followed the measurement itself (no level check was run).
        assert "dBFS" in text_of(app, "#ms-meter") and "100 %" in text_of(app, "#ms-meter")
        # A rate chosen on purpose that differs from the room's is refused, not converted.
        app.query_one("#ms-rate").value = "48000"
        await press(app, pilot, "#ms-run")
        await settle(app, pilot)
        assert "44100 Hz" in status(app) and "✖" in status(app)
        assert len(app.session) == 1


async def test_measuring_a_taken_name_picks_a_free_one_and_says_so(tmp_path):
    room = decaying_ir(tmp_path / "room.wav")
    folder = tmp_path / "s"
    folder.mkdir()
    (folder / "P1.wav").write_bytes(b"earlier session")
    app = RoomconvApp()
    async with app.run_test(size=SIZE) as pilot:
        await quick_simulated_measure(app, pilot, room, folder)
        assert (folder / "P1.wav").read_bytes() == b"earlier session"
        assert (folder / "P1-2.wav").exists()
        assert app.session[0]["name"] == "P1-2"
        assert "P1 is taken; measuring as P1-2" in status(app)


@pytest.mark.parametrize("focus", ["#ms-run", "#ms-positions"])
async def test_tab_keys_work_with_the_focus_inside_a_tab(focus):
    app = RoomconvApp()
    async with app.run_test(size=SIZE) as pilot:
        widget = app.query_one(focus)
        if widget.focusable:
            widget.focus()
            await pilot.pause()
        for key, tab in (("r", "render"), ("o", "room"), ("a", "analyze"), ("m", "measure")):
            await pilot.press(key)
            await pilot.pause()
            await pilot.pause()
            assert app.query_one("#tabs").active == tab
            pane = app.query_one(f"#{tab}")
            assert app.focused is not None and pane in app.focused.ancestors
        # From a tick box inside Render, too.
        await pilot.press("r")
        await pilot.pause()
        app.query_one("#rn-replace").focus()
        await pilot.pause()
        await pilot.press("o")
        await pilot.pause()
        assert app.query_one("#tabs").active == "room"


async def test_send_to_moves_the_focus_with_the_tab(tmp_path):
    app = RoomconvApp()
    async with app.run_test(size=SIZE) as pilot:
        await pilot.press("o")
        app.query_one("#room-out").value = str(tmp_path / "room.wav")
        app.query_one("#room-to-render").focus()
        await pilot.pause()
        await press(app, pilot, "#room-to-render")
        await pilot.pause()
        assert app.query_one("#tabs").active == "render"
        assert app.query_one("#render") in app.focused.ancestors
        await pilot.press("m")  # the letter keys still work from there
        assert app.query_one("#tabs").active == "measure"


async def test_no_invisible_tab_stops_and_letters_type_into_fields():
    app = RoomconvApp()
    async with app.run_test(size=SIZE) as pilot:
        for key in ("m", "r"):
            await pilot.press(key)
            await pilot.pause()
            # Every stop of the focus chain is a widget one types into or operates.
            kinds = (Input, Button, Select, Checkbox, Tabs)
            assert [w for w in app.screen.focus_chain if not isinstance(w, kinds)] == []
        app.query_one("#rn-out").focus()
        await pilot.press("end", "m", "a")
        assert app.query_one("#rn-out").value == "renderedma"
        assert app.query_one("#tabs").active == "render"
        await pilot.press("escape", "m")  # leave the field; letters switch tabs again
        assert app.query_one("#tabs").active == "measure"


async def test_the_status_line_keeps_the_last_error(tmp_path):
    app = RoomconvApp()
    async with app.run_test(size=SIZE) as pilot:
        await pilot.press("r")
        app.query_one("#rn-dry").value = str(tmp_path / "missing.wav")
        app.query_one("#rn-ir").value = str(tmp_path / "missing-ir.wav")
        await press(app, pilot, "#rn-run")
        await settle(app, pilot)
        first = status(app)
        assert "✖" in first and "missing" in first
        await pilot.press("x")  # a later message does not hide the error
        assert "nothing is running" in status(app) and "last error" in status(app)
        assert "missing" in status(app)


async def test_a_failed_render_job_shows_as_failed(tmp_path):
    good = dry_clip(tmp_path / "good.wav")
    ir = decaying_ir(tmp_path / "ir.wav", seconds=0.3)
    app = RoomconvApp()
    async with app.run_test(size=SIZE) as pilot:
        await pilot.press("r")
        app.query_one("#rn-dry").value = f"{good} {tmp_path / 'gone.wav'}"
        app.query_one("#rn-ir").value = str(ir)
        app.query_one("#rn-out").value = str(tmp_path / "wet")
        await press(app, pilot, "#rn-run")
        await settle(app, pilot)
        table = app.query_one("#rn-queue")
        rows = {table.get_row_at(i)[0]: table.get_row_at(i) for i in range(table.row_count)}
        assert rows["good__ir.wav"][1] == "done" and "100 %" in rows["good__ir.wav"][2]
        assert rows["gone__ir.wav"][1] == "failed"
        assert "100 %" not in str(rows["gone__ir.wav"][2])
        assert "1 failed" in text_of(app, "#rn-status") and "✖" in status(app)
        assert app.query_one("#rn-all").percentage == 0.5  # one of two files written
        assert (tmp_path / "wet" / "good__ir.wav").exists()
        assert not (tmp_path / "wet" / "gone__ir.wav").exists()


async def test_help_overlay_lines_fit_at_80x24():
    app = RoomconvApp()
    async with app.run_test(size=SIZE) as pilot:
        await pilot.press("question_mark")
        await pilot.pause()
        text = app.screen.query_one("#help-text")
        longest = max(
            len(line) for line in HELP.replace("[b]", "").replace("[/b]", "").splitlines()
        )
        # Every line is shorter than the room the overlay gives it: no wrap mid-sentence.
        assert longest <= text.content_region.width
        assert text.region.right <= SIZE[0]
        await pilot.press("escape")
        assert app.screen.__class__.__name__ != "HelpScreen"


async def test_the_caution_tick_needs_the_full_text_first():
    app = RoomconvApp()
    async with app.run_test(size=SIZE) as pilot:
        app.query_one("#caution-ack").value = True
        await pilot.pause()
        assert app.query_one("#caution-ack").value is False
        assert app.screen.__class__.__name__ == "CautionScreen"
        assert "CAUTION - HEARING AND EQUIPMENT" in str(
            app.screen.query_one("#caution-text").render()
        )
        await press(app, pilot, "#caution-close")
        assert app.query_one("#caution-ack").value is False
        await pilot.press("c")
        await press(app, pilot, "#caution-ok")
        assert app.query_one("#caution-ack").value is True


async def test_a_sound_card_measurement_waits_for_the_caution(tmp_path):
    app = RoomconvApp()
    async with app.run_test(size=SIZE) as pilot:
        app.query_one("#ms-folder").value = str(tmp_path / "s")
        await press(app, pilot, "#ms-run")  # no simulated room: a sound card would play
        await settle(app, pilot)
        assert app.screen.__class__.__name__ == "CautionScreen"
        assert "nothing was played" in status(app)
        assert not (tmp_path / "s").exists()


def test_tui_with_a_missing_study_file_exits_2_naming_it(tmp_path):
    missing = tmp_path / "nope.toml"
    r = subprocess.run(
        [sys.executable, "-m", "roomconv", "tui", str(missing)],
        stdin=subprocess.DEVNULL,
        capture_output=True,
        text=True,
        timeout=60,
    )
    assert r.returncode == 2 and str(missing) in r.stderr and "Traceback" not in r.stderr


async def test_stopping_the_render_queue_leaves_no_partial_file(tmp_path):
    drys = [dry_clip(tmp_path / f"take{k}.wav", seconds=20.0, seed=k) for k in range(3)]
    ir = decaying_ir(tmp_path / "ir.wav", seconds=1.0)
    app = RoomconvApp()
    async with app.run_test(size=SIZE) as pilot:
        await pilot.press("r")
        app.query_one("#rn-dry").value = " ".join(str(d) for d in drys)
        app.query_one("#rn-ir").value = str(ir)
        app.query_one("#rn-out").value = str(tmp_path / "wet")
        app.query_one("#rn-workers").value = "1"
        await press(app, pilot, "#rn-run")
        await press(app, pilot, "#rn-cancel")
        await settle(app, pilot)
        assert app.is_running
        assert "stopped" in text_of(app, "#rn-status")
        table = app.query_one("#rn-queue")
        states = [table.get_row_at(i)[1] for i in range(table.row_count)]
        # With one worker, at least the last of three files cannot have finished.
        assert states[-1] == "stopped" and set(states) <= {"done", "stopped"}
        wet = tmp_path / "wet"
        left = sorted(p.name for p in wet.iterdir()) if wet.exists() else []
        # Whatever is left is whole: each output with its sidecar, the full convolution
        # length N + M - 1 (closed form), and no temporary file.
        assert not [n for n in left if n.endswith(".tmp")]
        for k in range(len(drys)):
            out = wet / f"take{k}__ir.wav"
            if out.exists():
                assert states[k] == "done"
                assert (wet / f"take{k}__ir.provenance.json").exists()
                assert sf.info(str(out)).frames == 20 * FS + FS - 1
            else:
                assert states[k] == "stopped"


async def test_an_uncaught_worker_error_in_any_tab_is_shown_not_fatal():
    app = RoomconvApp()
    async with app.run_test(size=SIZE) as pilot:
        await pilot.press("a")
        # An unclosed quote: shlex raises ValueError, which the tab itself may not expect.
        app.query_one("#an-files").value = '"unclosed.wav'
        await press(app, pilot, "#an-run")
        await settle(app, pilot)
        await pilot.pause()
        assert app.is_running and app.return_code is None
        assert "✖" in status(app)
