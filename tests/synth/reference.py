"""Reference computations written out for the tests, independent of roomconv.analysis."""

from __future__ import annotations

import numpy as np
from scipy.signal import butter, sosfilt


def octave(x: np.ndarray, rate: int, band_hz: float) -> np.ndarray:
    """One octave band by a 3rd-order Butterworth band-pass (scipy), edges fc/√2 and fc·√2."""
    sos = butter(3, [band_hz / np.sqrt(2), band_hz * np.sqrt(2)], "bandpass", fs=rate, output="sos")
    return sosfilt(sos, x)


def schroeder_t30(x: np.ndarray, rate: int) -> float:
    """T30 by ISO 3382-1:2009, 5.3: backward integration, line fit from −5 to −35 dB."""
    e = np.cumsum((x * x)[::-1])[::-1]
    db = 10 * np.log10(e / e[0])
    i5, i35 = int(np.argmax(db <= -5)), int(np.argmax(db <= -35))
    t = np.arange(x.size) / rate
    slope = np.polyfit(t[i5:i35], db[i5:i35], 1)[0]
    return float(-60.0 / slope)
