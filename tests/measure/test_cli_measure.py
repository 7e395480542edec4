"""The sweep / extract / measure commands end to end, and their refusals."""

import json

import numpy as np
import pytest
import soundfile as sf
from scipy.signal import fftconvolve

from tests.conftest import band_limited_room, rel_error_db

FS = 48000


@pytest.fixture
def setup(tmp_path, cli):
    sweep = tmp_path / "sweep.wav"
    code, out, err = cli(
        "sweep", sweep, "--duration", 2, "--silence", 1, "--low", 10, "--high", 22000
    )
    assert code == 0, err
    x, _ = sf.read(sweep)
    room = band_limited_room(FS, rt=0.25, length_s=0.5)
    y = fftconvolve(x, room)[: x.size]
    g = 0.5 / np.max(np.abs(y))
    rec = tmp_path / "rec.wav"
    sf.write(rec, y * g, FS, subtype="FLOAT")
    return tmp_path, sweep, rec, room * g


def test_sweep_writes_wav_and_sidecar(setup):
    tmp, sweep, _, _ = setup
    side = json.loads((tmp / "sweep.sweep.json").read_text())
    assert side["f_low"] == 10 and side["f_high"] == 22000 and side["rate"] == FS
    info = sf.info(sweep)
    assert info.samplerate == FS and info.frames == round(0.5 * FS) + round(3 * FS)


def test_extract_writes_ir_quality_and_harmonics(setup, cli):
    tmp, sweep, rec, room = setup
    code, out, err = cli(
        "extract",
        rec,
        "--sweep",
        sweep,
        "-o",
        tmp / "ir.wav",
        "--json",
        tmp / "q.json",
        "--harmonics",
        tmp / "harm",
    )
    assert code == 0, err
    assert "impulse-to-noise ratio (INR)" in out
    assert "peak-to-noise" not in out
    ir, rate = sf.read(tmp / "ir.wav")
    assert rate == FS
    assert rel_error_db(ir, room) < -60
    q = json.loads((tmp / "q.json").read_text())
    assert q["method"] == "analytic_inverse"
    assert q["ir"]["peak_sample"] == [int(np.argmax(np.abs(room)))]
    assert sorted(p.name for p in (tmp / "harm").iterdir()) == [
        "ir_h2.wav",
        "ir_h3.wav",
        "ir_h4.wav",
        "ir_h5.wav",
    ]
    prov = json.loads((tmp / "ir.provenance.json").read_text())
    assert {i["file"] for i in prov["inputs"]} == {str(rec), str(sweep)}


def test_extract_without_sidecar_uses_spectral_division(setup, cli):
    tmp, sweep, rec, room = setup
    (tmp / "sweep.sweep.json").unlink()
    code, out, err = cli("extract", rec, "--sweep", sweep, "-o", tmp / "ir.wav")
    assert code == 0, err
    assert "regularized_division" in out and "no sidecar" in err
    ir, _ = sf.read(tmp / "ir.wav")
    assert rel_error_db(ir[: room.size], room) < -60


def _expect_refusal(cli, args, text, must_not_exist):
    code, out, err = cli(*args)
    assert code == 2, (out, err)
    assert text in err
    assert "Traceback" not in err
    assert not must_not_exist.exists()


def test_rate_mismatch_is_refused(setup, cli, tmp_path):
    tmp, sweep, rec, _ = setup
    y, _ = sf.read(rec)
    sf.write(tmp / "rec44.wav", y, 44100)
    _expect_refusal(
        cli,
        ["extract", tmp / "rec44.wav", "--sweep", sweep, "-o", tmp / "o.wav"],
        "44100 Hz",
        tmp / "o.wav",
    )


