"""IR editing against closed forms and scipy, and the synth / materials / edit commands."""

import json

import numpy as np
import pytest
import soundfile as sf

from roomconv.synth import edit

from .reference import octave, schroeder_t30

FS = 48000
LN10 = np.log(10)


def _decay(T, seconds=2.0, seed=0):
    rng = np.random.default_rng(seed)
    t = np.arange(int(seconds * FS)) / FS
    return rng.standard_normal(t.size) * np.exp(-3 * LN10 * t / T)


def test_trim_and_fades():
    x = np.concatenate([np.zeros(1000), _decay(0.3), np.zeros(5000)])
    y, cut0, cut1 = edit.trim(x, FS, threshold_db=-60)
    assert cut0 == 1000 - int(0.001 * FS) and cut1 >= 5000
    f = edit.fade(np.ones((100, 1)), FS, fade_out_s=50 / FS)
    assert f[0, 0] == 1 and f[-1, 0] == 0 and np.all(np.diff(f[-50:, 0]) < 0)
    # A raised cosine (Hann half-window, Harris 1978) is 0.5 halfway through the fade.
    g = edit.fade(np.ones((100, 1)), FS, fade_in_s=50 / FS)
    assert g[0, 0] == 0 and g[25, 0] == pytest.approx(0.5) and g[50:, 0].min() == 1


def test_decay_scale_changes_T_by_the_factor():
    # Multiplying by exp(3·ln10·t/T·(1 − 1/k)) turns a decay of T into k·T (closed form).
    # The input is an evened-envelope noise decaying at 1 s in every band.
    from roomconv.synth.tail import diffuse_tail

    x = diffuse_tail(
        {b: 1.0 for b in (63, 125, 250, 500, 1000, 2000, 4000, 8000)}, 500.0, FS, 3 * FS, seed=4
    )
    # Read back with the ISO 3382-1 backward integration written out in reference.py.
    # The tail was made with T = 1 s in every band; that is the decay time handed in.
    y = edit.scale_decay(x, FS, 0.7, decay_times_s=[{b: 1.0 for b in edit.OCTAVES}])
    for band in (125, 1000, 4000):
        before = schroeder_t30(octave(x, FS, band), FS)
        after = schroeder_t30(octave(y[:, 0], FS, band), FS)
        assert before == pytest.approx(1.0, rel=0.05), band
        assert after == pytest.approx(0.7, rel=0.05), band


def _tone_rms_and_error(y, rate, f, skip):
    """RMS of y and of its difference from the ideal sin(2πf·n/rate), edges skipped."""
    ideal = np.sin(2 * np.pi * f * np.arange(y.size) / rate)
    m = slice(skip, y.size - skip)
    return np.sqrt(np.mean(y[m] ** 2)), np.sqrt(np.mean((y[m] - ideal[m]) ** 2))


def test_resample_keeps_a_19_khz_tone():
    # Physical criterion (sampling theorem): a 19 kHz tone lies below both Nyquist
    # frequencies (22.05 and 24 kHz), so ideal resampling returns the same sine sampled at the
    # new rate, rms 1/sqrt(2), same phase. Check its level within 0.1 dB, and the rms error
    # against the ideal sine below 1e-3: a time shift δ alone gives an rms error of
    # 2πfδ/sqrt(2), so 1e-3 also bounds any delay to below 1.2e-8 s (0.0006 samples).
    f = 19000.0
    x = np.sin(2 * np.pi * f * np.arange(FS) / FS)
    y = edit.resample(x, FS, 44100)[:, 0]
    assert y.size == 44100
    rms, err = _tone_rms_and_error(y, 44100, f, skip=2205)
    assert 20 * np.log10(rms * np.sqrt(2)) == pytest.approx(0.0, abs=0.1)
    assert err < 1e-3
    z = edit.resample(y, 44100, FS)[:, 0]
    assert z.size == FS
    rms, err = _tone_rms_and_error(z, FS, f, skip=2400)
    assert 20 * np.log10(rms * np.sqrt(2)) == pytest.approx(0.0, abs=0.1)
    assert err < 1e-3


def test_reverse():
    x = _decay(0.2, seconds=0.5)
    assert np.array_equal(edit.reverse(x)[:, 0], x[::-1])


def test_early_late_balance():
    x = np.ones(FS)
    y = edit.early_late_balance(x, FS, -6.0)
    assert y[0, 0] == pytest.approx(1.0) and y[-1, 0] == pytest.approx(10 ** (-6 / 20))


def test_synth_command_prints_prediction_and_writes_ir(tmp_path, cli):
    out = tmp_path / "room.wav"
    code, text, err = cli(
        "synth",
        out,
        "--room",
        "12x8x4",
        "--materials",
        "floor=carpet,walls=plaster,ceiling=acoustic-tile",
        "--seed",
        3,
        "--source",
        "3,2,1.5",
        "--receiver",
        "9,6,1.2",
        "--stereo",
        "spaced:0.5",
        "--rate",
        32000,
    )
    assert code == 0, err
    assert "Sabine" in text and "Eyring" in text
    ir, rate = sf.read(out)
    assert rate == 32000 and ir.shape[1] == 2
    prov = json.loads((tmp_path / "room.provenance.json").read_text())
    assert prov["settings"]["seed"] == 3


@pytest.mark.parametrize(
    "args, text",
    [
        (["--room", "12x8"], "three numbers"),
        (["--room", "12x-8x4"], "positive"),
        (["--room", "12x8x4", "--materials", "floor=lava"], "unknown material"),
        (["--room", "12x8x4", "--source", "13,2,1"], "outside the room"),
        (["--room", "12x8x4", "--rt60", "500:300"], "impossible"),
        (["--room", "12x8x4", "--stereo", "wide:3"], "not understood"),
    ],
)
def test_synth_refusals(tmp_path, cli, args, text):
    code, _, err = cli("synth", tmp_path / "x.wav", *args)
    assert code == 2 and text in err and "Traceback" not in err
    assert not (tmp_path / "x.wav").exists()


def test_materials_lists_at_least_15_materials(cli):
    code, text, _ = cli("materials")
    assert code == 0
    rows = [ln for ln in text.splitlines() if ln and ln[0].isalpha() and "material" not in ln]
    assert len(rows) >= 15 and "carpet" in text


def test_edit_command_never_touches_its_input(tmp_path, cli):
    src = tmp_path / "in.wav"
    sf.write(src, _decay(0.5), FS, subtype="FLOAT")
    before = src.read_bytes()
    code, text, err = cli(
        "edit",
        src,
        "-o",
        tmp_path / "out.wav",
        "--normalize",
        "-3",
        "--fade-out",
        "0.1",
        "--rate",
        "44100",
    )
    assert code == 0, err
    y, rate = sf.read(tmp_path / "out.wav")
    assert rate == 44100 and np.max(np.abs(y)) == pytest.approx(10 ** (-3 / 20), rel=1e-4)
    assert src.read_bytes() == before
    code, _, err = cli("edit", src, "-o", src, "--reverse", "--force")
    assert code == 2 and "input" in err
    code, _, err = cli("edit", src, "-o", tmp_path / "o2.wav")
    assert code == 2 and "no edit" in err
