"""Octave and third-octave band filters (IEC 61260-1, base-10 mid-band frequencies).

Each band is a Butterworth band-pass on its exact band edges (order 3, or 4 near Nyquist), run
as second-order sections; that shape meets the class 1 acceptance limits (see the tests).
"""

from __future__ import annotations

from dataclasses import dataclass
from functools import lru_cache

import numpy as np
from scipy.signal import butter, sosfilt

from ..errors import InputError

#: Octave frequency ratio, base 10 (IEC 61260-1:2014, 5.2).
G = 10.0 ** (3.0 / 10.0)
REFERENCE_HZ = 1000.0

NOMINAL_OCTAVE = (31.5, 63, 125, 250, 500, 1000, 2000, 4000, 8000, 16000)
NOMINAL_THIRD = (
    25,
    31.5,
    40,
    50,
    63,
    80,
    100,
    125,
    160,
    200,
    250,
    315,
    400,
    500,
    630,
    800,
    1000,
    1250,
    1600,
    2000,
    2500,
    3150,
    4000,
    5000,
    6300,
    8000,
    10000,
    12500,
    16000,
    20000,
)
#: Highest usable upper band edge as a fraction of the Nyquist frequency.
NYQUIST_MARGIN = 0.9


@dataclass(frozen=True)
class Band:
    """One band: nominal label, exact mid-band frequency and edges (Hz), bands per octave.

    Examples
    --------
    >>> b = all_bands("octave")[5]
    >>> b.nominal, b.exact, b.label
    (1000.0, 1000.0, '1k')
    """

    nominal: float
    exact: float
    lower: float
    upper: float
    fraction: int

    @property
    def bandwidth(self) -> float:
        """Width of the band between its edges, Hz.

        Examples
        --------
        >>> b = [b for b in all_bands("octave") if b.nominal == 1000][0]
        >>> round(b.bandwidth, 1)      # f_m·(G^(1/2) − G^(−1/2)), IEC 61260-1:2014 eqs. 5–6
        704.6
        """
        return self.upper - self.lower

    @property
    def label(self) -> str:
        """The nominal centre as a short label: ``"500"``, ``"1k"``, ``"31.5"``."""
        f = self.nominal
        return f"{f / 1000:g}k" if f >= 1000 else f"{f:g}"


def exact_midband(index: int, fraction: int) -> float:
    """f_m = 1000 · G^(x/b) (IEC 61260-1:2014, eq. 3 for odd b).

    Examples
    --------
    One third-octave above 1 kHz is 1000·10^(0.3/3) Hz (G = 10^(3/10), base-ten system):

    >>> round(exact_midband(1, 3), 3), round(1000 * 10 ** 0.1, 3)
    (1258.925, 1258.925)
    """
    return REFERENCE_HZ * G ** (index / fraction)


def band_edges(fm: float, fraction: int) -> tuple[float, float]:
    """f1 = f_m·G^(−1/2b), f2 = f_m·G^(1/2b) (IEC 61260-1:2014, eqs. 5–6).

    Examples
    --------
    >>> [round(f, 1) for f in band_edges(1000.0, 1)]
    [707.9, 1412.5]
    """
    return fm * G ** (-1 / (2 * fraction)), fm * G ** (1 / (2 * fraction))


def all_bands(kind: str = "octave") -> list[Band]:
    """Every band of the set, whether or not a given sample rate can hold it.

    Examples
    --------
    >>> [b.nominal for b in all_bands("octave")][:4]
    [31.5, 63.0, 125.0, 250.0]
    >>> len(all_bands("third"))
    30
    """
    if kind not in ("octave", "third"):
        raise InputError(f"unknown band set '{kind}' (use octave or third)")
    fraction, nominals, first = (
        (1, NOMINAL_OCTAVE, -5) if kind == "octave" else (3, NOMINAL_THIRD, -16)
    )
    out = []
    for i, nom in enumerate(nominals):
        fm = exact_midband(first + i, fraction)
        lo, hi = band_edges(fm, fraction)
        out.append(Band(float(nom), fm, lo, hi, fraction))
    return out


def bands_for_rate(
    kind: str, rate: int, *, low: float | None = None, high: float | None = None
) -> tuple[list[Band], list[str]]:
    """Bands that fit below the Nyquist limit (and within ``low``..``high`` nominal Hz).

    Returns the bands and notes naming the ones skipped.

    Examples
    --------
    >>> kept, notes = bands_for_rate("octave", 16000)
    >>> kept[-1].nominal, len(notes)
    (4000.0, 2)
    """
    kept, notes = [], []
    for b in all_bands(kind):
        if low is not None and b.nominal < low or high is not None and b.nominal > high:
            continue
        if b.upper >= NYQUIST_MARGIN * rate / 2:
            notes.append(
                f"{b.label} Hz band skipped: its upper edge {b.upper:.0f} Hz is too close "
                f"to the Nyquist frequency at {rate} Hz"
            )
            continue
        kept.append(b)
    if not kept:
        raise InputError(f"no {kind} band fits at a sample rate of {rate} Hz")
    return kept, notes


@lru_cache(maxsize=256)
def band_sos(band: Band, rate: int, order: int | None = None) -> np.ndarray:
    """Second-order sections of the band's Butterworth band-pass.

    Order 3 (6 poles) by default; bands reaching above 15 % of the sample rate get order 4,
    because the bilinear transform squeezes their upper stop band and loosens the lower one.
    """
    if order is None:
        order = 3 if band.upper < 0.15 * rate else 4
    return butter(order, [band.lower, band.upper], btype="bandpass", fs=rate, output="sos")


def filter_band(h: np.ndarray, rate: int, band: Band, *, reverse: bool = False) -> np.ndarray:
    """Filter a 1-D signal into one band.

    With ``reverse`` the signal is filtered backwards in time and turned round again, so the
    filter's own ringing lies before the onset instead of in the decay (Rasmussen, Rindel &
    Henriksen 1991), which lowers the bias at low frequencies where B·T is small.

    References
    ----------
    IEC 61260-1:2014, Electroacoustics — Octave-band and fractional-octave-band filters.
    Rasmussen, B., Rindel, J. H., Henriksen, H. (1991). Design and measurement of short
    reverberation times at low frequencies in talk studios. J. Audio Eng. Soc. 39, 47–57.

    Examples
    --------
    A 1 kHz tone passes the 1 kHz octave at unit amplitude (a Butterworth band-pass has
    0 dB gain at its centre):

    >>> rate = 16000
    >>> t = np.arange(rate) / rate
    >>> y = filter_band(np.sin(2 * np.pi * 1000 * t), rate, all_bands("octave")[5])
    >>> round(float(np.sqrt(2 * np.mean(y[rate // 2 :] ** 2))), 3)
    1.0
    """
    sos = band_sos(band, rate)
    if reverse:
        return sosfilt(sos, h[::-1])[::-1]
    return sosfilt(sos, h)


def filter_bank(
    h: np.ndarray, rate: int, bands: list[Band], *, reverse: bool = False
) -> np.ndarray:
    """All bands of a 1-D signal, shape (n_bands, samples).

    Examples
    --------
    >>> rate = 16000
    >>> bands, _ = bands_for_rate("octave", rate)
    >>> filter_bank(np.random.default_rng(0).standard_normal(rate), rate, bands).shape
    (8, 16000)
    """
    return np.stack([filter_band(h, rate, b, reverse=reverse) for b in bands])
