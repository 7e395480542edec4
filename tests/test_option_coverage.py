"""Options that had no test: routing (--shared, --outputs), --no-tail, dither, true-peak
normalization, harmonic IR levels, the live --ceiling refusal, exit code 1 and --debug.
Each check names the closed form or reference it is held to."""

from __future__ import annotations

import numpy as np
import pytest
import soundfile as sf
from scipy.signal import fftconvolve, resample_poly

FS = 48000


@pytest.fixture
def signals(tmp_path):
    rng = np.random.default_rng(11)
    dry = 0.1 * rng.standard_normal((FS // 2, 2))
    t = np.arange(int(0.1 * FS)) / FS
    ir6 = rng.standard_normal((t.size, 6)) * np.exp(-6.9 * t / 0.05)[:, None] * 0.1
    sf.write(tmp_path / "dry.wav", dry, FS, subtype="DOUBLE")
    sf.write(tmp_path / "ir2.wav", ir6[:, :2], FS, subtype="DOUBLE")
    sf.write(tmp_path / "ir6.wav", ir6, FS, subtype="DOUBLE")
    return tmp_path, dry, ir6


def _err_db(y, ref):
    return 10 * np.log10(np.sum((y - ref) ** 2) / np.sum(ref**2))


def test_shared_uses_the_first_ir_channel_for_every_input(signals, cli):
    tmp, dry, ir = signals
    code, _, err = cli(
        "render",
        tmp / "dry.wav",
        "--ir",
        tmp / "ir2.wav",
        "-o",
        tmp / "s.wav",
        "--keep-ir-level",  # compare with the raw convolution
        "--shared",
        "--subtype",
        "DOUBLE",
    )
    assert code == 0, err
    y, _ = sf.read(tmp / "s.wav")
    # Reference: scipy.signal.fftconvolve of each input with IR channel 1.
    ref = np.stack([fftconvolve(dry[:, c], ir[:, 0]) for c in range(2)], axis=1)
    assert y.shape == ref.shape and _err_db(y, ref) < -120


def test_outputs_routes_a_general_matrix_input_major(signals, cli):
    tmp, dry, ir = signals
    code, _, err = cli(
        "render",
        tmp / "dry.wav",
        "--ir",
        tmp / "ir6.wav",
        "-o",
        tmp / "m.wav",
        "--keep-ir-level",  # compare with the raw convolution
        "--outputs",
        3,
        "--subtype",
        "DOUBLE",
    )
    assert code == 0, err
    y, _ = sf.read(tmp / "m.wav")
    # IR channel i·M + o (0-based) carries input i to output o: y_o = Σ_i dry_i * h_(i·3+o),
    # computed with scipy.signal.fftconvolve.
    ref = np.stack(
        [sum(fftconvolve(dry[:, i], ir[:, i * 3 + o]) for i in range(2)) for o in range(3)], axis=1
    )
    assert y.shape == ref.shape and _err_db(y, ref) < -120


def test_no_tail_cuts_at_the_dry_length(signals, cli):
    tmp, dry, ir = signals
    code, _, err = cli(
        "render",
        tmp / "dry.wav",
        "--ir",
        tmp / "ir2.wav",
        "-o",
        tmp / "n.wav",
        "--keep-ir-level",  # compare with the raw convolution
        "--no-tail",
        "--subtype",
        "DOUBLE",
    )
    assert code == 0, err
    y, _ = sf.read(tmp / "n.wav")
    full = np.stack([fftconvolve(dry[:, c], ir[:, c]) for c in range(2)], axis=1)
    assert y.shape == dry.shape
    assert _err_db(y, full[: dry.shape[0]]) < -120


@pytest.mark.parametrize(
    "dither, rms_lsb",
    [
        # Rounding error of a busy signal is uniform on ±½ LSB: rms sqrt(1/12) = 0.289 LSB.
        # TPDF dither adds its own variance of 1/6 LSB², total 1/4: rms 0.5 LSB.
        # (Lipshitz, Wannamaker & Vanderkooy 1992, J. Audio Eng. Soc. 40(5), 355–375.)
        (False, np.sqrt(1 / 12)),
        (True, 0.5),
    ],
)
def test_dither_and_no_dither_error_levels(tmp_path, cli, dither, rms_lsb):
    rng = np.random.default_rng(3)
    dry = 0.2 * rng.standard_normal(FS)
    sf.write(tmp_path / "dry.wav", dry, FS, subtype="DOUBLE")
    sf.write(tmp_path / "unit.wav", np.array([1.0]), FS, subtype="DOUBLE")  # identity IR
    args = [
        "render",
        tmp_path / "dry.wav",
        "--ir",
        tmp_path / "unit.wav",
        "-o",
        tmp_path / "q.wav",
        "--subtype",
        "PCM_16",
    ]
    code, _, err = cli(*args, *([] if dither else ["--no-dither"]))
    assert code == 0, err
    y, _ = sf.read(tmp_path / "q.wav", dtype="int16")
    lsb_err = y.astype(float) - dry * 32768
    assert np.sqrt(np.mean(lsb_err**2)) == pytest.approx(rms_lsb, rel=0.03)
    if not dither:
        # Round to nearest: at most ½ LSB, plus the float32 engine's own error (about
        # −130 dB re full scale, i.e. well under 0.01 LSB of 16 bits).
        assert np.max(np.abs(lsb_err)) <= 0.51


def test_true_peak_normalization_lands_on_its_target(signals, cli):
    tmp, dry, _ = signals
    code, _, err = cli(
        "render",
        tmp / "dry.wav",
        "--ir",
        tmp / "ir2.wav",
        "-o",
        tmp / "tp.wav",
        "--normalize",
        "truepeak",
        "--target",
        -3,
        "--subtype",
        "DOUBLE",
    )
    assert code == 0, err
    y, _ = sf.read(tmp / "tp.wav")
    # Reference true peak: scipy.signal.resample_poly at 16x (BS.1770-4 Annex 2 asks at least
    # 4x). The meter and the reference agree within 0.1 dB here; EBU Tech 3341 allows
    # +0.2/-0.4 dB for true-peak meters (from memory).
    ref = np.max(np.abs(resample_poly(y, 16, 1, axis=0, window=("kaiser", 10.0))))
    assert 20 * np.log10(ref) == pytest.approx(-3.0, abs=0.1)


def test_harmonic_ir_levels_of_a_known_polynomial():
    # Farina (2000), AES 108th Convention, preprint 5093: with an exponential sweep of
    # amplitude A through y = x + a2·x² + a3·x³, harmonic k arrives T·ln(k)/ln(f2/f1) before
    # the linear response. Its level follows from the trigonometric identities
    # sin² = (1 − cos 2φ)/2 and sin³ = (3 sin φ − sin 3φ)/4: relative to the sweep, the 2nd
    # harmonic IR has magnitude a2·A/2 and the 3rd a3·A²/4, flat over their bands (both are
    # exponential sweeps of the same rate, so their spectra scale alike).
    from roomconv.measure.capture import SimulatedDevice
    from roomconv.measure.deconvolve import extract_ir
    from roomconv.measure.sweep import Sweep, harmonic_delay, sweep_signal

    s = Sweep(
        rate=FS,
        f_low=20,
        f_high=20000,
        duration=4.0,
        level_dbfs=-12,
        silence_pre=1.0,
        silence_post=1.0,
    )
    assert harmonic_delay(s, 3) == pytest.approx(4.0 * np.log(3) / np.log(1000))
    amp, a2, a3 = 10 ** (-12 / 20), 0.1, 0.05
    room = np.zeros(301)
    room[300] = 1.0
    dev = SimulatedDevice(room, noise_dbfs=-200.0, distortion=(a2, a3))
    ex = extract_ir(dev.playrec(sweep_signal(s), FS), FS, sweep=s, length_s=0.5)
    n = 1 << 16
    f = np.fft.rfftfreq(n, 1 / FS)
    for k, expected, band in (
        (2, a2 * amp / 2, (2000, 10000)),
        (3, a3 * amp**2 / 4, (3000, 12000)),
    ):
        mag = np.abs(np.fft.rfft(ex.harmonics[k][:, 0], n))[(f > band[0]) & (f < band[1])]
        assert 20 * np.log10(np.median(mag) / expected) == pytest.approx(0.0, abs=0.3), k


def test_live_ceiling_above_the_cap_is_refused_before_any_sound(signals, cli, monkeypatch):
    tmp, _, _ = signals
    import roomconv.measure.capture as capture

    class NoCard:  # no sound card needed: the refusal must come before any stream opens
        @staticmethod
        def query_devices(*_a, **_k):
            return {"default_samplerate": FS}

        def __getattr__(self, name):
            raise AssertionError(f"sound device touched: {name}")

    monkeypatch.setattr(capture, "load_sounddevice", lambda: NoCard())
    code, _, err = cli(
        "live", "--ir", tmp / "ir2.wav", "--ceiling", "0", "--yes", "--duration", "0.1"
    )
    assert code == 2
    assert "ceiling" in err and "-1 dBFS" in err and "Traceback" not in err


def test_internal_error_is_exit_1_and_debug_shows_the_traceback(signals, cli, monkeypatch):
    tmp, _, _ = signals
    import roomconv.render.offline as offline

    def broken(*_a, **_k):
        raise RuntimeError("made on purpose")

    monkeypatch.setattr(offline, "render_file", broken)
    args = ("render", tmp / "dry.wav", "--ir", tmp / "ir2.wav", "-o", tmp / "e.wav")
    code, _, err = cli(*args)
    assert code == 1
    assert "internal error: RuntimeError: made on purpose" in err
    assert "--debug" in err and "Traceback" not in err
    code, _, err = cli(*args, "--debug")
    assert code == 1
    assert "Traceback (most recent call last)" in err and "made on purpose" in err
    assert not (tmp / "e.wav").exists()


def test_explained_failure_is_exit_1(signals, cli, monkeypatch):
    tmp, _, _ = signals
    import roomconv.render.offline as offline
    from roomconv.errors import RoomconvError

    def refuses(*_a, **_k):
        raise RoomconvError("the engine stopped")

    monkeypatch.setattr(offline, "render_file", refuses)
    code, _, err = cli("render", tmp / "dry.wav", "--ir", tmp / "ir2.wav", "-o", tmp / "e.wav")
    assert code == 1
    assert err.strip() == "roomconv: error: the engine stopped"
