"""The STI, channel-layout and treatment panels, each mounted alone in a small app at 80×24
and driven headlessly: bad input stays inside the panel, and the values shown are checked
against closed forms."""

from __future__ import annotations

import json
import math

import numpy as np
import pytest
import soundfile as sf
from textual.app import App, ComposeResult
from textual.containers import VerticalScroll

from roomconv.analysis.sti import average_sti
from roomconv.errors import InputError
from roomconv.jobs.analyze import analyze_study
from roomconv.jobs.speech import parse_octave_levels, speech_conditions
from tui.panels import ChannelLayoutPanel, SpeechPanel, TreatmentPanel

pytestmark = pytest.mark.timeout(60)
FS = 48000
SIZE = (80, 24)


class OnePanel(App):
    """A bare app holding one panel (scrollable: 24 rows are fewer than the panel)."""

    def __init__(self, panel):
        super().__init__()
        self.panel = panel

    def compose(self) -> ComposeResult:
        with VerticalScroll():
            yield self.panel


async def settle(app, pilot):
    await pilot.pause()
    await app.workers.wait_for_complete()
    await pilot.pause()


def exponential_decay(path, T=0.5, seconds=3.0, seed=0):
    """White noise under an exponential energy decay of reverberation time T, no noise floor."""
    t = np.arange(int(seconds * FS)) / FS
    h = np.random.default_rng(seed).standard_normal(t.size) * 10 ** (-3 * t / T)
    sf.write(path, 0.5 * h, FS, subtype="DOUBLE")
    return path


def sti_closed_form(T):
    """STI of a pure exponential decay, no noise: m(F) = 1/√(1+(2πFT/13.8155)²) for the 14
    modulation frequencies 0.63…12.5 Hz (IEC 60268-16:2011; Houtgast, Steeneken & Plomp 1980;
    Schroeder 1981), TI = (SNR_eff + 15)/30 with SNR_eff clipped to ±15 dB; the same m in
    every octave makes the weighted α/β sum the mean TI (Σα − Σβ = 1)."""
    f = np.array([0.63, 0.8, 1.0, 1.25, 1.6, 2.0, 2.5, 3.15, 4.0, 5.0, 6.3, 8.0, 10.0, 12.5])
    m = 1 / np.sqrt(1 + (2 * np.pi * f * T / 13.8155) ** 2)
    snr = np.clip(10 * np.log10(m / (1 - m)), -15, 15)
    return float(np.mean((snr + 15) / 30))


# --- speech -------------------------------------------------------------------------------
async def test_speech_panel_bad_input_shows_a_message_and_the_app_lives_on(tmp_path):
    panel = SpeechPanel()
    app = OnePanel(panel)
    async with app.run_test(size=SIZE) as pilot:
        assert panel.conditions() is None  # off by default
        panel.query_one("#sp-on").value = True
        panel.query_one("#sp-level").value = "loud"
        with pytest.raises(InputError):
            panel.conditions()
        assert "not a number" in panel.status_text
        panel.query_one("#sp-level").value = ""
        panel.query_one("#sp-noise").value = "40,35,30"  # three levels, not seven
        panel.query_one("#sp-check").press()
        await pilot.pause()
        assert "seven octave levels" in panel.status_text
        panel.query_one("#sp-noise").value = ""
        missing = tmp_path / "no-such-noise.wav"
        panel.query_one("#sp-noise-file").value = str(missing)
        panel.query_one("#sp-noise-cal").value = "120"
        panel.query_one("#sp-check").press()
        await pilot.pause()
        assert "no-such-noise.wav" in panel.status_text
        panel.query_one("#sp-noise-cal").value = ""
        panel.query_one("#sp-check").press()
        await pilot.pause()
        assert "calibration" in panel.status_text
        assert app.is_running


async def test_speech_panel_conditions_are_the_job_layers(tmp_path):
    noise = tmp_path / "hum.wav"
    rng = np.random.default_rng(3)
    sf.write(noise, 0.01 * rng.standard_normal(FS), FS, subtype="DOUBLE")
    panel = SpeechPanel()
    async with OnePanel(panel).run_test(size=SIZE) as pilot:
        panel.query_one("#sp-on").value = True
        panel.query_one("#sp-level").value = "66"
        panel.query_one("#sp-noise").value = "45,40,35,30,27,25,22"
        panel.query_one("#sp-voice").value = "female"
        panel.query_one("#sp-stipa").value = True
        await pilot.pause()
        want = speech_conditions(
            speech_level_dba=66.0,
            noise_db=parse_octave_levels("45,40,35,30,27,25,22"),
            voice="female",
            stipa=True,
        )
        assert panel.conditions() == want
        panel.query_one("#sp-noise").value = ""
        panel.query_one("#sp-noise-file").value = str(noise)
        panel.query_one("#sp-noise-cal").value = "110"
        await pilot.pause()
        got = panel.conditions()
        assert got == speech_conditions(
            speech_level_dba=66.0,
            noise_file=noise,
            noise_calibration_db=110.0,
            voice="female",
            stipa=True,
        )
        assert got.noise_db is not None and len(got.noise_db) == 7


