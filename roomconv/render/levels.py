"""Streaming level meters for rendered audio: sample peak, true peak (4× oversampling) and
integrated loudness (ITU-R BS.1770-4), fed block by block so files of any length fit."""

from __future__ import annotations

import numpy as np

# scipy.signal is imported inside the meters that need it: importing it costs about a second,
# which a plain render (sample peak only) should not pay.


class PeakMeter:
    def __init__(self):
        self.peak = 0.0

    def feed(self, block: np.ndarray) -> None:
        if block.size:
            self.peak = max(self.peak, float(np.max(np.abs(block))))

    @property
    def dbfs(self) -> float:
        return 20 * np.log10(self.peak) if self.peak > 0 else float("-inf")


class TruePeakMeter:
    """Peak of the signal upsampled 4× (ITU-R BS.1770-4, Annex 2), block by block.

    Each block is upsampled together with the last 32 samples of the previous one; outputs of
    the first and last 16 input samples are not measured in that call, so every sample is
    measured with enough context on both sides of the interpolation filter.

    References
    ----------
    ITU-R BS.1770-4 (2015), Annex 2: guidelines for accurate measurement of true-peak level.
    """

    CONTEXT = 32
    UP = 4

    def __init__(self, channels: int):
        self._tail = np.zeros((self.CONTEXT, channels))
        self.peak = 0.0

    def feed(self, block: np.ndarray) -> None:
        from scipy.signal import resample_poly  # noqa: PLC0415
        x = np.concatenate([self._tail, block])
        up = resample_poly(x, self.UP, 1, axis=0, window=("kaiser", 10.0))
        # Outputs near either end lack filter context; those samples are measured in the
        # neighbouring call instead.
        skip = (self.CONTEXT // 2) * self.UP
        if up.shape[0] > 2 * skip:
            self.peak = max(self.peak, float(np.max(np.abs(up[skip:-skip]))))
        self._tail = x[-self.CONTEXT:]

    def finish(self) -> None:
        self.feed(np.zeros((self.CONTEXT, self._tail.shape[1])))

    @property
    def dbtp(self) -> float:
        return 20 * np.log10(self.peak) if self.peak > 0 else float("-inf")


class LoudnessMeter:
    """Integrated loudness (LUFS) with K-weighting and the two-stage gate of BS.1770-4.

    The K-weighting coefficients come from pyloudnorm (a well-kept implementation of the
    standard's filters at any sample rate); the filters run with carried state, and the
    400 ms gating blocks (75 % overlap) are assembled from 100 ms sums, so memory stays
    bounded. Channel weights 1.0 (L, R, C) and 1.41 (surrounds), as in the standard.

    References
    ----------
    ITU-R BS.1770-4 (2015), Algorithms to measure audio programme loudness and true-peak
    audio level, eqs. (1)–(7).
    """

    WEIGHTS = (1.0, 1.0, 1.0, 1.41, 1.41)

    def __init__(self, rate: int, channels: int):
        import pyloudnorm  # noqa: PLC0415 - only loudness normalization needs it
        from scipy.signal import lfilter_zi  # noqa: PLC0415
        meter = pyloudnorm.Meter(rate)
        self.rate = rate
        self.filters = [(f.b, f.a) for f in meter._filters.values()]
        self.state = [np.outer(lfilter_zi(b, a), np.zeros(channels)) for b, a in self.filters]
        self.hop = int(round(0.1 * rate))
        self.hops: list[np.ndarray] = []
        self._partial = np.zeros(channels)
        self._partial_n = 0
        self.n = 0
        self.g = np.array([self.WEIGHTS[i] if i < 5 else 1.0 for i in range(channels)])

    def feed(self, block: np.ndarray) -> None:
        from scipy.signal import lfilter  # noqa: PLC0415
        y = block
        for i, (b, a) in enumerate(self.filters):
            y, self.state[i] = lfilter(b, a, y, axis=0, zi=self.state[i])
        sq = y * y
        self.n += sq.shape[0]
        pos = 0
        while pos < sq.shape[0]:
            take = min(self.hop - self._partial_n, sq.shape[0] - pos)
            self._partial += sq[pos:pos + take].sum(axis=0)
            self._partial_n += take
            pos += take
            if self._partial_n == self.hop:
                self.hops.append(self._partial.copy())
                self._partial[:] = 0
                self._partial_n = 0

    def integrated(self) -> float:
        hops = self.hops + ([self._partial.copy()] if self._partial_n else [])
        hops = np.array(hops) if hops else np.zeros((0, self.g.size))
        T = self.n / self.rate
        n_blocks = int(np.round((T - 0.4) / 0.1)) + 1
        if n_blocks < 1:
            return float("-inf")
        z = np.array([hops[j:j + 4].sum(axis=0) for j in range(n_blocks)]) / (0.4 * self.rate)
        with np.errstate(divide="ignore"):
            lj = -0.691 + 10 * np.log10(z @ self.g)
        gated = lj >= -70.0
        if not gated.any():
            return float("-inf")
        rel = -0.691 + 10 * np.log10(np.mean(z[gated] @ self.g)) - 10.0
        final = gated & (lj > rel)
        if not final.any():
            return float("-inf")
        return float(-0.691 + 10 * np.log10(np.mean(z[final] @ self.g)))
