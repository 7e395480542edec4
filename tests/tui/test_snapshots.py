"""Layout snapshots of the Measure and Render tabs and the help overlay at 80×24 and 160×48
(pytest-textual-snapshot; SVGs under __snapshots__/). Regenerate on purpose with
``pytest tests/tui/test_snapshots.py --snapshot-update`` and review the pictures."""

import pytest

from tui.app import RoomconvApp

SIZES = [(80, 24), (160, 48)]


async def _steady(pilot):
    # The sound-device probe says different things on different machines: fix its line.
    await pilot.app.workers.wait_for_complete()
    pilot.app.query_one("#ms-devices").update("sound devices: (fixed for the snapshot)")
    pilot.app.query_one("#status-line").update("ready")
    await pilot.pause()


@pytest.mark.parametrize("size", SIZES, ids=lambda s: f"{s[0]}x{s[1]}")
@pytest.mark.parametrize(
    "keys", [("m",), ("r",), ("question_mark",)], ids=["measure", "render", "help"]
)
def test_layout(snap_compare, size, keys):
    async def before(pilot):
        await _steady(pilot)
        for k in keys:
            await pilot.press(k)
        await pilot.pause()

    assert snap_compare(RoomconvApp(), terminal_size=size, run_before=before)
