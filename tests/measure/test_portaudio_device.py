"""The real PortAudio path, without hardware: an ALSA ``file`` plugin device.

Playback lands in PLAYED.raw, capture is read from CAPTURE.raw (float32, mono), which holds the
sweep convolved with a known room. See shared AUDIO-CI notes: the variable must be set before
PortAudio initialises, so the measurement runs in a subprocess.
"""

import ctypes.util
import subprocess
import sys

import numpy as np
import pytest
import soundfile as sf
from scipy.signal import fftconvolve

from roomconv.measure.sweep import Sweep, sweep_signal
from tests.conftest import alsa_file_device, band_limited_room, rel_error_db

pytestmark = [pytest.mark.audio, pytest.mark.timeout(120)]

FS = 48000


def _alsa_available() -> str | None:
    if ctypes.util.find_library("portaudio") is None:
        return "the PortAudio library (libportaudio2) is not installed"
    if ctypes.util.find_library("asound") is None:
        return "alsa-lib is not installed"
    return None


@pytest.mark.skipif(_alsa_available() is not None, reason=str(_alsa_available()))
def test_measure_through_portaudio_file_device(tmp_path):
    s = Sweep(
        rate=FS,
        f_low=10,
        f_high=22000,
        duration=1.5,
        level_dbfs=-20,
        silence_pre=0.3,
        silence_post=1.0,
    )
    room = band_limited_room(FS, rt=0.15, length_s=0.3) * 0.3
    answer = fftconvolve(sweep_signal(s), room)
    capture = np.zeros(answer.size + 3 * FS)
    capture[: answer.size] = answer
    env = alsa_file_device(tmp_path, capture)
    cmd = [
        sys.executable,
        "-m",
        "roomconv",
        "measure",
        str(tmp_path / "ir.wav"),
        "--yes",
        "--duration",
        "1.5",
        "--low",
        "10",
        "--high",
        "22000",
        "--pre",
        "0.3",
        "--silence",
        "1.0",
        "--level",
        "-20",
        "--length",
        "0.5",
    ]
    proc = subprocess.run(cmd, env=env, capture_output=True, text=True, timeout=90)
    assert proc.returncode == 0, proc.stderr
    assert "CAUTION" in proc.stderr
    ir, rate = sf.read(tmp_path / "ir.wav")
    assert rate == FS
    # The capture stream reads the file from its start, so the room appears at lag 0 (give
    # or take a buffer the driver may insert): align on the cross-correlation, then compare.
    lag = int(np.argmax(np.abs(np.correlate(ir[:4000], room[:2000], mode="valid"))))
    assert lag < 4000 - 2000
    assert rel_error_db(ir[lag : lag + room.size], room) < -60
    # What was played is the sweep, capped: never above the level asked for.
    played = np.fromfile(tmp_path / "PLAYED.raw", dtype="<f4")
    assert played.size > 0
    assert np.max(np.abs(played)) <= 10 ** (-20 / 20) * 1.001


METER_SCRIPT = """
import numpy as np
from roomconv.measure.capture import SoundCard, metered_playrec
levels = []
tone = 0.1 * np.sin(2 * np.pi * 1000 * np.arange(24000) / 48000)
rec = metered_playrec(SoundCard(), tone, 48000, lambda db, f: levels.append((db, f)))
print(len(levels), max(db for db, _ in levels), levels[-1][1], rec.shape[0])
"""


@pytest.mark.skipif(_alsa_available() is not None, reason=str(_alsa_available()))
def test_level_meter_through_portaudio_file_device(tmp_path):
    # The capture file holds a tone at −20 dBFS; the meter must read it while "recording".
    t = np.arange(3 * FS) / FS
    env = alsa_file_device(tmp_path, 0.1 * np.sin(2 * np.pi * 500 * t))
    proc = subprocess.run(
        [sys.executable, "-c", METER_SCRIPT], env=env, capture_output=True, text=True, timeout=60
    )
    assert proc.returncode == 0, proc.stderr
    count, peak, last, frames = proc.stdout.split()
    assert int(count) >= 3 and float(last) == 1.0 and int(frames) == 24000
    assert float(peak) == pytest.approx(-20.0, abs=0.5)
