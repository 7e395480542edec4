"""The workbench driven headlessly: every tab's main flow, with screen-text checks."""

import json

import numpy as np
import pytest
import soundfile as sf

from roomconv.cli import main as cli_main
from tui.app import RoomconvApp

pytestmark = pytest.mark.timeout(120)
FS = 48000


def decaying_ir(path, T=0.6, seconds=1.5, seed=0, channels=1):
    rng = np.random.default_rng(seed)
    t = np.arange(int(seconds * FS)) / FS
    h = rng.standard_normal((t.size, channels)) * np.exp(-6.9 * t / T)[:, None] * 0.1
    sf.write(path, h, FS, subtype="FLOAT")
    return path


async def press(app, pilot, selector):
    """Press a button the way Enter does (clicks depend on the layout's geometry)."""
    app.query_one(selector).press()
    await pilot.pause()


async def settle(app, pilot):
    await pilot.pause()
    await app.workers.wait_for_complete()
    await pilot.pause()


def screen_text(app) -> str:
    return "\n".join(str(w.render()) for w in app.screen.query("Static"))


async def test_help_overlay_and_tab_keys():
    app = RoomconvApp()
    async with app.run_test(size=(140, 50)) as pilot:
        await pilot.press("o")
        assert app.query_one("#tabs").active == "room"
        await pilot.press("question_mark")
        assert "Keys" in screen_text(app) and "Measure" in screen_text(app)
        await pilot.press("escape")
        await pilot.press("a")
        assert app.query_one("#tabs").active == "analyze"
        await pilot.press("x")
        assert "nothing is running" in str(app.query_one("#status-line").render())


async def test_room_tab_predicts_and_synthesizes(tmp_path):
    app = RoomconvApp()
    async with app.run_test(size=(160, 60)) as pilot:
        await pilot.press("o")
        size = app.query_one("#room-size")
        size.value = "10x7x3"
        await pilot.pause()
        table = app.query_one("#room-prediction")
        assert table.row_count == 2
        status = str(app.query_one("#room-status").render())
        assert "V = 210 m³" in status
        size.value = "10x7"
        await pilot.pause()
        assert "cannot predict" in str(app.query_one("#room-status").render())
        size.value = "10x7x3"
        app.query_one("#room-out").value = str(tmp_path / "synth.wav")
        app.query_one("#room-source").value = "2,2,1.5"
        app.query_one("#room-receiver").value = "8,5,1.2"
        await press(app, pilot, "#room-synth")
        await settle(app, pilot)
        assert (tmp_path / "synth.wav").exists()
        assert "wrote" in str(app.query_one("#room-status").render())
        await press(app, pilot, "#room-to-render")
        await pilot.pause()
        assert app.query_one("#rn-ir").value == str(tmp_path / "synth.wav")
        assert app.query_one("#tabs").active == "render"


async def test_analyze_tab_matches_the_command_line(tmp_path):
    ir = decaying_ir(tmp_path / "hall.wav")
    assert cli_main(["analyze", str(ir), "--json", str(tmp_path / "ref.json"), "--quiet"]) == 0
    ref = json.loads((tmp_path / "ref.json").read_text())["positions"][0]["bands"]
    app = RoomconvApp()
    async with app.run_test(size=(160, 70)) as pilot:
        await pilot.press("a")
        app.query_one("#an-files").value = str(ir)
        await press(app, pilot, "#an-run")
        await settle(app, pilot)
        table = app.query_one("#an-table")
        rows = [table.get_row_at(i) for i in range(table.row_count)]
        by_band = {r[1]: r for r in rows}
        for band in ref:
            label = (
                f"{band['band_hz'] / 1000:g}k"
                if band["band_hz"] >= 1000
                else f"{band['band_hz']:g}"
            )
            want = "—" if band["t30_s"] is None else f"{band['t30_s']:.2f}"
            if band["verdicts"]["t30_s"] == "caution":
                want += " ⚠"  # a flagged value is flagged in the table itself
            assert str(by_band[label][4]) == want  # the T30 column
            assert str(by_band[label][-1]) == band["verdict"]
        text = screen_text(app)
        assert "T30 per band" in text and "Decay curves" in text
        app.query_one("#an-export-dir").value = str(tmp_path / "export")
        await press(app, pilot, "#an-export")
        await pilot.pause()
        assert (tmp_path / "export" / "report.html").exists()
        assert (tmp_path / "export" / "results.csv").exists()


async def test_analyze_reports_bad_input_as_a_notice(tmp_path):
    app = RoomconvApp()
    async with app.run_test(size=(140, 50)) as pilot:
        await pilot.press("a")
        app.query_one("#an-files").value = str(tmp_path / "missing.wav")
        await press(app, pilot, "#an-run")
        await settle(app, pilot)
        assert any("not found" in n.message for n in app._notifications)


