"""Make the demo's dry clips. Everything here is synthesized by us; nothing is recorded.

- plucks.wav: a short plucked-string phrase (Karplus-Strong string model, Karplus & Strong
  1983), mono, 48 kHz.
- claps.wav: hand-clap-like transients (short filtered noise bursts with fast decays).
- speech.wav: a sentence spoken by the espeak-ng speech synthesizer (skipped with a note if
  espeak-ng is not installed), resampled to 48 kHz.

Run from the repository root: python demo_audio/make_clips.py  (deterministic: fixed seeds).
"""

from __future__ import annotations

import shutil
import subprocess
import sys
import tempfile
from pathlib import Path

import numpy as np
import soundfile as sf
from scipy.signal import butter, resample_poly, sosfilt

RATE = 48000
HERE = Path(__file__).resolve().parent


def pluck(freq: float, dur: float, rng: np.random.Generator, brightness: float = 0.5):
    """Karplus-Strong: a noise burst circulating in a delay line with a two-point average."""
    n = int(dur * RATE)
    period = RATE / freq
    d = int(period)
    frac = period - d
    buf = rng.uniform(-1, 1, d + 1)
    # Soften the attack: low-pass the initial burst.
    buf = np.convolve(buf, [brightness, 1 - brightness], mode="same")
    out = np.empty(n)
    decay = 0.996
    for i in range(n):
        a = buf[i % (d + 1)]
        b = buf[(i + 1) % (d + 1)]
        out[i] = a
        # Fractional delay by linear interpolation keeps the pitch honest.
        buf[i % (d + 1)] = decay * ((1 - frac) * 0.5 * (a + b) + frac * b)
    return out


def plucks(rng):
    notes = [
        (220.0, 0.0),
        (277.2, 0.45),
        (329.6, 0.9),
        (440.0, 1.35),
        (329.6, 1.8),
        (370.0, 2.4),
        (293.7, 2.85),
        (246.9, 3.3),
        (220.0, 3.9),
    ]
    out = np.zeros(int(5.5 * RATE))
    for f, t in notes:
        s = pluck(f, 1.5, rng)
        i = int(t * RATE)
        seg = out[i : i + s.size]
        seg += s[: seg.size]
    return out


def claps(rng):
    out = np.zeros(int(4.0 * RATE))
    sos = butter(2, [900, 2600], "bandpass", fs=RATE, output="sos")
    for k, t in enumerate([0.2, 0.7, 1.2, 1.45, 1.7, 2.5, 2.75, 3.0]):
        n = int(0.12 * RATE)
        tt = np.arange(n) / RATE
        # A clap is a few micro-bursts a millisecond or so apart, then a fast decay.
        env = sum(
            np.exp(-np.maximum(tt - j * 0.0011, 0) / 0.0007) * (tt >= j * 0.0011) for j in range(3)
        ) + 0.6 * np.exp(-tt / 0.02)
        burst = sosfilt(sos, rng.standard_normal(n)) * env
        i = int(t * RATE)
        out[i : i + n] += burst * (0.8 + 0.2 * (k % 3))
    return out


def speech():
    exe = shutil.which("espeak-ng")
    if exe is None:
        print("note: espeak-ng not installed; speech.wav not made", file=sys.stderr)
        return None
    with tempfile.TemporaryDirectory() as tmp:
        wav = Path(tmp) / "s.wav"
        text = "Welcome to Quillmere Hall. Listen to how the room answers every word."
        subprocess.run([exe, "-v", "en-gb", "-s", "150", "-w", str(wav), text], check=True)
        x, rate = sf.read(wav)
    g = np.gcd(rate, RATE)
    return resample_poly(x, RATE // g, rate // g)


def save(name, x):
    x = x / np.max(np.abs(x)) * 10 ** (-3 / 20)
    sf.write(HERE / name, x, RATE, subtype="PCM_16")
    print(f"wrote demo_audio/{name} ({x.size / RATE:.1f} s)")


def main():
    rng = np.random.default_rng(2026)
    save("plucks.wav", plucks(rng))
    save("claps.wav", claps(rng))
    sp = speech()
    if sp is not None:
        save("speech.wav", sp)


if __name__ == "__main__":
    main()