def test_short_recording_is_refused(setup, cli):
    tmp, sweep, rec, _ = setup
    y, _ = sf.read(rec)
    sf.write(tmp / "short.wav", y[: y.size // 3], FS)
    _expect_refusal(
        cli,
        ["extract", tmp / "short.wav", "--sweep", sweep, "-o", tmp / "o.wav"],
        "shorter than the sweep",
        tmp / "o.wav",
    )


@pytest.mark.parametrize(
    "kind, text", [("silent", "silent"), ("nan", "NaN"), ("clipped", "clipped")]
)
def test_unusable_recordings_are_refused(setup, cli, kind, text):
    tmp, sweep, rec, _ = setup
    y, _ = sf.read(rec)
    bad = {
        "silent": np.zeros_like(y),
        "nan": np.where(np.arange(y.size) == 100, np.nan, y),
        "clipped": np.clip(4 * y, -1, 1),
    }[kind]
    sf.write(tmp / "bad.wav", bad, FS, subtype="FLOAT")
    _expect_refusal(
        cli,
        ["extract", tmp / "bad.wav", "--sweep", sweep, "-o", tmp / "o.wav"],
        text,
        tmp / "o.wav",
    )


def test_missing_reference_channel_is_refused(setup, cli):
    tmp, sweep, rec, _ = setup
    _expect_refusal(
        cli,
        ["extract", rec, "--sweep", sweep, "-o", tmp / "o.wav", "--reference-channel", 3],
        "reference channel 3 does not exist",
        tmp / "o.wav",
    )


def test_existing_output_needs_force_and_inputs_are_never_overwritten(setup, cli):
    tmp, sweep, rec, _ = setup
    out = tmp / "ir.wav"
    out.write_bytes(b"keep me")
    code, _, err = cli("extract", rec, "--sweep", sweep, "-o", out)
    assert code == 2 and "--force" in err and out.read_bytes() == b"keep me"
    code, _, err = cli("extract", rec, "--sweep", sweep, "-o", rec, "--force")
    assert code == 2 and "input" in err
    assert sf.info(rec).frames > 0
    code, _, err = cli("extract", rec, "--sweep", sweep, "-o", out, "--force")
    assert code == 0, err


@pytest.mark.parametrize("cut", ["header", "data"])
def test_unreadable_or_truncated_wav_is_refused(setup, cli, cut):
    tmp, sweep, rec, _ = setup
    raw = rec.read_bytes()
    bad = tmp / "cut.wav"
    bad.write_bytes(raw[:30] if cut == "header" else raw[: len(raw) // 2])
    code, _, err = cli("extract", bad, "--sweep", sweep, "-o", tmp / "o.wav")
    assert code == 2 and "cut.wav" in err and "Traceback" not in err
    assert not (tmp / "o.wav").exists()


def test_measure_against_simulated_device(tmp_path, cli):
    # The whole live path (sweep → device → recording → extraction) with a simulated card
    # that adds latency and a loopback channel.
    room = band_limited_room(FS, rt=0.2, length_s=0.4) * 0.2
    sf.write(tmp_path / "room.wav", room, FS, subtype="FLOAT")
    code, out, err = cli(
        "measure",
        tmp_path / "ir.wav",
        "--simulate",
        tmp_path / "room.wav",
        "--duration",
        2,
        "--silence",
        1,
        "--low",
        10,
        "--high",
        22000,
        # Channels count from 1: the room's one channel, then the loopback.
        "--reference-channel",
        2,
        "--sim-latency",
        512,
        "--sim-noise",
        -140,
        "--save-recording",
        tmp_path / "rec.wav",
    )
    assert code == 0, err
    assert "no sound will be played" in err
    ir, _ = sf.read(tmp_path / "ir.wav")
    assert rel_error_db(ir[: room.size], room) < -60
    assert sf.info(tmp_path / "rec.wav").channels == 2


def test_measure_on_a_real_card_requires_the_caution_to_be_confirmed(tmp_path, cli):
    code, _, err = cli("measure", tmp_path / "ir.wav", "--duration", 1)
    assert code == 2
    assert "CAUTION" in err and "--yes" in err
    assert not (tmp_path / "ir.wav").exists()


def test_measure_refuses_a_level_above_the_cap(tmp_path, cli):
    code, _, err = cli("measure", tmp_path / "ir.wav", "--level", "0", "--yes")
    assert code == 2 and "output cap" in err


def test_device_numbers_are_indices_and_words_are_names():
    # sounddevice reads a str as part of a device name, an int as its index.
    from roomconv.cli import build_parser, device_spec

    assert device_spec("0") == 0 and device_spec(" 12 ") == 12
    assert device_spec("USB Audio") == "USB Audio" and device_spec("hw:1,0") == "hw:1,0"
    a = build_parser().parse_args(["measure", "ir.wav", "--device", "3"])
    assert a.device == 3
