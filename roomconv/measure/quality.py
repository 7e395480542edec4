"""Data-quality figures for a recording and the impulse response extracted from it.

Everything here is a number plus plain-language warnings; nothing is printed.
"""

from __future__ import annotations

import numpy as np

# The envelope and INR live in roomconv.signal so that analysis can use them without
# reaching into measure; they stay importable from here.
from ..signal import energy_envelope, envelope_inr  # noqa: F401

#: Impulse-to-noise ratios (INR) an evaluation range needs: the range itself plus 10 dB above
#: the noise (ISO 3382-1:2009, 5.3.3 / ISO 3382-2:2008, 5.3.3 — from memory). EDT 0..-10,
#: T20 -5..-25, T30 -5..-35 dB.
REQUIRED_INR_DB = {"edt": 20.0, "t20": 35.0, "t30": 45.0}

CLIP_LEVEL = 0.999
CLIP_RUN = 3  # consecutive samples at full scale: the flat top that marks clipping


def clipped_samples(x: np.ndarray, level: float = CLIP_LEVEL, run: int = CLIP_RUN) -> np.ndarray:
    """Per channel: samples that lie in flat-topped runs at full scale (common practice).

    Counts samples with ``|x| >= level`` that belong to a run of at least ``run`` such
    consecutive samples; isolated full-scale peaks are not counted.
    """
    x2 = np.atleast_2d(x.T).T if x.ndim == 1 else x
    counts = np.zeros(x2.shape[1], dtype=int)
    for c in range(x2.shape[1]):
        hot = np.abs(x2[:, c]) >= level
        if not hot.any():
            continue
        edges = np.diff(np.concatenate(([0], hot.astype(np.int8), [0])))
        starts, ends = np.flatnonzero(edges == 1), np.flatnonzero(edges == -1)
        lengths = ends - starts
        counts[c] = int(lengths[lengths >= run].sum())
    return counts


def peak_dbfs(x: np.ndarray) -> np.ndarray:
    """Per-channel sample peak in dBFS (−inf for silence)."""
    with np.errstate(divide="ignore"):
        return 20 * np.log10(np.max(np.abs(x), axis=0))


def rms_dbfs(x: np.ndarray) -> np.ndarray:
    with np.errstate(divide="ignore"):
        # Floor at -200 dBFS so digital silence reads as a number, not -inf.
        return 10 * np.log10(np.maximum(np.mean(np.square(x), axis=0), 1e-20))


def inr_warnings(inr_db: float, label: str) -> list[str]:
    """Plain-language warnings for what an impulse-to-noise ratio (INR) rules out."""
    out = []
    for key in ("t30", "t20", "edt"):
        need = REQUIRED_INR_DB[key]
        if inr_db < need:
            out.append(f"{label}: impulse-to-noise ratio (INR) {inr_db:.1f} dB is below the "
                       f"{need:.0f} dB that {key.upper()} needs; it will not be evaluated")
    return out
