"""Shared helpers: running the CLI in-process and making small test signals."""

from __future__ import annotations

import numpy as np
import pytest
from scipy.signal import butter, sosfilt

from roomconv.cli import main


@pytest.fixture
def cli(capsys):
    """Run ``roomconv ARGS`` in-process; returns (exit_code, stdout, stderr)."""

    def run(*args):
        code = main([str(a) for a in args])
        out = capsys.readouterr()
        return code, out.out, out.err

    return run


def band_limited_room(
    rate: int,
    rt: float = 0.3,
    length_s: float = 0.6,
    seed: int = 1,
    band=(100.0, 8000.0),
    direct_at: int = 200,
) -> np.ndarray:
    """A small synthetic room response of our own: direct sound plus exponentially decaying
    noise, band-limited so that a sweep wider than ``band`` captures all of it."""
    rng = np.random.default_rng(seed)
    n = int(length_s * rate)
    t = np.arange(n) / rate
    h = 0.05 * rng.standard_normal(n) * np.exp(-6.9078 * t / rt)
    h[:direct_at] = 0.0
    h[direct_at] = 0.3
    sos = butter(8, band, "bandpass", fs=rate, output="sos")
    return sosfilt(sos, h)


def rel_error_db(estimate: np.ndarray, truth: np.ndarray) -> float:
    n = max(estimate.size, truth.size)
    e = np.pad(estimate, (0, n - estimate.size))
    t = np.pad(truth, (0, n - truth.size))
    return float(10 * np.log10(np.sum((e - t) ** 2) / np.sum(t**2)))


def alsa_file_device(folder, capture: np.ndarray) -> dict:
    """An ALSA ``file``-plugin default device for PortAudio (see shared AUDIO-CI notes).

    Writes ``capture`` (mono, float32 LE) to CAPTURE.raw for the input side; playback lands
    in PLAYED.raw. Returns the environment for a subprocess (the variable must be set before
    PortAudio initialises).
    """
    import os

    np.asarray(capture, dtype="<f4").tofile(folder / "CAPTURE.raw")
    (folder / "alsa").mkdir()
    (folder / "alsa" / "asoundrc").write_text(f"""
pcm.rc_play {{ type file slave.pcm "null" file "{folder}/PLAYED.raw" format "raw" }}
pcm.rc_cap {{ type file slave.pcm "null" file "/dev/null" \
infile "{folder}/CAPTURE.raw" format "raw" }}
pcm.rc_duplex {{ type asym playback.pcm "rc_play" capture.pcm "rc_cap" }}
pcm.!default {{ type plug slave {{ pcm "rc_duplex" format FLOAT_LE channels 1 }} }}
""")
    return {**os.environ, "XDG_CONFIG_HOME": str(folder)}
