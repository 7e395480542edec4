"""The Analyze and Room tabs driven headlessly: what fits at 80×24, what nothing a user
types can break, no silent overwrite, plots and plan that follow the data."""

import numpy as np
import pytest
import soundfile as sf
from scipy import signal

from tui.app import RoomconvApp
from tui.plots import RECEIVER_MARK, SOURCE_MARK

pytestmark = pytest.mark.timeout(120)
FS = 48000


def exponential_ir(path, T=0.6, seconds=1.5, seed=0):
    """Noise under exp(−3 ln10 · t / T) after 10 ms of silence: energy falls 60 dB in T."""
    rng = np.random.default_rng(seed)
    t = np.arange(int(seconds * FS)) / FS
    h = 0.1 * rng.standard_normal(t.size) * np.exp(-3 * np.log(10) * t / T)
    sf.write(path, np.r_[np.zeros(FS // 100), h], FS, subtype="FLOAT")
    return path


async def settle(app, pilot):
    await pilot.pause()
    await app.workers.wait_for_complete()
    await pilot.pause()


def errors(app) -> list[str]:
    return [n.message for n in app._notifications if n.severity == "error"]


def on_screen(app, selector) -> bool:
    """The widget is laid out inside the visible screen (no scrolling needed)."""
    w = app.query_one(selector)
    r, screen = w.region, app.screen.region
    return r.area > 0 and r.y >= 0 and r.bottom <= screen.bottom and r.right <= screen.right


# --- Analyze -------------------------------------------------------------------------------
def check_fit_and_result(app):
    for sel in ("#an-files", "#an-run", "#an-status"):
        assert on_screen(app, sel), sel
    table = app.query_one("#an-table")
    assert table.row_count > 0 and on_screen(app, "#an-table")
    assert "position(s); T30 mid" in str(app.query_one("#an-status").render())
    # Plain names: the unfiltered row is "broadband".
    bands = [str(table.get_row_at(i)[1]) for i in range(table.row_count)]
    assert "broadband" in bands and "wide" not in bands


async def run_analysis(app, pilot, files: str):
    app.query_one("#an-files").value = files
    app.query_one("#an-run").press()
    await settle(app, pilot)


async def test_analyze_at_80x24_fits_and_survives_bad_input(tmp_path):
    ir = exponential_ir(tmp_path / "hall.wav")
    (tmp_path / "dir.wav").mkdir()
    (tmp_path / "text.wav").write_text("not audio")
    app = RoomconvApp()
    async with app.run_test(size=(80, 24)) as pilot:
        await pilot.press("a")
        app.query_one("#an-export").press()  # nothing analysed yet: a warning, no more
        await pilot.pause()
        await run_analysis(app, pilot, str(ir))
        check_fit_and_result(app)
        for typed, says in [
            ("", "IR files"),
            (str(tmp_path / "missing.wav"), "not found"),
            ('"unclosed', "quote"),
            (str(tmp_path / "dir.wav"), "is a directory"),
            (str(tmp_path / "text.wav"), "text.wav"),
        ]:
            app._notifications.clear()
            await run_analysis(app, pilot, typed)
            assert app.is_running
            assert any(says in m for m in errors(app)), (typed, errors(app))
            assert "failed" in str(app.query_one("#an-status").render())


async def test_analyze_at_160x48_plots_follow_known_responses(tmp_path):
    T = 0.6
    ir = exponential_ir(tmp_path / "hall.wav", T=T)
    app = RoomconvApp()
    async with app.run_test(size=(160, 48)) as pilot:
        await pilot.press("a")
        await run_analysis(app, pilot, str(ir))
        check_fit_and_result(app)
        etc = app.query_one("#an-etc").data
        # Closed form: energy under exp(−6 ln10 · t / T) falls at −60/T dB/s.
        sel = (etc["t_s"] > 0.05) & (etc["t_s"] < 0.5)
        slope = np.polyfit(etc["t_s"][sel], etc["smooth_db"][sel], 1)[0]
        assert slope == pytest.approx(-60 / T, rel=0.05)
        assert etc["truncation_s"] is not None
        # Decay lines: each band's line gives the table's T30 (the same fit) near T.
        decay = app.query_one("#an-decay-plot").data
        assert decay["labels"] == ["125", "250", "500", "1k", "2k", "4k"]
        for d in decay["decays"]:
            assert d.line.reverberation_s == pytest.approx(T, rel=0.1)
        # T per band with its uncertainty: the values are the document's averages.
        doc = app.query_one("AnalyzePane").study.document
        rows = app.query_one("#an-t-plot").data["rows"]
        for (_label, mean, err, _flag), r in zip(rows, doc["average"]["bands"], strict=True):
            assert mean == r["t30_s"]["mean"]
            assert err == (r["t30_s"].get("uncertainty") or r["t30_s"]["std"])
        app.query_one("#an-metric").value = "edt_s"
        await pilot.pause()
        assert app.query_one("#an-t-plot").data["name"] == "EDT"
        assert "EDT per band" in str(app.query_one("#an-bars").render())

        # The response of a 2nd-order band-pass (300 Hz–3 kHz): its third-octave smoothed
        # magnitude against scipy.signal.freqz of the same filter, power-averaged over each
        # third-octave window (reference: scipy).
        b, a = signal.butter(2, [300, 3000], btype="bandpass", fs=FS)
        h = signal.lfilter(b, a, np.r_[1.0, np.zeros(FS - 1)])
        sf.write(tmp_path / "filt.wav", h, FS, subtype="DOUBLE")
        await run_analysis(app, pilot, str(tmp_path / "filt.wav"))
        assert not errors(app), errors(app)
        ((f, db),) = app.query_one("#an-magnitude").data.values()
        half = 2 ** (1 / 6)
        ref = []
        for fc in f:
            _, H = signal.freqz(b, a, worN=np.linspace(fc / half, fc * half, 300), fs=FS)
            ref.append(10 * np.log10(np.mean(np.abs(H) ** 2)))
        ref = np.array(ref)
        # The plot shows levels re its maximum. Below 50 Hz a third-octave window holds
        # fewer than 15 bins of the 1 s response, too few to stand for the integral.
        sel = f >= 50
        assert db[sel] == pytest.approx(ref[sel] - ref.max(), abs=0.1)


async def test_extra_parameter_groups_show_without_a_change_to_the_tab(tmp_path):
    ir = exponential_ir(tmp_path / "hall.wav")
    exponential_ir(tmp_path / "stage.wav", T=0.3, seed=2)
    app = RoomconvApp()
    async with app.run_test(size=(160, 48)) as pilot:
        await pilot.press("a")
        await run_analysis(app, pilot, f"{ir} {tmp_path / 'stage.wav'}")
        # The plots follow the position picked.
        assert "hall.wav:1" in app.query_one("#an-etc").border_subtitle
        app.query_one("#an-position").value = "1"
        await pilot.pause()
        assert "stage.wav:1" in app.query_one("#an-etc").border_subtitle
        assert "stage.wav:1" in str(app.query_one("#an-decay").render())
        pane = app.query_one("AnalyzePane")
        more = app.query_one("#an-more")
        headers = [str(c.label) for c in more.columns.values()]
        assert "Curvature %" in headers and "C %" not in headers
        # Parameters another part of the analysis might add: a per-band value and groups.
        doc = pane.study.document
        for p in doc["positions"]:
            for r in p["bands"] + [p["wideband"]]:
                r["speech_index"] = 0.61
            p["stage_support"] = {"st_early_db": -12.25, "bands": [1, 2]}
        doc["average"]["single_numbers"]["new_mid_s"] = 1.5
        pane.show(pane.study)
        await pilot.pause()
        headers = [str(c.label) for c in more.columns.values()]
        assert "speech index" in headers
        col = headers.index("speech index")
        assert str(more.get_row_at(0)[col]) == "0.61"
        groups = str(app.query_one("#an-more-groups").render())
        assert "hall.wav:1 stage_support.st_early_db: -12.2" in groups
        assert "stage_support.bands: 2 item(s)" in groups
        assert "new mid s: 1.5" in groups
        t30 = doc["average"]["single_numbers"]["t30_mid_s"]
        assert f"Reverberation time T30: {t30:.2f} s" in groups


# --- Room ----------------------------------------------------------------------------------
def check_room_fits(app):
    for sel in ("#room-synth", "#room-status", "#room-size", "#room-plan", "#mat-left"):
        assert on_screen(app, sel), sel
    assert on_screen(app, "#room-prediction")


#: (field, typed, part of the message shown)
BAD_ROOM_INPUT = [
    ("#room-size", "x", "room size"),
    ("#room-size", "0x5x3", "positive"),
    ("#room-size", "1e9x2x3", "room side"),
    ("#room-source", "a,b", "source position"),
    ("#room-patches", "floor:unobtainium:5", "unobtainium"),
    ("#room-patches", "floor:carpet:-1", "patch area"),
    ("#room-absorbers", "carpet", "Absorbers"),
    ("#room-temp", "warm", "Air °C"),
    ("#room-humidity", "0", "humidity"),
    ("#room-length", "long", "Length s"),
    ("#room-peak", "6", "peak level"),
    ("#room-rt60", "500:slow", "tail reverberation time"),
    ("#room-seed", "-1", "noise seed"),
    ("#room-out", "", "Save IR as"),
    ("#room-out", "{tmp}/no/such/folder/r.wav", "r.wav"),
]


async def test_room_at_80x24_fits_follows_typing_and_survives_bad_input(tmp_path):
    app = RoomconvApp()
    async with app.run_test(size=(80, 24)) as pilot:
        await pilot.press("o")
        await pilot.pause()
        check_room_fits(app)
        plan = app.query_one("#room-plan")
        app.query_one("#room-size").value = "10x5x3"
        app.query_one("#room-source").value = "2,1,1.5"
        app.query_one("#room-receiver").value = "8,4,1.2"
        await pilot.pause()
        assert plan.data["length_m"] == 10 and plan.data["width_m"] == 5
        lines = plan.render().plain.splitlines()
        lay = plan.layout_now
        # To scale: the outline's length over its depth is 10/5 (closed form), within the
        # half cell each wall may be off by.
        across, down = lay.cols * lay.m_per_col, lay.rows * lay.m_per_col * 2
        assert abs(across - 10) <= lay.m_per_col / 2 and abs(down - 5) <= lay.m_per_col
        src = lay.cell(2, 1)
        assert lines[src[1]][src[0]] == SOURCE_MARK
        rcv = lay.cell(8, 4)
        assert lines[rcv[1]][rcv[0]] == RECEIVER_MARK
        # Moving the source moves its mark.
        app.query_one("#room-source").value = "8,1,1.5"
        await pilot.pause()
        lines = plan.render().plain.splitlines()
        new = lay.cell(8, 1)
        assert lines[new[1]][new[0]] == SOURCE_MARK and lines[src[1]][src[0]] != SOURCE_MARK
        # A material choice shows on its wall.
        app.query_one("#mat-back").value = "carpet"
        await pilot.pause()
        assert "back: carpet" in plan.render().plain
        # A bad size: the plan says why and the session goes on.
        app.query_one("#room-size").value = "10 by 5"
        await pilot.pause()
        assert "no plan" in plan.render().plain
        for extreme in ("1e-300x1x3", "1000x0.001x3", "1000x1000x3"):
            app.query_one("#room-size").value = extreme
            await pilot.pause()
            assert plan.render().plain  # drawn, or says why not

        good = {
            "#room-size": "6x4x3",
            "#room-source": "1.5,1.5,1.5",
            "#room-receiver": "4.5,2.5,1.2",
            "#room-length": "0.3",
            "#room-out": str(tmp_path / "r.wav"),
        }
        for field, typed, says in BAD_ROOM_INPUT:
            for k in ("#room-patches", "#room-absorbers", "#room-rt60", "#room-peak"):
                app.query_one(k).value = ""
            for k, v in {**good, "#room-temp": "20", "#room-humidity": "50"}.items():
                app.query_one(k).value = v
            app.query_one("#room-seed").value = "0"
            app.query_one(field).value = typed.format(tmp=tmp_path)
            app._notifications.clear()
            app.query_one("#room-synth").press()
            await settle(app, pilot)
            assert app.is_running
            assert any(says in m for m in errors(app)), (field, typed, errors(app))
            assert not (tmp_path / "r.wav").exists()


async def test_room_at_160x48_synthesis_never_replaces_a_file_silently(tmp_path):
    out = tmp_path / "room.wav"
    app = RoomconvApp()
    async with app.run_test(size=(160, 48)) as pilot:
        await pilot.press("o")
        await pilot.pause()
        check_room_fits(app)
        app.query_one("#room-size").value = "6x4x3"
        app.query_one("#room-source").value = "1.5,1.5,1.5"
        app.query_one("#room-receiver").value = "4.5,2.5,1.2"
        app.query_one("#room-length").value = "0.3"
        app.query_one("#room-rate").value = 44100
        app.query_one("#room-out").value = str(out)
        app.query_one("#room-synth").press()
        await settle(app, pilot)
        assert not errors(app), errors(app)
        first = out.read_bytes()
        assert sf.info(out).samplerate == 44100  # the rate chosen is the rate written
        app.query_one("#room-seed").value = "7"
        app.query_one("#room-synth").press()
        await settle(app, pilot)
        assert out.read_bytes() == first  # untouched
        second = tmp_path / "room-2.wav"
        assert second.exists()
        assert app.query_one("#room-out").value == str(second)  # hand-offs send the new one
        status = str(app.query_one("#room-status").render())
        assert "room.wav exists" in status and "room-2.wav" in status
        # Asked for: replacing is allowed.
        app.query_one("#room-replace").value = True
        app.query_one("#room-out").value = str(out)
        app.query_one("#room-synth").press()
        await settle(app, pilot)
        assert not errors(app), errors(app)
        assert out.read_bytes() != first
        assert not (tmp_path / "room-3.wav").exists()

        # Extra materials from a file are offered on every surface and used.
        extra = tmp_path / "extra.json"
        extra.write_text('{"felt-panel": {"alpha": [0.1, 0.2, 0.4, 0.6, 0.7, 0.7]}}')
        app.query_one("#room-materials-file").value = str(extra)
        await pilot.pause()
        floor = app.query_one("#mat-floor")
        floor.value = "felt-panel"
        await pilot.pause()
        assert "cannot predict" not in str(app.query_one("#room-status").render())
        app.query_one("#room-out").value = str(tmp_path / "felt.wav")
        app.query_one("#room-synth").press()
        await settle(app, pilot)
        assert not errors(app), errors(app)
        assert (tmp_path / "felt.wav").exists()
        # A file that went away: the prediction and the synthesis say so; nothing written.
        app.query_one("#room-materials-file").value = str(tmp_path / "gone.json")
        await pilot.pause()
        assert floor.value == "carpet"  # back to its default: felt-panel is gone
        assert "cannot predict" in str(app.query_one("#room-status").render())
        app.query_one("#room-out").value = str(tmp_path / "gone.wav")
        app.query_one("#room-synth").press()
        await settle(app, pilot)
        assert any("gone.json" in m for m in errors(app)), errors(app)
        assert not (tmp_path / "gone.wav").exists()