async def test_speech_panel_shows_the_sti_of_an_exponential_decay(tmp_path):
    # T = 0.5 s, no noise: 0.736 by the closed form (IEC 60268-16 / Schroeder 1981); the
    # panel must show the analysis' value, within 0.03 (the STI JND, Galbrun & Kitapci 2014).
    want = sti_closed_form(0.5)
    assert want == pytest.approx(0.736, abs=5e-4)
    ir = exponential_decay(tmp_path / "talk.wav")
    panel = SpeechPanel()
    async with OnePanel(panel).run_test(size=SIZE) as pilot:
        panel.query_one("#sp-on").value = True
        panel.query_one("#sp-level").value = "70"
        await pilot.pause()
        cond = panel.conditions()
        doc = analyze_study([ir], sti=cond).study.document
        value = doc["average"]["sti"]["value"]
        assert value == pytest.approx(want, abs=0.03)
        panel.show(doc)
        await pilot.pause()
        text = panel.shown_text
        assert f"Average STI {value:.2f}" in text
        assert "talk.wav ch1" in text and doc["average"]["sti"]["band"] in text
        mti = doc["positions"][0]["sti"]["mti"]
        assert f"{mti[3]:.2f}" in text  # the 1 kHz MTI
        assert "licensed professional" in text and "direct" in text and "STIPA" in text


async def test_speech_panel_shows_a_null_average_with_its_reason(tmp_path):
    # The library's own null: no position with a value → the average says why.
    ir = exponential_decay(tmp_path / "quiet.wav", seconds=1.5)
    doc = analyze_study([ir], sti=speech_conditions()).study.document
    doc["positions"][0]["sti"] = {**doc["positions"][0]["sti"], "value": None, "reason": "test"}
    doc["average"]["sti"] = average_sti([p["sti"] for p in doc["positions"]])
    panel = SpeechPanel()
    async with OnePanel(panel).run_test(size=SIZE) as pilot:
        panel.show(doc)
        await pilot.pause()
        assert "quiet.wav ch1: no STI (test)" in panel.shown_text
        assert "Average STI: not evaluable (no position has an STI value)" in panel.shown_text


async def test_speech_panel_says_when_an_analysis_has_no_sti(tmp_path):
    ir = exponential_decay(tmp_path / "plain.wav", seconds=1.5)
    panel = SpeechPanel()
    async with OnePanel(panel).run_test(size=SIZE) as pilot:
        panel.show(analyze_study([ir]).study.document)
        await pilot.pause()
        assert "no STI" in panel.shown_text


# --- channel layout -----------------------------------------------------------------------
def omni_fig8(path, a=0.5, theta_deg=60.0, delay_ms=20.0):
    """Direct sound and one reflection of amplitude a; the figure-of-eight nulls the source and
    takes the reflection times cos θ (θ from the lateral axis)."""
    n = FS // 2
    x = np.zeros((n, 2))
    d = int(round(delay_ms * FS / 1000))
    x[480, 0] = 1.0
    x[480 + d, 0] = a
    x[480 + d, 1] = a * math.cos(math.radians(theta_deg))
    sf.write(path, 0.5 * x, FS, subtype="DOUBLE")
    return path


async def test_layout_panel_gives_the_job_kwargs():
    panel = ChannelLayoutPanel()
    async with OnePanel(panel).run_test(size=SIZE) as pilot:
        assert panel.analysis_kwargs() == {"channels": None, "binaural": False, "stage": False}
        for choice, want in [
            ("omni,fig8", {"channels": "omni,fig8", "binaural": False, "stage": False}),
            ("acn-sn3d", {"channels": "acn-sn3d", "binaural": False, "stage": False}),
            ("binaural", {"channels": None, "binaural": True, "stage": False}),
            ("stage", {"channels": None, "binaural": False, "stage": True}),
        ]:
            panel.choice = choice
            await pilot.pause()
            assert panel.analysis_kwargs() == want
            assert panel.status_text  # the layout in words