async def test_render_tab_renders_a_queue(tmp_path):
    rng = np.random.default_rng(1)
    for i in range(2):
        sf.write(tmp_path / f"dry{i}.wav", 0.1 * rng.standard_normal(FS // 2), FS)
    ir = decaying_ir(tmp_path / "ir.wav", T=0.3, seconds=0.5)
    app = RoomconvApp()
    async with app.run_test(size=(160, 48)) as pilot:
        await pilot.press("r")
        app.query_one("#rn-dry").value = f"{tmp_path / 'dry0.wav'} {tmp_path / 'dry1.wav'}"
        app.query_one("#rn-ir").value = str(ir)
        app.query_one("#rn-out").value = str(tmp_path / "wet")
        app.query_one("#rn-mix").value = "0.5"
        app.query_one("#rn-format").value = "PCM_24"
        await press(app, pilot, "#rn-run")
        await settle(app, pilot)
        assert "rendered 2 of 2" in str(app.query_one("#rn-status").render())
        y, rate = sf.read(tmp_path / "wet" / "dry1__ir.wav")
        # Full convolution length: N + M - 1 samples (closed form of linear convolution).
        assert rate == FS and y.shape[0] == FS // 2 + int(0.5 * FS) - 1
        # The header (libsndfile) says 24-bit PCM, as chosen.
        assert sf.info(str(tmp_path / "wet" / "dry1__ir.wav")).subtype == "PCM_24"
        assert app.query_one("#rn-all").percentage == 1.0
        # A second run verifies the finished files and skips them: nothing is replaced.
        await press(app, pilot, "#rn-run")
        await settle(app, pilot)
        assert "2 done earlier" in str(app.query_one("#rn-status").render())


async def test_render_tab_loudness_target_is_reached(tmp_path):
    import pyloudnorm

    sf.write(tmp_path / "dry.wav", 0.1 * np.random.default_rng(2).standard_normal(FS * 2), FS)
    ir = decaying_ir(tmp_path / "ir.wav", T=0.3, seconds=0.5)
    app = RoomconvApp()
    async with app.run_test(size=(80, 24)) as pilot:
        await pilot.press("r")
        app.query_one("#rn-dry").value = str(tmp_path / "dry.wav")
        app.query_one("#rn-ir").value = str(ir)
        app.query_one("#rn-out").value = str(tmp_path / "wet")
        app.query_one("#rn-normalize").value = "loudness"
        app.query_one("#rn-target").value = "-20"
        await pilot.pause()
        assert "LUFS" in str(app.query_one("#rn-target-unit").render())
        await press(app, pilot, "#rn-run")
        await settle(app, pilot)
        y, rate = sf.read(tmp_path / "wet" / "dry__ir.wav")
        # Integrated loudness by pyloudnorm (an ITU-R BS.1770-4 implementation outside the
        # project); the render promises 0.05 LU, checked here at 0.1.
        assert abs(pyloudnorm.Meter(rate).integrated_loudness(y) + 20.0) < 0.1


async def test_measure_tab_against_a_simulated_room(tmp_path):
    room = decaying_ir(tmp_path / "room.wav", T=0.3, seconds=0.8)
    app = RoomconvApp()
    async with app.run_test(size=(160, 48)) as pilot:
        await settle(app, pilot)
        assert "sound" in str(app.query_one("#ms-devices").render())
        app.query_one("#ms-sim").value = str(room)
        app.query_one("#ms-duration").value = "2"
        app.query_one("#ms-silence").value = "1"
        app.query_one("#ms-repeats").value = "2"
        # Channels count from 1: the room's channel, then the simulated loopback.
        app.query_one("#ms-ref").value = "2"
        app.query_one("#ms-folder").value = str(tmp_path / "session")
        await press(app, pilot, "#ms-level-check")
        await settle(app, pilot)
        meter = str(app.query_one("#ms-meter").render())
        assert "dBFS" in meter and "100 %" in meter
        assert "level check: input peak" in str(app.query_one("#ms-status").render())
        await press(app, pilot, "#ms-run")
        await settle(app, pilot)
        assert (tmp_path / "session" / "P1.wav").exists()
        prov = json.loads((tmp_path / "session" / "P1.provenance.json").read_text())
        assert prov["settings"]["sweep"]["repeats"] == 2
        table = app.query_one("#ms-positions")
        assert table.row_count == 1 and float(table.get_row_at(0)[2]) > 45
        assert app.query_one("#ms-name").value == "P2"
        assert len(app.session) == 1
        # The session flows into Analyze.
        await pilot.press("a")
        await press(app, pilot, "#an-session")
        assert str(tmp_path / "session" / "P1.wav") in app.query_one("#an-files").value


@pytest.mark.slow
async def test_analyze_tab_writes_the_study_report(tmp_path):
    # The same study and report as `roomconv analyze --study`; the PDF's file header is
    # "%PDF-" (ISO 32000-1:2008, 7.5.2, from memory).
    from roomconv.report.pdf import pdf_engine_problem
    from tests.report.conftest import write_study

    if pdf_engine_problem() is not None:
        pytest.skip(f"no PDF engine here: {pdf_engine_problem()}")
    study = write_study(tmp_path)
    app = RoomconvApp()
    async with app.run_test(size=(160, 70)) as pilot:
        await pilot.press("a")
        app.query_one("#an-study").value = str(study)
        app.query_one("#an-export-dir").value = str(tmp_path / "out")
        await press(app, pilot, "#an-study-report")
        await settle(app, pilot)
        assert (tmp_path / "out" / "report.pdf").read_bytes().startswith(b"%PDF-")
        assert "Harbour Room" in (tmp_path / "out" / "report.html").read_text()
        assert app.query_one("#an-table").row_count > 0
        before = (tmp_path / "out" / "report.pdf").read_bytes()
        await press(app, pilot, "#an-study-report")  # never over an earlier report
        await settle(app, pilot)
        assert any("exists already" in n.message for n in app._notifications)
        assert (tmp_path / "out" / "report.pdf").read_bytes() == before


async def test_session_saved_as_a_study_file_loads_back(tmp_path):
    from roomconv.study import load_study

    a = decaying_ir(tmp_path / "P1.wav", seed=1)
    b = decaying_ir(tmp_path / "P2.wav", seed=2)
    (tmp_path / "P1.quality.json").write_text("{}")
    app = RoomconvApp()
    async with app.run_test(size=(160, 70)) as pilot:
        await pilot.press("a")
        app.session += [
            {"name": "P1", "file": a, "quality": {}},
            {"name": "P2", "file": b, "quality": {}},
        ]
        app.query_one("#an-export-dir").value = str(tmp_path / "out")
        await press(app, pilot, "#an-save-study")
        path = tmp_path / "out" / "study.toml"
        assert app.query_one("#an-study").value == str(path)
        study = load_study(path)  # paths relative to the study file
        assert [(r.receiver, r.file) for r in study.responses] == [("P1", a), ("P2", b)]
        assert study.responses[0].quality_file == tmp_path / "P1.quality.json"
        before = path.read_text()
        await press(app, pilot, "#an-save-study")  # never over an earlier file
        assert any("exists already" in n.message for n in app._notifications)
        assert path.read_text() == before


async def test_measure_tab_imports_a_recording(tmp_path):
    # The recording is the sweep convolved with a room of our own (scipy.signal.fftconvolve,
    # an outside reference for linear convolution).
    from scipy.signal import fftconvolve

    from roomconv.jobs.measure import write_sweep
    from roomconv.measure.sweep import Sweep

    sweep_path = write_sweep(
        tmp_path / "sweep.wav", Sweep(duration=1.0, silence_post=1.0, level_dbfs=-12.0)
    )
    x, _ = sf.read(sweep_path)
    room = sf.read(decaying_ir(tmp_path / "room.wav", T=0.3, seconds=0.8))[0]
    rec = fftconvolve(x, room)[: x.size]
    rec = 0.5 * rec / np.max(np.abs(rec)) + 1e-6 * np.random.default_rng(3).standard_normal(x.size)
    sf.write(tmp_path / "rec.wav", rec, FS, subtype="FLOAT")
    app = RoomconvApp()
    async with app.run_test(size=(80, 24)) as pilot:
        app.query_one("#ms-rec").value = str(tmp_path / "rec.wav")
        app.query_one("#ms-sweep").value = str(sweep_path)
        app.query_one("#ms-folder").value = str(tmp_path / "s")
        await press(app, pilot, "#ms-import")
        await settle(app, pilot)
        from tests.tui.pilot_helpers import status

        assert (tmp_path / "s" / "P1.wav").exists(), status(app)
        assert len(app.session) == 1
        assert app.query_one("#ms-positions").row_count == 1


async def test_measure_tab_makes_a_strength_reference_without_replacing_one(tmp_path):
    from tests.tui.pilot_helpers import quick_simulated_measure, status

    # A free field of our own: the direct sound alone, a short pulse with no room after it.
    free = np.zeros(FS // 2)
    free[100] = 0.5
    sf.write(tmp_path / "free.wav", free, FS, subtype="FLOAT")
    (tmp_path / "cal.json").write_text("earlier")
    app = RoomconvApp()
    async with app.run_test(size=(80, 24)) as pilot:
        await quick_simulated_measure(app, pilot, tmp_path / "free.wav", tmp_path / "s")
        app.query_one("#ms-cal").value = str(tmp_path / "cal.json")
        app.query_one("#ms-cal-distance").value = "2"
        await press(app, pilot, "#ms-calibrate")
        await settle(app, pilot)
        assert (tmp_path / "cal.json").read_text() == "earlier"
        written = json.loads((tmp_path / "cal-2.json").read_text())
        assert written and "cal-2.json" in status(app)
        assert app.query_one("#ms-cal").value == str(tmp_path / "cal-2.json")
