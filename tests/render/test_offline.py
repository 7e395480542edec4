"""``roomconv render``: exactness, mix and pre-delay closed forms, levels, dither, formats
and refusals."""

import os

import numpy as np
import pyloudnorm
import pytest
import soundfile as sf
from scipy.signal import fftconvolve, resample_poly

from roomconv.audio import audio_format_for
from roomconv.render.levels import TruePeakMeter
from roomconv.render.offline import RenderSettings, render_arrays, resample_ir

FS = 48000


@pytest.fixture
def files(tmp_path):
    rng = np.random.default_rng(0)
    dry = 0.1 * rng.standard_normal((FS * 2, 2))
    t = np.arange(int(0.4 * FS)) / FS
    ir = rng.standard_normal((t.size, 2)) * np.exp(-6.9 * t / 0.15)[:, None] * 0.05
    sf.write(tmp_path / "dry.wav", dry, FS, subtype="DOUBLE")
    sf.write(tmp_path / "dry_mono.wav", dry[:, 0], FS, subtype="DOUBLE")
    sf.write(tmp_path / "ir.wav", ir, FS, subtype="DOUBLE")
    sf.write(tmp_path / "ir_mono.wav", ir[:, 0], FS, subtype="DOUBLE")
    return tmp_path, dry, ir


def test_mix_1_is_exactly_the_linear_convolution(files, cli):
    tmp, dry, ir = files
    code, out, err = cli(
        "render",
        tmp / "dry.wav",
        "--ir",
        tmp / "ir.wav",
        "-o",
        tmp / "wet.wav",
        "--subtype",
        "DOUBLE",
        "--keep-ir-level",
    )
    assert code == 0, err
    wet, rate = sf.read(tmp / "wet.wav")
    ref = np.stack([fftconvolve(dry[:, c], ir[:, c]) for c in range(2)], axis=1)
    assert wet.shape == (dry.shape[0] + ir.shape[0] - 1, 2)
    assert 10 * np.log10(np.sum((wet - ref) ** 2) / np.sum(ref**2)) < -120
    # The default output is 32-bit float.
    code, _, _ = cli("render", tmp / "dry.wav", "--ir", tmp / "ir.wav", "-o", tmp / "w32.wav")
    assert sf.info(tmp / "w32.wav").subtype == "FLOAT"
    assert (tmp / "w32.provenance.json").exists()


def test_predelay_and_mix_closed_form(files):
    tmp, dry, ir = files
    d_ms, mix = 12.5, 0.3
    y = render_arrays(dry[:, :1], ir[:, :1], FS, RenderSettings(mix=mix, predelay_ms=d_ms))
    d = int(round(d_ms * FS / 1000))
    wet = np.concatenate([np.zeros(d), fftconvolve(dry[:, 0], ir[:, 0])])
    dry_pad = np.pad(dry[:, 0], (0, wet.size - dry.shape[0]))
    expected = mix * wet + (1 - mix) * dry_pad
    assert y.shape[0] == expected.size
    assert np.max(np.abs(y[:, 0] - expected)) < 1e-12


def test_true_stereo_order(files):
    tmp, dry, _ = files
    rng = np.random.default_rng(1)
    ir4 = rng.standard_normal((500, 4)) * 0.1
    y = render_arrays(dry, ir4, FS, RenderSettings())
    # Channel order LL, LR, RL, RR: left out = L⊛LL + R⊛RL, right out = L⊛LR + R⊛RR.
    left = fftconvolve(dry[:, 0], ir4[:, 0]) + fftconvolve(dry[:, 1], ir4[:, 2])
    right = fftconvolve(dry[:, 0], ir4[:, 1]) + fftconvolve(dry[:, 1], ir4[:, 3])
    assert np.allclose(y[:, 0], left) and np.allclose(y[:, 1], right)