async def test_layout_panel_shows_jlf_of_one_lateral_reflection(tmp_path):
    # J_LF = a²cos²θ/(1+a²) (ISO 3382-1:2009 Annex A definition, closed form for direct sound
    # plus one reflection — from memory): a = 0.5, θ = 60° → 0.25·0.25/1.25 = 0.05.
    a, theta = 0.5, 60.0
    want = a * a * math.cos(math.radians(theta)) ** 2 / (1 + a * a)
    assert want == pytest.approx(0.05, abs=1e-12)
    path = omni_fig8(tmp_path / "pair.wav", a, theta)
    panel = ChannelLayoutPanel()
    async with OnePanel(panel).run_test(size=SIZE) as pilot:
        panel.choice = "omni,fig8"
        await pilot.pause()
        doc = analyze_study([path], **panel.analysis_kwargs()).study.document
        rows = {r["band_hz"]: r for r in doc["positions"][0]["bands"]}
        # Tolerance 0.005: a tenth of the J_LF JND 0.05 (ISO 3382-1 Table A.1, from memory).
        for b in (250.0, 500.0, 1000.0):
            assert rows[b]["jlf"] == pytest.approx(want, abs=0.005)
        panel.show(doc)
        await pilot.pause()
        text = panel.shown_text
        assert "J_LF" in text and "pair.wav ch1" in text
        mark = "*" if rows[500.0]["verdicts"]["jlf"] == "caution" else ""
        assert f"{rows[500.0]['jlf']:.3f}{mark}" in text
        avg = doc["average"]["layout_single_numbers"]["values"]["jlf_avg"]
        assert avg == pytest.approx(want, abs=0.005)
        assert f"{avg:.3f}" in text and "Average Early lateral energy fraction" in text
        assert "not evaluable" in text  # L_J without a strength reference


async def test_layout_panel_shows_iacc_of_identical_ears(tmp_path):
    # Identical ear signals: the normalised interaural cross-correlation peaks at lag 0 with
    # exactly 1 (Cauchy–Schwarz; ISO 3382-1:2009 Annex A definition of IACC — from memory),
    # so IACC_E = IACC_A = 1 in every band given and 1 − IACC_E3 = 0.
    t = np.arange(FS) / FS
    h = np.random.default_rng(1).standard_normal(t.size) * np.exp(-6.9 * t / 0.6)
    h[:480], h[480] = 0.0, 1.0
    path = tmp_path / "ears.wav"
    sf.write(path, 0.3 * np.stack([h, h], axis=1), FS, subtype="DOUBLE")
    panel = ChannelLayoutPanel()
    async with OnePanel(panel).run_test(size=SIZE) as pilot:
        panel.choice = "binaural"
        await pilot.pause()
        doc = analyze_study([path], **panel.analysis_kwargs()).study.document
        for r in doc["positions"][0]["bands"]:
            if 125 <= r["band_hz"] <= 4000:
                assert r["iacc_early"] == pytest.approx(1.0, abs=1e-9)
                assert r["iacc_full"] == pytest.approx(1.0, abs=1e-9)
        panel.show(doc)
        await pilot.pause()
        text = panel.shown_text
        assert "IACC_E" in text and "IACC_A" in text and "1.00" in text
        assert "Average 1 − IACC_E3, early IACC of 500 Hz–2 kHz: 0.00" in text


async def test_layout_panel_on_a_plain_analysis_says_so(tmp_path):
    ir = exponential_decay(tmp_path / "one.wav", seconds=1.5)
    panel = ChannelLayoutPanel()
    async with OnePanel(panel).run_test(size=SIZE) as pilot:
        panel.show(analyze_study([ir]).study.document)
        await pilot.pause()
        assert "no spatial or stage parameters" in panel.shown_text


# --- treatment ----------------------------------------------------------------------------
@pytest.fixture(scope="module")
def decay_document(tmp_path_factory):
    d = tmp_path_factory.mktemp("plan")
    ir = exponential_decay(d / "hall.wav", T=0.9, seconds=3.0, seed=5)
    res = analyze_study([ir], json_path=d / "hall.json")
    return res.study.document, d / "hall.json"


