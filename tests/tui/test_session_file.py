"""A workbench session written as a study file and read back (no terminal needed)."""

import tomllib

import pytest

from roomconv.errors import InputError, OutputExistsError
from roomconv.jobs.study import save_workbench_session
from roomconv.study import load_study


def test_session_round_trip(tmp_path):
    (tmp_path / "P1.wav").write_bytes(b"")
    (tmp_path / "P1.quality.json").write_text("{}")
    path = tmp_path / "s" / "study.toml"
    save_workbench_session(
        path,
        [("P1", tmp_path / "P1.wav", tmp_path / "P1.quality.json")],
        notes="door closed",
        room={"name": "Test room", "temperature_c": 21.5, "humidity_pct": None},
        sweep={"duration_s": 2.0, "repeats": 3, "rate_hz": None},
        workbench={"rn-mix": "0.3", "ms-name": "P2", "flag": True, "dry": ["a b.wav", "c.wav"]},
    )
    # The file is plain TOML 1.0 as Python's own reader (tomllib) understands it.
    raw = tomllib.loads(path.read_text())
    assert raw["responses"][0]["file"] == "../P1.wav"
    assert "humidity_pct" not in raw["room"] and "rate_hz" not in raw["sweep"]
    st = load_study(path)
    assert st.notes == "door closed" and st.room.temperature_c == 21.5
    assert st.sweep.repeats == 3 and st.sweep.duration_s == 2.0
    assert st.workbench == {
        "rn-mix": "0.3",
        "ms-name": "P2",
        "flag": True,
        "dry": ["a b.wav", "c.wav"],
    }
    assert st.responses[0].file == tmp_path / "P1.wav"
    assert st.responses[0].quality_file == tmp_path / "P1.quality.json"
    # No template numbers: a volume nobody gave is not in the file.
    assert st.room.volume is None


def test_session_file_is_never_replaced_silently(tmp_path):
    (tmp_path / "P1.wav").write_bytes(b"")
    path = tmp_path / "study.toml"
    save_workbench_session(path, [("P1", tmp_path / "P1.wav", None)], notes="first")
    with pytest.raises(OutputExistsError):
        save_workbench_session(path, [("P1", tmp_path / "P1.wav", None)], notes="second")
    assert load_study(path).notes == "first"
    save_workbench_session(path, [("P1", tmp_path / "P1.wav", None)], notes="second", force=True)
    assert load_study(path).notes == "second"


def test_empty_session_and_bad_workbench_values_are_refused(tmp_path):
    with pytest.raises(InputError, match="at least one"):
        save_workbench_session(tmp_path / "study.toml", [])
    (tmp_path / "P1.wav").write_bytes(b"")
    save_workbench_session(tmp_path / "s.toml", [("P1", tmp_path / "P1.wav", None)])
    text = (
        (tmp_path / "s.toml")
        .read_text()
        .replace("[[sources]]", "[workbench]\nx = {a = 1}\n\n[[sources]]", 1)
    )
    (tmp_path / "bad.toml").write_text(text)
    with pytest.raises(InputError, match="workbench"):
        load_study(tmp_path / "bad.toml")


async def test_opening_a_bad_study_file_reports_and_starts_empty(tmp_path):
    from tests.tui.pilot_helpers import status
    from tui.app import RoomconvApp

    bad = tmp_path / "bad.toml"
    bad.write_text("[study]\ntitle = 'x'\nsurprise = 1\n")
    app = RoomconvApp(study=bad)
    async with app.run_test(size=(80, 24)) as pilot:
        await pilot.pause()
        assert app.is_running and app.session == []
        assert "✖" in status(app) and "surprise" in status(app)
        # With no study file open, the session would be saved beside the measurements.
        assert app.session_path().name == "session.toml"


async def test_fields_a_session_cannot_restore_are_named(tmp_path):
    from tests.tui.pilot_helpers import status
    from tui.app import RoomconvApp

    (tmp_path / "P1.wav").write_bytes(b"")
    path = tmp_path / "study.toml"
    save_workbench_session(
        path,
        [("P1", tmp_path / "P1.wav", None)],
        workbench={"rn-normalize": "louder", "rn-mix": "0.25", "no-such-field": "1"},
    )
    app = RoomconvApp(study=path)
    async with app.run_test(size=(80, 24)) as pilot:
        await pilot.pause()
        assert app.query_one("#rn-mix").value == "0.25"
        assert app.query_one("#rn-normalize").value == "none"
        assert "rn-normalize" in status(app) and "no-such-field" in status(app)
        assert "1 response file(s) missing" not in status(app)  # the file exists (empty)


async def test_ctrl_s_saves_from_inside_a_field_and_s_types_there(tmp_path):
    from tests.tui.pilot_helpers import decaying_ir, quick_simulated_measure, status
    from tui.app import RoomconvApp

    room = decaying_ir(tmp_path / "room.wav")
    app = RoomconvApp()
    async with app.run_test(size=(80, 24)) as pilot:
        await quick_simulated_measure(app, pilot, room, tmp_path / "s")
        notes = app.query_one("#ms-notes")
        notes.focus()
        await pilot.pause()
        await pilot.press("s")  # a letter typed into the field, not the Save key
        assert notes.value == "s" and not (tmp_path / "s" / "session.toml").exists()
        await pilot.press("ctrl+s")
        await pilot.pause()
        assert (tmp_path / "s" / "session.toml").exists(), status(app)
        assert load_study(tmp_path / "s" / "session.toml").notes == "s"
