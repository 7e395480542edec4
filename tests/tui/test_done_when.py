"""The whole path a new user takes, at 80×24: measure three positions (simulated room),
analyze them, synthesize a room, render a track, save the session, quit, reopen it and
continue. Nothing crashes and no file is lost or replaced without asking."""

import pytest
import soundfile as sf

from roomconv.study import load_study
from tests.tui.pilot_helpers import (
    decaying_ir,
    dry_clip,
    press,
    quick_simulated_measure,
    settle,
    status,
)
from tui.app import RoomconvApp

pytestmark = [pytest.mark.timeout(300), pytest.mark.slow]
SIZE = (80, 24)


async def test_measure_analyze_synthesize_render_save_reopen_continue(tmp_path):
    room = decaying_ir(tmp_path / "room.wav", T=0.4, seconds=0.8)
    dry = dry_clip(tmp_path / "voice.wav", seconds=0.5)
    folder = tmp_path / "session"
    app = RoomconvApp()
    async with app.run_test(size=SIZE) as pilot:
        for _ in range(3):
            await quick_simulated_measure(app, pilot, room, folder)
        assert [p["name"] for p in app.session] == ["P1", "P2", "P3"]
        app.query_one("#ms-notes").value = "doors closed, audience seating empty"

        await pilot.press("a")
        await press(app, pilot, "#an-session")
        await press(app, pilot, "#an-run")
        await settle(app, pilot)
        assert app.query_one("#an-table").row_count > 0

        await pilot.press("o")
        app.query_one("#room-size").value = "6x4x3"
        app.query_one("#room-source").value = "1.5,1.5,1.5"
        app.query_one("#room-receiver").value = "4.5,2.5,1.2"
        app.query_one("#room-out").value = str(tmp_path / "synth.wav")
        await press(app, pilot, "#room-synth")
        await settle(app, pilot)
        assert (tmp_path / "synth.wav").exists()
        await press(app, pilot, "#room-to-render")
        await pilot.pause()
        assert app.query_one("#tabs").active == "render"

        app.query_one("#rn-dry").value = str(dry)
        app.query_one("#rn-out").value = str(tmp_path / "wet")
        app.query_one("#rn-mix").value = "0.4"
        await press(app, pilot, "#rn-run")
        await settle(app, pilot)
        assert (tmp_path / "wet" / "voice__synth.wav").exists()

        await pilot.press("s")
        await pilot.pause()
        saved = folder / "session.toml"
        assert saved.exists() and "session saved" in status(app)
        await pilot.press("q")
    assert app.return_code == 0

    st = load_study(saved)
    assert [r.receiver for r in st.responses] == ["P1", "P2", "P3"]
    assert st.notes == "doors closed, audience seating empty"
    wet_before = (tmp_path / "wet" / "voice__synth.wav").read_bytes()

    app = RoomconvApp(study=saved)
    async with app.run_test(size=SIZE) as pilot:
        await pilot.pause()
        assert [p["name"] for p in app.session] == ["P1", "P2", "P3"]
        assert app.query_one("#ms-positions").row_count == 3
        assert app.query_one("#ms-name").value == "P4"
        assert app.query_one("#rn-dry").value == str(dry)
        assert app.query_one("#rn-mix").value == "0.4"
        assert app.query_one("#room-size").value == "6x4x3"
        assert app.query_one("#caution-ack").value is False  # confirmed afresh each session
        # Continue: a fourth position, then save over the session file only when asked.
        await quick_simulated_measure(app, pilot, room, folder)
        assert (folder / "P4.wav").exists()
        await pilot.press("s")
        await pilot.pause()
        assert app.screen.__class__.__name__ == "ReplaceScreen"
        await press(app, pilot, "#replace-yes")
        await pilot.pause()
        await pilot.press("q")
    assert [r.receiver for r in load_study(saved).responses] == ["P1", "P2", "P3", "P4"]
    # Nothing earlier was touched: the rendered file and the first responses are as they were.
    assert (tmp_path / "wet" / "voice__synth.wav").read_bytes() == wet_before
    assert sf.info(str(folder / "P1.wav")).frames > 0