def test_loudness_normalization_against_pyloudnorm(files, cli):
    tmp, _, _ = files
    code, out, err = cli(
        "render",
        tmp / "dry.wav",
        "--ir",
        tmp / "ir.wav",
        "-o",
        tmp / "l.wav",
        "--normalize",
        "loudness",
        "--target",
        "-20",
    )
    assert code == 0, err
    y, _ = sf.read(tmp / "l.wav")
    assert pyloudnorm.Meter(FS).integrated_loudness(y) == pytest.approx(-20.0, abs=0.05)


def test_true_peak_of_a_quarter_rate_sine():
    # A sine at fs/4 sampled at ±45°: sample peak 1/√2, true peak 1 (closed form).
    t = np.arange(4 * FS) / FS
    # Faded in and out: an abrupt start or stop would itself overshoot between samples.
    fade = np.minimum(1, np.minimum(t, t[-1] - t) / 0.5)
    x = (np.sin(2 * np.pi * FS / 4 * t + np.pi / 4) * fade)[:, None]
    m = TruePeakMeter(1)
    for i in range(0, x.shape[0], 1000):
        m.feed(x[i : i + 1000])
    m.finish()
    assert np.max(np.abs(x)) == pytest.approx(2**-0.5, abs=1e-3)
    assert m.peak == pytest.approx(1.0, abs=0.005)


def test_peak_normalization_and_clipping_warning(files, cli):
    tmp, _, _ = files
    code, _, err = cli(
        "render",
        tmp / "dry.wav",
        "--ir",
        tmp / "ir.wav",
        "-o",
        tmp / "p.wav",
        "--normalize",
        "peak",
        "--target",
        "-3",
    )
    assert code == 0
    y, _ = sf.read(tmp / "p.wav")
    assert 20 * np.log10(np.max(np.abs(y))) == pytest.approx(-3.0, abs=1e-3)
    code, _, err = cli(
        "render",
        tmp / "dry.wav",
        "--ir",
        tmp / "ir.wav",
        "-o",
        tmp / "c.wav",
        "--gain",
        "40",
        "--subtype",
        "PCM_24",
    )
    assert code == 0 and "clip" in err


def test_tpdf_dither_error_statistics(tmp_path, cli):
    # With TPDF dither the total error is signal-independent with variance LSB²/4
    # (LSB²/12 quantization + LSB²/6 dither; Lipshitz, Wannamaker & Vanderkooy 1992).
    t = np.arange(FS * 2) / FS
    quiet = 3e-4 * np.sin(2 * np.pi * 997 * t)
    sf.write(tmp_path / "q.wav", quiet, FS, subtype="DOUBLE")
    sf.write(tmp_path / "d.wav", np.array([1.0]), FS, subtype="DOUBLE")
    code, _, err = cli(
        "render",
        tmp_path / "q.wav",
        "--ir",
        tmp_path / "d.wav",
        "-o",
        tmp_path / "o.wav",
        "--subtype",
        "PCM_16",
    )
    assert code == 0, err
    y, _ = sf.read(tmp_path / "o.wav")
    e = y - quiet
    lsb = 2.0**-15
    assert np.mean(e) == pytest.approx(0, abs=0.05 * lsb)
    assert np.var(e) / lsb**2 == pytest.approx(0.25, rel=0.1)


def test_ir_resampled_with_a_steep_filter():
    # A 19 kHz tone in a 48 kHz IR resampled to 44.1 kHz must keep its level; scipy's default
    # polyphase filter loses far more this close to Nyquist.
    t = np.arange(48000) / 48000
    x = np.sin(2 * np.pi * 19000 * t)[:, None]
    y = resample_ir(x, 48000, 44100)[2000:-2000, 0]
    t2 = (np.arange(44100) / 44100)[2000:-2000]
    ref = np.sin(2 * np.pi * 19000 * t2)
    soxr_err = np.sqrt(np.mean((y - ref) ** 2))
    default = resample_poly(x[:, 0], 147, 160)[2000:-2000]
    assert soxr_err < 0.01
    assert soxr_err < np.sqrt(np.mean((default - ref) ** 2)) / 3
    # The physical criterion: the tone's amplitude, fitted by least squares (numpy.linalg.lstsq)
    # to a sine and a cosine at 19 kHz, stays within 0.1 dB of 1.
    basis = np.stack([np.sin(2 * np.pi * 19000 * t2), np.cos(2 * np.pi * 19000 * t2)], axis=1)
    (a, b), *_ = np.linalg.lstsq(basis, y, rcond=None)
    assert 20 * np.log10(np.hypot(a, b)) == pytest.approx(0.0, abs=0.1)


