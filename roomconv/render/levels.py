"""Streaming level meters for rendered audio: sample peak, true peak (4× oversampling) and
integrated loudness (ITU-R BS.1770-4), fed block by block so files of any length fit."""

from __future__ import annotations

import math

import numpy as np
from numpy.typing import NDArray

from ..signal import gain_to_db

# scipy.signal is imported inside the meters that need it: importing it costs about a second,
# which a plain render (sample peak only) should not pay.

__all__ = ["PeakMeter", "TruePeakMeter", "LoudnessMeter", "k_weighting_sos"]

# Analogue prototypes of the two K-weighting stages. Evaluated by the bilinear transform at
# 48 kHz they give the coefficients published in ITU-R BS.1770-4, Tables 1 and 2 (to better
# than 1e-8, checked in tests/render/test_levels.py); at any other rate the same response.
# The values are the widely used analogue fit to those tables, as distributed with the
# open-source libebur128 (from memory; the standard itself prints only the 48 kHz table).
_SHELF_HZ = 1681.974450955533
_SHELF_GAIN_DB = 3.999843853973347
_SHELF_Q = 0.7071752369554196
_SHELF_VB_EXP = 0.4996667741545416
_HIGHPASS_HZ = 38.13547087602444
_HIGHPASS_Q = 0.5003270373238773

#: BS.1770-4 gating: 400 ms blocks, 75 % overlap, absolute gate −70 LKFS, relative −10 LU,
#: and the −0.691 dB offset that makes a 997 Hz sine at 0 dBFS read −3.01 LKFS in one channel
#: (BS.1770-4, Annex 1; the −3.01 figure quoted from memory).
_BLOCK_S = 0.4
_HOP_S = 0.1
_ABS_GATE_LKFS = -70.0
_REL_GATE_LU = -10.0
_OFFSET_DB = -0.691


def k_weighting_sos(rate: float) -> NDArray[np.float64]:
    """The K-weighting filter of ITU-R BS.1770-4 at any sample rate, as second-order sections.

    Stage 1 is the high shelf that models the head (+4 dB above about 2 kHz), stage 2 the
    revised low-frequency B-curve high-pass (RLB, about 38 Hz); both come from their analogue
    prototypes through the bilinear transform with pre-warping.

    Parameters
    ----------
    rate : float
        Sample rate, Hz.

    Returns
    -------
    ndarray, shape (2, 6)
        ``scipy.signal.sosfilt`` sections ``[b0, b1, b2, 1, a1, a2]``.

    References
    ----------
    ITU-R BS.1770-4 (2015), Annex 1, Tables 1 and 2 (the 48 kHz coefficients).

    Examples
    --------
    >>> k_weighting_sos(48000)[0, :3].round(6)
    array([ 1.535125, -2.691696,  1.198393])
    """
    k = math.tan(math.pi * _SHELF_HZ / rate)
    vh = 10.0 ** (_SHELF_GAIN_DB / 20.0)
    vb = vh**_SHELF_VB_EXP
    a0 = 1.0 + k / _SHELF_Q + k * k
    shelf = [
        (vh + vb * k / _SHELF_Q + k * k) / a0,
        2.0 * (k * k - vh) / a0,
        (vh - vb * k / _SHELF_Q + k * k) / a0,
        1.0,
        2.0 * (k * k - 1.0) / a0,
        (1.0 - k / _SHELF_Q + k * k) / a0,
    ]
    k = math.tan(math.pi * _HIGHPASS_HZ / rate)
    a0 = 1.0 + k / _HIGHPASS_Q + k * k
    highpass = [1.0, -2.0, 1.0, 1.0, 2.0 * (k * k - 1.0) / a0, (1.0 - k / _HIGHPASS_Q + k * k) / a0]
    return np.array([shelf, highpass])


class PeakMeter:
    """Largest absolute sample value seen so far.

    Attributes
    ----------
    peak : float
        Linear full-scale peak (1.0 = 0 dBFS).

    Examples
    --------
    >>> m = PeakMeter()
    >>> m.feed(np.array([[0.25], [-0.5]]))
    >>> round(m.dbfs, 2)
    -6.02
    """

    def __init__(self) -> None:
        self.peak = 0.0

    def feed(self, block: np.ndarray) -> None:
        """Take the next block (samples × channels)."""
        if block.size:
            self.peak = max(self.peak, float(np.max(np.abs(block))))

    @property
    def dbfs(self) -> float:
        """Sample peak in dBFS (−inf before any non-zero sample)."""
        return float(gain_to_db(self.peak))


