"""Live convolution: the processor against scipy, and the real PortAudio path through an ALSA
file-plugin device (input read from CAPTURE.raw, output written to PLAYED.raw)."""

import ctypes.util
import subprocess
import sys

import numpy as np
import pytest
import soundfile as sf
from scipy.signal import fftconvolve

from roomconv.render.stream import LiveProcessor
from tests.conftest import alsa_file_device

FS = 48000


@pytest.mark.parametrize("precision, max_error_db", [("float64", -250), ("auto", -120)])
def test_processor_output_is_the_convolution_after_its_fade_in(precision, max_error_db):
    # Reference: scipy.signal.fftconvolve. 'auto' computes in float32 (the stream's own
    # format); its stated error is about -135 dB, checked here with a margin.
    rng = np.random.default_rng(0)
    t = np.arange(int(0.5 * FS)) / FS
    ir = rng.standard_normal(t.size) * np.exp(-20 * t) * 0.02
    x = 0.1 * rng.standard_normal((FS * 2, 1))
    proc = LiveProcessor(ir, FS, block=128, fade_in_s=0.25, gain_db=0.0, precision=precision)
    y = np.concatenate([proc.process(x[i : i + 128]) for i in range(0, x.shape[0], 128)])
    ref = fftconvolve(x[:, 0], ir)[: y.shape[0]]
    assert np.max(np.abs(y)) <= 10 ** (-1 / 20) + 1e-12  # the output cap holds
    settled = slice(int(0.25 * FS), None)
    # The limiter must not have acted on this level, so the settled part is the convolution.
    assert proc.stats.limiter_db == 0.0
    err = y[settled, 0] - ref[settled]
    assert 20 * np.log10(np.linalg.norm(err) / np.linalg.norm(ref[settled])) < max_error_db
    assert proc.stats.callbacks == x.shape[0] // 128
    assert proc.stats.compute.count == proc.stats.callbacks


def test_compute_log_keeps_a_bounded_window_and_the_whole_run_mean():
    from roomconv.render.stream import ComputeLog

    log = ComputeLog(size=8)
    for v in range(20):
        log.add(float(v))
    assert log.mean_s == pytest.approx(np.mean(np.arange(20)))
    assert list(log.recent()) == list(range(12, 20))
    assert list(log.recent(skip=15)) == list(range(15, 20))
    assert log.percentile_s(100) == 19


def test_limiter_holds_the_ceiling_when_the_level_is_far_too_high():
    x = np.ones((FS, 1))
    proc = LiveProcessor(
        np.array([4.0]), FS, block=256, gain_db=20, fade_in_s=0.01, ceiling_dbfs=-6
    )
    y = np.concatenate([proc.process(x[i : i + 256]) for i in range(0, FS - 255, 256)])
    assert np.max(np.abs(y)) <= 10 ** (-6 / 20) + 1e-12
    # Closed form: a constant 1 through a 4× response and +20 dB is 40 at full level; held at
    # the −6 dBFS ceiling, the gain reduction is 20·log10(40 / 10^(−6/20)) ≈ 38.06 dB.
    assert proc.stats.limiter_db == pytest.approx(20 * np.log10(40 / 10 ** (-6 / 20)), abs=0.01)


def _alsa_missing():
    if ctypes.util.find_library("portaudio") is None:
        return "the PortAudio library (libportaudio2) is not installed"
    return None


@pytest.mark.audio
@pytest.mark.timeout(120)
@pytest.mark.skipif(_alsa_missing() is not None, reason=str(_alsa_missing()))
def test_live_through_portaudio_file_device(tmp_path):
    rng = np.random.default_rng(1)
    t = np.arange(int(0.3 * FS)) / FS
    ir = rng.standard_normal(t.size) * np.exp(-25 * t) * 0.02
    sf.write(tmp_path / "ir.wav", ir, FS, subtype="DOUBLE")
    x = (0.1 * rng.standard_normal(FS * 3)).astype("<f4")
    env = alsa_file_device(tmp_path, np.concatenate([x, np.zeros(FS * 2, "<f4")]))
    proc = subprocess.run(
        [
            sys.executable,
            "-m",
            "roomconv",
            "live",
            "--ir",
            str(tmp_path / "ir.wav"),
            "--keep-ir-level",  # compared with the raw convolution below
            "--yes",
            "--block",
            "256",
            "--gain",
            "0",
            "--rate",
            str(FS),
            "--duration",
            "2.5",
        ],
        env=env,
        capture_output=True,
        text=True,
        timeout=90,
    )
    assert proc.returncode == 0, proc.stderr
    assert "CAUTION" in proc.stderr and "dropouts" in proc.stdout
    played = np.fromfile(tmp_path / "PLAYED.raw", dtype="<f4").astype(float)
    ref = fftconvolve(x.astype(float), ir)
    # PortAudio puts some silence in front of the playback: find it, then compare after
    # the fade-in (0.5 s) and before the fade-out.
    seg = ref[FS : FS + 4096]
    corr = np.correlate(played[: 2 * FS + 20000], seg, mode="valid")
    offset = int(np.argmax(corr)) - FS
    assert 0 <= offset < 20000
    got = played[offset + FS : offset + 2 * FS]
    want = ref[FS : 2 * FS]
    err = 10 * np.log10(np.sum((got - want) ** 2) / np.sum(want**2))
    assert err < -100  # float32 I/O bounds it


def test_float32_live_engine_keeps_its_precision_over_many_partitions():
    # The float32 engine's stated -135 dB must not erode as partitions pile up: a 10 s
    # response in 32-sample blocks puts over 450 partitions in the long stage. Reference:
    # scipy.signal.fftconvolve in float64; the response decays like a room's (T = 5 s).
    rng = np.random.default_rng(4)
    t = np.arange(10 * FS) / FS
    h = rng.standard_normal(t.size) * np.exp(-6.9 * t / 5.0)
    h /= np.sqrt(np.sum(h**2))
    eng = LiveProcessor(h, FS, block=32).engine  # precision "auto": float32
    assert eng.stages[-1].P > 450
    n = 12 * FS
    x = 0.1 * rng.standard_normal(n)
    y = np.concatenate([eng.process(x[i : i + 32, None]) for i in range(0, n, 32)])[:, 0]
    ref = fftconvolve(x, h)[:n]
    tail = slice(10 * FS, n)  # every partition busy
    err = 10 * np.log10(np.sum((y[tail] - ref[tail]) ** 2) / np.sum(ref[tail] ** 2))
    assert err < -120