def test_ir_at_another_rate_is_resampled(files, cli):
    tmp, _, ir = files
    sf.write(tmp / "ir44.wav", resample_poly(ir, 147, 160, axis=0), 44100, subtype="DOUBLE")
    code, out, err = cli("render", tmp / "dry.wav", "--ir", tmp / "ir44.wav", "-o", tmp / "r.wav")
    assert code == 0, err
    assert "resampled from 44100" in out
    wet, rate = sf.read(tmp / "r.wav")
    assert rate == FS
    # Full convolution length: dry + response − 1, the response now 48000/44100 as long.
    n_ir = resample_poly(ir, 147, 160, axis=0).shape[0] * FS / 44100
    assert abs(wet.shape[0] - (FS * 2 + n_ir - 1)) <= 1


def test_rf64_when_a_wav_would_pass_4_gib():
    assert audio_format_for("x.wav", 1000) == "WAV"
    assert audio_format_for("x.wav", 5 * 1024**3) == "RF64"


@pytest.mark.parametrize(
    "case, text",
    [
        ("channels", "cannot route"),
        ("nan_ir", "NaN"),
        ("empty", "no samples"),
        ("folder", "does not exist"),
    ],
)
def test_refusals_leave_nothing_behind(files, cli, case, text):
    tmp, dry, ir = files
    dry_p, ir_p, out = tmp / "dry.wav", tmp / "ir.wav", tmp / "out.wav"
    if case == "channels":
        sf.write(tmp / "ir3.wav", np.zeros((10, 3)) + 0.1, FS)
        ir_p = tmp / "ir3.wav"
    elif case == "nan_ir":
        bad = ir.copy()
        bad[5] = np.nan
        sf.write(tmp / "nan.wav", bad, FS, subtype="FLOAT")
        ir_p = tmp / "nan.wav"
    elif case == "empty":
        sf.write(tmp / "empty.wav", np.zeros((0, 2)), FS)
        dry_p = tmp / "empty.wav"
    elif case == "folder":
        out = tmp / "missing" / "out.wav"
    before = set(os.listdir(tmp))
    code, _, err = cli("render", dry_p, "--ir", ir_p, "-o", out)
    assert code == 2 and text in err and "Traceback" not in err
    assert set(os.listdir(tmp)) == before  # no partial or temporary file left


def test_unwritable_folder(files, cli, tmp_path):
    tmp, _, _ = files
    ro = tmp / "ro"
    ro.mkdir()
    ro.chmod(0o555)
    try:
        if os.access(ro, os.W_OK):
            pytest.skip("running as a user who can write anywhere (root)")
        code, _, err = cli("render", tmp / "dry.wav", "--ir", tmp / "ir.wav", "-o", ro / "o.wav")
        assert code == 2 and "not writable" in err
    finally:
        ro.chmod(0o755)


def test_auto_precision_follows_the_output_format(files, cli):
    # auto: float32 arithmetic (about −130 dB) for float/integer files, float64 for DOUBLE.
    tmp, dry, ir = files
    ref = np.stack([fftconvolve(dry[:, c], ir[:, c]) for c in range(2)], axis=1)
    assert RenderSettings(subtype="FLOAT").engine_precision() == "float32"
    assert RenderSettings(subtype="DOUBLE").engine_precision() == "float64"
    assert RenderSettings(precision="float64").engine_precision() == "float64"
    code, _, err = cli(
        "render", tmp / "dry.wav", "--ir", tmp / "ir.wav", "-o", tmp / "f.wav", "--keep-ir-level"
    )
    assert code == 0, err
    wet, _ = sf.read(tmp / "f.wav")
    assert 10 * np.log10(np.sum((wet - ref) ** 2) / np.sum(ref**2)) < -120