async def test_treatment_panel_bad_input_stays_in_the_panel(decay_document):
    doc, _ = decay_document
    panel = TreatmentPanel()
    app = OnePanel(panel)
    async with app.run_test(size=SIZE) as pilot:
        panel.query_one("#tp-plan").press()
        await settle(app, pilot)
        assert "analyse responses first" in panel.status_text
        panel.set_results(doc)
        panel.query_one("#tp-target").value = "0.6"
        panel.query_one("#tp-plan").press()
        await settle(app, pilot)
        assert "room is not known" in panel.status_text
        panel.set_room(dims_m=(8.0, 6.0, 3.0))
        panel.query_one("#tp-target").value = "quiet please"
        panel.plan()
        await settle(app, pilot)
        assert "'quiet please' is unknown" in panel.status_text
        panel.query_one("#tp-target").value = "0.6"
        panel.query_one("#tp-install").value = "roof=velvet"
        panel.plan()
        await settle(app, pilot)
        assert "roof" in panel.status_text
        panel.query_one("#tp-install").value = ""
        panel.query_one("#tp-tolerance").value = "10,-10"  # upper below lower
        panel.plan()
        await settle(app, pilot)
        assert "tolerance" in panel.status_text and "lower ≤ 0 ≤ upper" in panel.status_text
        panel.query_one("#tp-tolerance").value = "-10"
        panel.plan()
        await settle(app, pilot)
        assert "LOWER,UPPER" in panel.status_text
        panel.query_one("#tp-tolerance").value = ""
        panel.query_one("#tp-temp").value = "warm"
        panel.plan()
        await settle(app, pilot)
        assert "not a number" in panel.status_text
        assert app.is_running and panel.result is None


async def test_treatment_panel_plan_matches_the_sabine_closed_form(decay_document, tmp_path):
    doc, json_path = decay_document
    L, W, H = 8.0, 6.0, 3.0
    V = L * W * H
    panel = TreatmentPanel()
    app = OnePanel(panel)
    async with app.run_test(size=SIZE) as pilot:
        panel.set_room(dims_m=(L, W, H))
        panel.set_results(json_path)  # a results file this time
        panel.query_one("#tp-target").value = "0.6"
        panel.query_one("#tp-tolerance").value = "-10,5"
        panel.query_one("#tp-surface").value = "ceiling"
        panel.query_one("#tp-material").value = "acoustic-tile"
        panel.query_one("#tp-add").press()
        await pilot.pause()
        assert panel.query_one("#tp-install").value == "ceiling=acoustic-tile"
        panel.plan()
        await settle(app, pilot)
        assert panel.result is not None, panel.status_text
        bands = {b["band_hz"]: b for b in panel.result.document["bands"]}
        b1k = bands[1000]
        assert b1k["measured_s"] == pytest.approx(0.9, rel=0.05)  # the decay made above
        # Sabine: ΔA = 0.161·V·(1/T_target − 1/T_measured) (Sabine's formula, any acoustics
        # handbook), with the measured value the plan shows.
        sabine = 0.161 * V * (1 / 0.6 - 1 / b1k["measured_s"])
        assert b1k["added_area_sabine_m2"] == pytest.approx(sabine, abs=1e-3)
        # The accepted range typed: 0.6 s −10 % … +5 % = 0.54 … 0.63 s (arithmetic).
        assert (b1k["target_min_s"], b1k["target_max_s"]) == pytest.approx((0.54, 0.63))
        text = panel.shown_text
        assert f"{sabine:.1f}" in text and "acoustic-tile on the ceiling" in text
        assert text.count("licensed professional") == 1
        assert "licensed" in text and "not saved" in panel.status_text


async def test_treatment_panel_writes_only_when_asked_and_never_clobbers(decay_document, tmp_path):
    doc, _ = decay_document
    out = tmp_path / "plan.json"
    out.write_text("keep me")
    panel = TreatmentPanel()
    app = OnePanel(panel)
    async with app.run_test(size=SIZE) as pilot:
        panel.set_room(volume_m3=200.0, area_m2=210.0)
        panel.set_results(doc)  # the document in memory
        panel.query_one("#tp-named").value = "din18041:A3"
        await pilot.pause()
        assert panel.query_one("#tp-target").value == "din18041:A3"
        panel.query_one("#tp-json").value = str(out)
        panel.plan()
        await settle(app, pilot)
        assert out.read_text() == "keep me"  # refused, not replaced
        assert "nothing was written" in panel.status_text
        panel.query_one("#tp-replace").value = True
        panel.plan()
        await settle(app, pilot)
        written = json.loads(out.read_text())
        assert written["target"]["name"] == "din18041:A3"
        assert str(out) in panel.status_text
        # The tick was for that one replacement: the next plan refuses again.
        assert panel.query_one("#tp-replace").value is False
        panel.plan()
        await settle(app, pilot)
        assert "nothing was written" in panel.status_text
        assert json.loads(out.read_text()) == written
