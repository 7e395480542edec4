"""Layout snapshots of the Analyze and Room tabs at 80×24 and 160×48 (pytest-textual-snapshot:
the SVGs under __snapshots__/ are the reviewed layouts; regenerate with --snapshot-update)."""

import numpy as np
import pytest
import soundfile as sf

from tui.app import RoomconvApp

pytestmark = pytest.mark.timeout(120)
FS = 48000
SIZES = [(80, 24), (160, 48)]


def write_response(path):
    """A fixed response (seeded noise under a 0.7 s exponential decay): the same pixels on
    every run."""
    rng = np.random.default_rng(11)
    t = np.arange(int(1.2 * FS)) / FS
    h = 0.1 * rng.standard_normal(t.size) * np.exp(-3 * np.log(10) * t / 0.7)
    sf.write(path, np.r_[np.zeros(FS // 100), h], FS, subtype="FLOAT")


@pytest.mark.parametrize("size", SIZES)
def test_analyze_tab_layout(snap_compare, tmp_path, monkeypatch, size):
    monkeypatch.chdir(tmp_path)  # the file name shown stays the same from run to run
    write_response(tmp_path / "hall.wav")

    async def analyse(pilot):
        await pilot.press("a")
        pilot.app.query_one("#an-files").value = "hall.wav"
        pilot.app.query_one("#an-run").press()
        await pilot.pause()
        await pilot.app.workers.wait_for_complete()
        await pilot.pause()
        pilot.app.set_focus(None)  # no blinking cursor in the picture

    assert snap_compare(RoomconvApp(), terminal_size=size, run_before=analyse)


@pytest.mark.parametrize("size", SIZES)
def test_room_tab_layout(snap_compare, size):
    async def room(pilot):
        await pilot.press("o")
        await pilot.pause()
        pilot.app.set_focus(None)

    assert snap_compare(RoomconvApp(), terminal_size=size, run_before=room)