class TruePeakMeter:
    """Peak of the signal upsampled 4× (ITU-R BS.1770-4, Annex 2), block by block.

    Each block is upsampled together with the last 32 samples of the previous one; outputs of
    the first and last 16 input samples are not measured in that call, so every sample is
    measured with enough context on both sides of the interpolation filter.

    Parameters
    ----------
    channels : int
        Number of channels of the blocks that will be fed.

    References
    ----------
    ITU-R BS.1770-4 (2015), Annex 2: guidelines for accurate measurement of true-peak level.

    Examples
    --------
    >>> m = TruePeakMeter(1)
    >>> n = np.arange(4800)
    >>> m.feed(np.sin(2 * np.pi * 0.25 * n + np.pi / 4)[:, None])  # samples miss the crests
    >>> m.finish()
    >>> round(m.dbtp, 1)
    0.0
    """

    CONTEXT = 32
    UP = 4
    #: Kaiser β of the interpolation filter: β = 10 gives about 100 dB stop-band attenuation
    #: by Kaiser's design rule β = 0.1102·(A − 8.7) (Oppenheim & Schafer, Discrete-Time
    #: Signal Processing, the Kaiser window design section; equation quoted from memory).
    KAISER_BETA = 10.0

    def __init__(self, channels: int):
        self._tail = np.zeros((self.CONTEXT, channels))
        self.peak = 0.0

    def feed(self, block: np.ndarray) -> None:
        """Take the next block (samples × channels)."""
        from scipy.signal import resample_poly  # noqa: PLC0415

        x = np.concatenate([self._tail, block])
        up = resample_poly(x, self.UP, 1, axis=0, window=("kaiser", self.KAISER_BETA))
        # Outputs near either end lack filter context; those samples are measured in the
        # neighbouring call instead.
        skip = (self.CONTEXT // 2) * self.UP
        if up.shape[0] > 2 * skip:
            self.peak = max(self.peak, float(np.max(np.abs(up[skip:-skip]))))
        self._tail = x[-self.CONTEXT :]

    def finish(self) -> None:
        """Measure the last samples (call once after the last block)."""
        self.feed(np.zeros((self.CONTEXT, self._tail.shape[1])))

    @property
    def dbtp(self) -> float:
        """True peak in dBTP (−inf for silence)."""
        return float(gain_to_db(self.peak))


class LoudnessMeter:
    """Integrated loudness (LUFS) with K-weighting and the two-stage gate of BS.1770-4.

    The K-weighting filters (:func:`k_weighting_sos`) run with carried state, and the 400 ms
    gating blocks (75 % overlap) are assembled from 100 ms sums, so memory stays bounded.
    Channel weights 1.0 (L, R, C) and 1.41 (surrounds, channels 4 and 5), as in the
    standard; further channels weigh 1.0.

    Parameters
    ----------
    rate : int
        Sample rate, Hz.
    channels : int
        Number of channels of the blocks that will be fed.

    References
    ----------
    ITU-R BS.1770-4 (2015), Algorithms to measure audio programme loudness and true-peak
    audio level, Annex 1, eqs. (1)–(7) and Table 3 (channel weights).

    Examples
    --------
    >>> rate = 48000
    >>> t = np.arange(5 * rate) / rate
    >>> tone = 10 ** (-23 / 20) * np.sin(2 * np.pi * 1000 * t)
    >>> m = LoudnessMeter(rate, 2)
    >>> m.feed(np.stack([tone, tone], axis=1))
    >>> round(m.integrated(), 1)  # EBU Tech 3341, test 1: -23 dBFS stereo sine reads -23 LUFS
    -23.0
    """

    WEIGHTS = (1.0, 1.0, 1.0, 1.41, 1.41)

    def __init__(self, rate: int, channels: int):
        self.rate = rate
        self._sos = k_weighting_sos(rate)
        self._zi = np.zeros((self._sos.shape[0], 2, channels))
        self.hop = int(round(_HOP_S * rate))
        self.hops: list[np.ndarray] = []
        self._partial = np.zeros(channels)
        self._partial_n = 0
        self.n = 0
        self.g = np.array(
            [self.WEIGHTS[i] if i < len(self.WEIGHTS) else 1.0 for i in range(channels)]
        )

    def feed(self, block: np.ndarray) -> None:
        """Take the next block (samples × channels)."""
        from scipy.signal import sosfilt  # noqa: PLC0415

        y, self._zi = sosfilt(self._sos, block, axis=0, zi=self._zi)
        sq = y * y
        self.n += sq.shape[0]
        pos = 0
        while pos < sq.shape[0]:
            take = min(self.hop - self._partial_n, sq.shape[0] - pos)
            self._partial += sq[pos : pos + take].sum(axis=0)
            self._partial_n += take
            pos += take
            if self._partial_n == self.hop:
                self.hops.append(self._partial.copy())
                self._partial[:] = 0
                self._partial_n = 0

    def integrated(self) -> float:
        """Gated integrated loudness of everything fed so far.

        Returns
        -------
        float
            LUFS (LKFS); −inf when shorter than one 400 ms block or when every block falls
            below the gates.
        """
        hops = self.hops + ([self._partial.copy()] if self._partial_n else [])
        arr = np.array(hops) if hops else np.zeros((0, self.g.size))
        duration_s = self.n / self.rate
        n_blocks = int(np.round((duration_s - _BLOCK_S) / _HOP_S)) + 1
        if n_blocks < 1:
            return float("-inf")
        per_block = int(round(_BLOCK_S / _HOP_S))
        z = np.array([arr[j : j + per_block].sum(axis=0) for j in range(n_blocks)]) / (
            _BLOCK_S * self.rate
        )
        power = z @ self.g
        with np.errstate(divide="ignore"):
            lj = _OFFSET_DB + 10 * np.log10(power)
        gated = lj >= _ABS_GATE_LKFS
        if not gated.any():
            return float("-inf")
        rel = _OFFSET_DB + 10 * np.log10(np.mean(power[gated])) + _REL_GATE_LU
        final = gated & (lj > rel)
        if not final.any():
            return float("-inf")
        return float(_OFFSET_DB + 10 * np.log10(np.mean(power[final])))
