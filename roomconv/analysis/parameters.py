"""ISO 3382 parameters of one impulse response, per band and wideband.

:func:`room_parameters` returns :class:`BandResult` rows; a value that cannot be evaluated
honestly is ``None`` with a warning that says why.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from ..errors import InputError
from ..measure.quality import REQUIRED_INR_DB
from .bands import Band, bands_for_rate, filter_band
from .decay import decay_db, fit_decay, lundeby_truncation, onset_index, schroeder_integral

#: Evaluation ranges, dB below the start of the decay (ISO 3382-1:2009, 5.3.3 / A.2.1).
RANGES = {"edt": (0.0, -10.0), "t20": (-5.0, -25.0), "t30": (-5.0, -35.0)}
#: Filter-decay rule of thumb: B·T below 16 and the filter's own decay biases T.
MIN_BT = 16.0

METRICS = ("edt_s", "t20_s", "t30_s", "c50_db", "c80_db", "d50", "ts_ms", "inr_db",
           "xi_permille", "curvature_pct")


@dataclass
class BandResult:
    """Parameters of one band (``band_hz`` None for wideband). Keys follow the JSON layout."""

    band_hz: float | None
    edt_s: float | None = None
    t20_s: float | None = None
    t30_s: float | None = None
    c50_db: float | None = None
    c80_db: float | None = None
    d50: float | None = None
    ts_ms: float | None = None
    inr_db: float | None = None
    xi_permille: float | None = None
    curvature_pct: float | None = None
    g_db: float | None = None
    warnings: list[str] = field(default_factory=list)
    #: Not part of the JSON: the decay curve (dB) from the onset, and the truncation time.
    curve_db: np.ndarray | None = field(default=None, repr=False)
    truncation_s: float | None = None
    noise_db: float | None = None

    def as_dict(self, with_g: bool = False) -> dict:
        d = {"band_hz": self.band_hz}
        for k in METRICS:
            d[k] = self.__dict__[k]
        if with_g:
            d["g_db"] = self.g_db
        d["warnings"] = list(self.warnings)
        return d


def analyse_response(h: np.ndarray, rate: int, *, band: Band | None = None,
                     reverse_filter: bool = False, calibration_db: float | None = None,
                     label: str | None = None) -> BandResult:
    """All parameters of one response in one band (``band=None``: wideband, unfiltered).

    Parameters
    ----------
    h : ndarray, 1-D
        The impulse response; sample 0 need not be the onset.
    rate : int
        Sample rate, Hz.
    band : Band, optional
        Filter into this band first.
    reverse_filter : bool
        Filter backwards in time (see :func:`roomconv.analysis.bands.filter_band`).
    calibration_db : float, optional
        Level of the same source's response at 10 m in a free field, as 10·log10 of the sum
        of squares in the same units; enables the strength G.

    References
    ----------
    ISO 3382-1:2009, Acoustics — Measurement of room acoustic parameters — Part 1:
    Performance spaces, clause 5 and Annex A (EDT, T, C50, C80, D50, Ts, G).
    ISO 3382-2:2008, Annex B (non-linearity ξ and curvature C).
    Lundeby, A. et al. (1995), Acustica 81, 344–355 (truncation and compensation).
    """
    label = label or (f"{band.label} Hz" if band else "wideband")
    res = BandResult(band_hz=band.nominal if band else None)
    x = filter_band(h, rate, band, reverse=reverse_filter) if band else np.asarray(h, float)
    if not np.any(x):
        res.warnings.append(f"{label}: no energy in this band")
        return res
    i0 = onset_index(x)
    x = x[i0:]
    min_len = int(0.1 * rate)
    if band is not None:
        # At least ten periods of the band's lower edge, and 100 ms.
        min_len = max(min_len, int(10 * rate / band.lower))
    if x.size < min_len:
        res.warnings.append(f"{label}: the response is too short after its onset "
                            f"({x.size / rate:.3f} s; this band needs {min_len / rate:.3f} s)")
        return res

    tr = lundeby_truncation(x, rate)
    res.inr_db = _finite(tr.inr_db)
    if tr.noise_limited and tr.noise_energy > 0:
        res.noise_db = float(10 * np.log10(tr.noise_energy / np.max(np.square(x))))
    if not tr.converged and tr.noise_limited:
        res.warnings.append(f"{label}: the noise-floor search did not settle; decay values "
                            "may be unreliable")
    sch = schroeder_integral(x, truncation=tr.index, compensation=tr.compensation,
                             noise_energy=tr.noise_energy if tr.noise_limited else 0.0)
    curve = decay_db(sch)
    res.curve_db = curve
    res.truncation_s = tr.index / rate

    fits = {}
    for key, (hi, lo) in RANGES.items():
        need = REQUIRED_INR_DB[key]
        inr = tr.inr_db if np.isfinite(tr.inr_db) else np.inf
        if inr < need:
            res.warnings.append(f"{label}: {key.upper()} not evaluated: peak-to-noise ratio "
                                f"{inr:.1f} dB is below the {need:.0f} dB its range needs")
            continue
        f = fit_decay(curve, rate, hi, lo)
        if f is None:
            res.warnings.append(f"{label}: {key.upper()} not evaluated: the decay does not reach "
                                f"{lo:.0f} dB before the noise")
            continue
        fits[key] = f
        setattr(res, f"{key}_s", f.reverberation_s)

    # ISO 3382-2 B.2/B.3: ξ from the regression of the longest range evaluated; C from T30/T20.
    main = fits.get("t30") or fits.get("t20")
    if main is not None:
        res.xi_permille = 1000.0 * (1.0 - main.r ** 2)
    if "t30" in fits and "t20" in fits:
        res.curvature_pct = 100.0 * (fits["t30"].reverberation_s / fits["t20"].reverberation_s - 1)

    _energy_ratios(res, x, rate, tr)
    if calibration_db is not None:
        total = float(np.sum(np.square(x[: tr.index]))) + tr.compensation
        res.g_db = 10 * np.log10(total) - calibration_db

    t_any = res.t30_s or res.t20_s or res.edt_s
    if band is not None and t_any is not None and band.bandwidth * t_any < MIN_BT:
        res.warnings.append(f"{label}: B·T = {band.bandwidth * t_any:.1f} is below {MIN_BT:.0f}: "
                            "the band filter's own decay may lengthen T (try --reverse-filter)")
    return res


def _energy_ratios(res: BandResult, x: np.ndarray, rate: int, tr) -> None:
    """C50, C80, D50 and Ts from the onset, with the Lundeby tail added to the late energy.

    References
    ----------
    ISO 3382-1:2009, A.2.3 (C50/C80), A.2.4 (D50), A.2.5 (Ts).
    """
    e = np.square(x[: tr.index])
    total = float(e.sum()) + tr.compensation
    if total <= 0:
        return
    n50, n80 = int(round(0.05 * rate)), int(round(0.08 * rate))
    early50, early80 = float(e[:n50].sum()), float(e[:n80].sum())
    if total - early80 <= 0 or tr.index < n80:
        res.warnings.append("response shorter than 80 ms after its onset: clarity not evaluated")
        return
    res.c50_db = 10 * np.log10(early50 / (total - early50))
    res.c80_db = 10 * np.log10(early80 / (total - early80))
    res.d50 = early50 / total
    t = np.arange(e.size) / rate
    moment = float(np.sum(t * e))
    if tr.compensation > 0 and np.isfinite(tr.slope_db_s):
        k = -tr.slope_db_s * np.log(10) / 10  # energy decay rate, 1/s
        tc = tr.index / rate
        moment += tr.compensation * (tc + 1.0 / k)  # ∫ t·e0·exp(−k(t−tc)) dt over [tc, ∞)
    res.ts_ms = 1000.0 * moment / total


def _finite(v):
    return float(v) if v is not None and np.isfinite(v) else None


def room_parameters(h: np.ndarray, rate: int, *, bands: str = "octave",
                    reverse_filter: bool = False, calibration_db=None,
                    low: float | None = None, high: float | None = None
                    ) -> tuple[list[BandResult], BandResult, list[str]]:
    """Per-band and wideband parameters of a 1-D response.

    ``calibration_db`` may be a number (all bands) or a mapping nominal band → level
    (key ``"wideband"`` for the unfiltered value).

    Returns ``(band_results, wideband_result, notes)``.
    """
    h = np.asarray(h, dtype=np.float64)
    if h.ndim != 1:
        raise ValueError("room_parameters takes one channel")
    if not np.all(np.isfinite(h)):
        raise InputError("the response holds NaN or infinite samples")
    if not np.any(h):
        raise InputError("the response is silent (all zeros)")
    band_list, notes = bands_for_rate(bands, rate, low=low, high=high)
    results = [analyse_response(h, rate, band=b, reverse_filter=reverse_filter,
                                calibration_db=_cal(calibration_db, b.nominal))
               for b in band_list]
    wide = analyse_response(h, rate, calibration_db=_cal(calibration_db, "wideband"))
    return results, wide, notes


def _cal(cal, key):
    if cal is None or isinstance(cal, (int, float)):
        return cal
    return cal.get(key, cal.get(str(key)))
