"""Synthetic room responses whose per-band parameters are known, for the accuracy grid.

How each case is built
----------------------
A clean response is ``h(t) = A·δ(t − t0) + n(t)·a(t − t0)`` for ``t ≥ t0``, zero before:

* ``t0`` is a pre-delay of a few milliseconds (the onset, an exact sample index);
* ``A·δ`` is the direct sound, one sample whose energy is ``10^(DRR/10)`` times the energy of
  the reverberant part of this realization;
* ``n`` is white Gaussian noise of unit variance;
* ``a(t)² = e^(−k·t)`` with ``k = 6·ln10 / T`` (a single slope: 60 dB of energy decay in T),
  or ``a(t)² = (e^(−k1·t) + K·e^(−k2·t)) / (1 + K)`` (a double slope: an early decay T1,
  1.5–3 times shorter than the late decay T2 = T, meeting at a knee 8–25 dB down where both
  terms have the level ``knee_db``).

The measured response is the clean one cut ``window_factor · T`` after the onset (``T`` the
longest decay time of the case), plus background noise (white or pink) over the whole
window. The impulse-to-noise ratio (INR) is set in the 1 kHz octave band: the reverberant
part's mean square at the onset over the noise's mean square, both in that band (with white
noise it is also the broadband ratio; pink noise lowers it in the low bands, as real
background noise does).

How the truth is known
----------------------
The ensemble decay of every band is known in closed form (white ``n``: every band sees the
same envelope ``a²``), but one noise realization deviates from it by the statistical
uncertainty of a single decay (ISO 3382-2:2008, Annex A, σ(T30) ≈ 0.55·T·sqrt((1 + 1.52/n)
/ (B·T)) — from memory), which at small B·T exceeds the just-noticeable difference. So the
truth of *this realization* is computed from its clean, noise-free, untruncated response,
generated until the envelope is ``REF_DECAY_DB`` (135 dB: 100 dB past the bottom of the T30
range) below its start, by a reference method that shares no code with ``roomconv``:

1. band-limit with a zero-phase FFT band-pass (numpy) on the exact band edges of
   IEC 61260-1:2014 (``f_m·G^(±1/2b)``, ``G = 10^(3/10)``, ``f_m = 1000·G^(x/b)``),
   zero-padded on both sides so that nothing wraps round (:func:`reference_band_gain`);
2. energy ``e = x²`` of the band signal; Schroeder's backward integral from the onset to the
   end (Schroeder 1965); least-squares lines over the ISO 3382-1:2009 ranges (EDT 0…−10 dB,
   T20 −5…−25 dB, T30 −5…−35 dB; A.2.1–A.2.2);
3. C50, C80, D50 and Ts by their definitions (ISO 3382-1:2009, A.2.3–A.2.5), time zero at the
   direct sound's sample.

Two choices in the reference differ from a textbook "ideal brick-wall band-pass" and are
deliberate:

* The band edges are not brick walls. A brick-wall band of width B turns the direct sound
  into ``sin(πBt)/(πt)`` whose energy after time t is ``1/(2π²·B·t)`` of the band's direct
  energy (closed form; −15 dB at 170 ms in the 125 Hz octave): that ringing would *be* the
  late decay of a short-T band. So each edge is a smooth, power-complementary transition
  (``|H|² = 1/2`` exactly at the IEC edge, the −3 dB point of a real band filter; adjacent
  bands' ``|H|²`` sum to one), the two edges together as wide as half the band
  (:func:`edge_width_ratio`); its ringing dies within a few ``1/B``. For a flat spectrum
  the band's energy equals the brick-wall band's.
* The direct sound arrives at ``t0``, but any band filter spreads its band energy over a
  few ``1/B`` around (zero-phase) or after (causal) ``t0``, and with a strong direct sound
  EDT depends on that spread far beyond the JND, even at large B·T (one case of ours, B·T
  108, DRR +4 dB: EDT 0.68 s with the direct sound's energy at ``t0``, 0.57 s with this
  reference's zero-phase spread, 0.42 s through a causal Butterworth band-pass). The main
  truth is the band-filtered clean response, its spread before ``t0`` counted at ``t0``
  (early for C50/C80/D50, at the start of the decay curve, which starts at ``t0`` as
  ISO 3382-1 has it; Ts weighs it by ``t − t0 < 0``). A second variant moves the direct
  sound's own band energy ``Σ yd²`` to ``t0`` (the limit of a filter with no time spread;
  its cross-term with the reverberation stays where it happens), and a value is scored
  against the range the variants span (:func:`truth_ranges`).

* At small B·T one realization's parameters depend on the band filter's *shape*, not only on
  its −3 dB edges (a narrow band holds few independent spectral components, and edges that
  weigh them differently give a different decay): below B·T ≈ 50 two such references
  disagree by more than a JND on most values. So bands with B·T < 200 are also computed
  with edges 0.4 times as wide, and the range spans these too. How many values had a
  spread above one JND is reported.

The grid's cross-check (:func:`closed_forms` against the reference on single-slope cases of
large B·T) guards this yardstick: see ``tests/analysis/test_accuracy_grid.py``.

How the grid is chosen
----------------------
Not a full factorial: :func:`make_grid` draws a Latin hypercube (McKay, Beckman & Conover
1979) over eleven unit axes, so each axis is stratified on its own: log T over 0.2–8 s, INR
over 20–90 dB, log window factor over 1.2–6, and the categorical axes (sample rate 44.1/48/96
kHz, octave/third-octave, single/double slope, white/pink noise) split into equal strata, so
every level appears ``n/k`` (±1) times and pairs of levels mix freely. Long responses are
capped (:data:`MAX_WINDOW_SAMPLES`): the window factor is lowered, never below 1.2, and the
capped factor is what the case records.
"""

from __future__ import annotations

import math
from dataclasses import asdict, dataclass

import numpy as np

#: Octave frequency ratio, base 10 (IEC 61260-1:2014, 5.2).
G10 = 10.0 ** (3.0 / 10.0)
LN10 = math.log(10.0)

#: Nominal mid-band frequencies and their band numbers x (f_m = 1000·G^(x/b)), IEC 61260-1:2014
#: Annex E tables (nominal values) — the band numbers are counted from 1 kHz.
OCTAVE_NOMINAL = {
    31.5: -5,
    63: -4,
    125: -3,
    250: -2,
    500: -1,
    1000: 0,
    2000: 1,
    4000: 2,
    8000: 3,
    16000: 4,
}
THIRD_NOMINAL = {
    nom: i - 16
    for i, nom in enumerate(
        (
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
    )
}

#: ISO 3382-1:2009 evaluation ranges, dB (A.2.1: EDT 0 to −10; T20 −5 to −25; T30 −5 to −35).
RANGES = {"edt_s": (0.0, -10.0), "t20_s": (-5.0, -25.0), "t30_s": (-5.0, -35.0)}
#: Just-noticeable differences, ISO 3382-1:2009 Table A.1 (from memory): decay times 5 %
#: relative; C50/C80 1 dB; D50 0.05; Ts 10 ms.
JND = {
    "edt_s": ("rel", 0.05),
    "t20_s": ("rel", 0.05),
    "t30_s": ("rel", 0.05),
    "c50_db": ("abs", 1.0),
    "c80_db": ("abs", 1.0),
    "d50": ("abs", 0.05),
    "ts_ms": ("abs", 10.0),
}
METRICS = tuple(JND)

#: The clean reference runs until its envelope is this far below its start (100 dB past T30).
REF_DECAY_DB = 135.0
#: Measured windows are capped at this many samples (about 22 s at 96 kHz, 44 s at 48 kHz).
MAX_WINDOW_SAMPLES = 1 << 21
#: Where the INR is set (nominal Hz, octave band).
INR_BAND_HZ = 1000


@dataclass(frozen=True)
class Case:
    """Settings of one synthetic response (everything needed to rebuild it)."""

    index: int
    seed: int
    rate: int
    bands: str  #: "octave" or "third"
    slope: str  #: "single" or "double"
    t_s: float  #: the longest decay time (single: T; double: the late T2)
    t_early_s: float  #: double: the early T1 (< t_s); single: equal to t_s
    knee_db: float  #: double: level of the knee below the start, dB; single: 0 (none)
    inr_db: float  #: impulse-to-noise ratio in the 1 kHz octave band, dB
    noise: str  #: "white" or "pink"
    window_factor: float  #: the window after the onset is this many times t_s
    drr_db: float  #: direct-to-reverberant energy ratio, dB
    predelay_s: float  #: the onset's time in the measured response

    @property
    def onset(self) -> int:
        return int(round(self.predelay_s * self.rate))

    @property
    def window_samples(self) -> int:
        return int(round(self.window_factor * self.t_s * self.rate))

    def describe(self) -> str:
        slope = (
            f"T={self.t_s:.3g} s"
            if self.slope == "single"
            else f"T1={self.t_early_s:.3g} s T2={self.t_s:.3g} s knee {self.knee_db:.0f} dB"
        )
        return (
            f"case {self.index}: {self.rate} Hz {self.bands} {self.slope} {slope}, "
            f"INR {self.inr_db:.0f} dB {self.noise}, window {self.window_factor:.2f}×T, "
            f"DRR {self.drr_db:+.0f} dB, seed {self.seed}"
        )

    def as_dict(self) -> dict:
        return asdict(self)


# --------------------------------------------------------------------------------------------
# The grid


def latin_hypercube(n: int, dims: int, rng: np.random.Generator) -> np.ndarray:
    """n points in [0, 1)^dims, each axis cut into n strata holding one point each.

    References
    ----------
    McKay, M. D., Beckman, R. J., Conover, W. J. (1979). A comparison of three methods for
    selecting values of input variables in the analysis of output from a computer code.
    Technometrics 21, 239–245.
    """
    u = np.empty((n, dims))
    for d in range(dims):
        u[:, d] = (rng.permutation(n) + rng.random(n)) / n
    return u


def _level(u: float, levels):
    return levels[min(int(u * len(levels)), len(levels) - 1)]


def make_grid(
    n: int = 160,
    seed: int = 2026,
    *,
    t_range=(0.2, 8.0),
    inr_range=(20.0, 90.0),
    window_range=(1.2, 6.0),
    rates=(44100, 48000, 96000),
    band_sets=("octave", "third"),
    max_window_samples: int = MAX_WINDOW_SAMPLES,
) -> list[Case]:
    """The stratified grid of cases (see the module docstring for how it is chosen)."""
    rng = np.random.default_rng(seed)
    u = latin_hypercube(n, 11, rng)
    cases = []
    for i in range(n):
        row = u[i]
        t = math.exp(math.log(t_range[0]) + row[0] * math.log(t_range[1] / t_range[0]))
        inr = inr_range[0] + row[1] * (inr_range[1] - inr_range[0])
        wf = math.exp(
            math.log(window_range[0]) + row[2] * math.log(window_range[1] / window_range[0])
        )
        rate = _level(row[3], rates)
        bands = _level(row[4], band_sets)
        slope = _level(row[5], ("single", "double"))
        noise = _level(row[6], ("white", "pink"))
        if slope == "double":
            t_early = t / (1.5 + 1.5 * row[7])  # the early slope 1.5–3 times steeper
            knee = -8.0 - 17.0 * row[8]  # knee 8–25 dB down
        else:
            t_early, knee = t, 0.0
        drr = -12.0 + 18.0 * row[9]  # −12 … +6 dB
        predelay = 0.005 + 0.02 * row[10]  # 5–25 ms
        # Rounded down to the stored precision so that the cap holds for the stored value.
        wf = math.floor(1000 * min(wf, max_window_samples / (t * rate))) / 1000
        wf = max(window_range[0], wf)
        cases.append(
            Case(
                i,
                seed * 100_000 + i,
                int(rate),
                bands,
                slope,
                float(round(t, 4)),
                float(round(t_early, 4)),
                float(round(knee, 2)),
                float(round(inr, 2)),
                noise,
                float(wf),
                float(round(drr, 2)),
                float(round(predelay, 4)),
            )
        )
    return cases


# --------------------------------------------------------------------------------------------
# Building one case


def energy_envelope(case: Case, t: np.ndarray) -> np.ndarray:
    """a(t)², the ensemble energy envelope of the reverberant part (1 at t = 0)."""
    k2 = 6 * LN10 / case.t_s
    if case.slope == "single":
        return np.exp(-k2 * t)
    k1 = 6 * LN10 / case.t_early_s
    # Knee: where e^(−k1·t) has fallen to knee_db; the late term has the same level there.
    t_knee = -case.knee_db * LN10 / (10 * k1)
    weight = math.exp(-k1 * t_knee) / math.exp(-k2 * t_knee)
    return (np.exp(-k1 * t) + weight * np.exp(-k2 * t)) / (1.0 + weight)


def reference_length_s(case: Case) -> float:
    """Time after the onset at which the envelope is REF_DECAY_DB below its start."""
    # The late slope decides (the early one has died long before).
    tail = REF_DECAY_DB / 60.0 * case.t_s
    return tail + (0.0 if case.slope == "single" else case.t_s * 0.1)


@dataclass
class Built:
    """One case's signals (1-D float64 arrays at ``case.rate``)."""

    case: Case
    clean: np.ndarray  #: the untruncated clean response (onset at case.onset)
    reverb: np.ndarray  #: its reverberant part alone
    noise: np.ndarray  #: the background noise over the measured window
    measured: np.ndarray  #: clean cut at the window, plus noise
    direct_amplitude: float


def band_edges(nominal: float, kind: str) -> tuple[float, float, float]:
    """(f_m, f1, f2) of a band (IEC 61260-1:2014, eqs. 3, 5 and 6; base-10 ratio)."""
    table, b = (OCTAVE_NOMINAL, 1) if kind == "octave" else (THIRD_NOMINAL, 3)
    x = table[nominal]
    fm = 1000.0 * G10 ** (x / b)
    return fm, fm * G10 ** (-1 / (2 * b)), fm * G10 ** (1 / (2 * b))


def _noise_band_ms(x: np.ndarray, rate: int, lo: float, hi: float) -> float:
    """Mean square of x within [lo, hi] Hz, by Parseval on its DFT."""
    spec = np.fft.rfft(x)
    f = np.fft.rfftfreq(x.size, 1 / rate)
    sel = (f >= lo) & (f <= hi)
    return float(2.0 * np.sum(np.abs(spec[sel]) ** 2) / x.size**2)


def pink_noise(n: int, rate: int, rng: np.random.Generator, f_min: float = 10.0) -> np.ndarray:
    """Gaussian noise with a 1/f power spectrum (equal power per octave) above ``f_min``."""
    spec = rng.standard_normal(n // 2 + 1) + 1j * rng.standard_normal(n // 2 + 1)
    f = np.fft.rfftfreq(n, 1 / rate)
    spec /= np.sqrt(np.maximum(f, f_min))
    spec[0] = 0.0
    return np.fft.irfft(spec, n)


def build(case: Case) -> Built:
    """The clean, noise and measured signals of a case (deterministic in ``case.seed``)."""
    rng = np.random.default_rng(case.seed)
    rate, i0 = case.rate, case.onset
    n_ref = int(math.ceil(reference_length_s(case) * rate))
    t = np.arange(n_ref) / rate
    reverb_part = rng.standard_normal(n_ref) * np.sqrt(energy_envelope(case, t))
    e_rev = float(np.sum(reverb_part**2))
    amp = math.sqrt(e_rev * 10 ** (case.drr_db / 10))
    clean = np.zeros(i0 + n_ref)
    clean[i0:] = reverb_part
    reverb = clean.copy()
    clean[i0] += amp

    n_meas = i0 + case.window_samples
    if case.noise == "white":
        noise = rng.standard_normal(n_meas)
    else:
        noise = pink_noise(n_meas, rate, rng)
    # INR in the 1 kHz octave: the reverb's band mean square at the onset is 2B/fs for
    # unit-variance white noise times a(0)² = 1 (Parseval).
    _, lo, hi = band_edges(INR_BAND_HZ, "octave")
    rev_band_ms = 2.0 * (hi - lo) / rate
    noise *= math.sqrt(
        rev_band_ms * 10 ** (-case.inr_db / 10) / _noise_band_ms(noise, rate, lo, hi)
    )
    cut = clean[:n_meas]
    measured = noise.copy()
    measured[: cut.size] += cut
    return Built(case, clean, reverb, noise, measured, amp)


# --------------------------------------------------------------------------------------------
# The reference method


def _smooth_step(x: np.ndarray) -> np.ndarray:
    """0 → 1 over x ∈ [0, 1] with zero slope at both ends (raised cosine)."""
    x = np.clip(x, 0.0, 1.0)
    return 0.5 - 0.5 * np.cos(np.pi * x)


def edge_width_ratio(fraction: int) -> float:
    """Width of a smooth band edge over the edge frequency, for 1/``fraction`` octave bands.

    ``tanh(ln G / 2b)`` is half of ``2(f2 − f1)/(f1 + f2)``, the most that leaves the two
    edges of a band apart; so the flat top is half the bandwidth, and two adjacent bands
    share the same transition at their common edge.
    """
    return math.tanh(math.log(G10) / (2 * fraction))


def reference_band_gain(
    f: np.ndarray, lo: float, hi: float, fraction: int, smooth: bool = True, edge_scale: float = 1.0
) -> np.ndarray:
    """Zero-phase amplitude response of the reference band-pass at frequencies ``f``.

    Across each edge ``f_e`` the gain is ``cos(π/2 · s)``, ``s`` a raised-cosine step over
    ``f_e ± w/2`` (``w = edge_width_ratio(fraction) · f_e``): ``|H|² = 1/2`` at the edge, and
    a band and its neighbour are power-complementary there (``cos² + sin² = 1``), so for a
    flat spectrum the band holds exactly the energy of the brick-wall band. ``smooth=False``
    is the brick-wall band-pass (unit gain on [lo, hi], zero elsewhere); ``edge_scale``
    narrows (< 1) the edges, keeping both properties.
    """
    f = np.asarray(f, dtype=float)
    if not smooth:
        return ((f >= lo) & (f <= hi)).astype(float)
    r = edge_width_ratio(fraction) * edge_scale
    w_lo, w_hi = r * lo, r * hi
    s_lo = _smooth_step((lo + w_lo / 2 - f) / w_lo)  # 1 well below lo, 0 well above
    s_hi = _smooth_step((f - (hi - w_hi / 2)) / w_hi)  # 0 well below hi, 1 well above
    g = np.cos(0.5 * np.pi * s_lo) * np.cos(0.5 * np.pi * s_hi)
    g[(s_lo >= 1.0) | (s_hi >= 1.0)] = 0.0  # exactly zero, not cos(π/2) ≈ 6e-17
    return g


def reference_filter(
    x: np.ndarray,
    rate: int,
    lo: float,
    hi: float,
    fraction: int,
    *,
    smooth: bool = True,
    pad: int | None = None,
    edge_scale: float = 1.0,
) -> tuple[np.ndarray, int]:
    """Band-limit ``x`` with the zero-phase reference band-pass; returns (y, pad).

    ``y`` has ``pad`` samples of room on both sides of ``x`` (``x[i]`` lands on ``y[i + pad]``)
    to hold the filter's spread without wrapping round.
    """
    if pad is None:
        pad = _pad_for(lo, rate, fraction, edge_scale) if smooth else x.size
    n = x.size + 2 * pad
    nfft = _fast_len(n)
    buf = np.zeros(nfft)
    buf[pad : pad + x.size] = x
    spec = np.fft.rfft(buf)
    spec *= reference_band_gain(
        np.fft.rfftfreq(nfft, 1 / rate), lo, hi, fraction, smooth, edge_scale
    )
    return np.fft.irfft(spec, nfft)[:n], pad


def _pad_for(lo: float, rate: int, fraction: int, edge_scale: float = 1.0) -> int:
    """Room on each side for the band-pass's spread: 4/w, w the lower (narrower) edge's width.

    With raised-cosine edges the time response falls as 1/t³ beyond about 1/w; the energy
    it holds beyond 4/w is below 1e-6 of the band's (checked in the tests). Wrapped round
    to the end it would raise the decay curve at −35 dB by 10·lg(1 + 1e-6/10^-3.5) ≈ 0.014 dB,
    a T30 change of 0.05 %, a hundredth of a JND.
    """
    w = edge_width_ratio(fraction) * edge_scale * lo
    return int(math.ceil(4.0 / w * rate))


def _fast_len(n: int) -> int:
    """Smallest 2^a·3^b·5^c ≥ n (fast FFT sizes)."""
    best = 1 << (n - 1).bit_length()
    p5 = 1
    while p5 < best:
        p35 = p5
        while p35 < best:
            p = p35
            while p < n:
                p *= 2
            best = min(best, p)
            p35 *= 3
        p5 *= 5
    return best


def schroeder_db(e: np.ndarray, floor_db: float | None = None) -> np.ndarray:
    """Backward-integrated decay curve of the energy ``e``, dB re its value at sample 0.

    With ``floor_db`` the curve stops at the first sample below that level (the rest is
    never needed and costs a logarithm per sample).

    References
    ----------
    Schroeder, M. R. (1965). New method of measuring reverberation time. J. Acoust. Soc. Am.
    37, 409–412. ISO 3382-1:2009, 5.3.3.
    """
    s = np.cumsum(e[::-1])[::-1]
    if floor_db is not None:
        below = np.flatnonzero(s < s[0] * 10 ** (floor_db / 10))
        if below.size:
            s = s[: below[0] + 1]
    with np.errstate(divide="ignore"):
        return 10.0 * np.log10(s / s[0])


def fit_range(curve_db: np.ndarray, rate: int, upper: float, lower: float) -> float:
    """Decay time (s) from a least-squares line over the curve between two levels.

    The range starts at the first sample at or below ``upper`` and ends before the first
    sample below ``lower`` (ISO 3382-1:2009, A.2.1–A.2.2: a regression line over the range).
    The slope is the closed-form least-squares one, Σ(t − t̄)(y − ȳ) / Σ(t − t̄)².
    """
    i_hi = int(np.argmax(curve_db <= upper))
    below = np.flatnonzero(curve_db < lower)
    if below.size == 0 or below[0] - i_hi < 3:
        return float("nan")
    i_lo = int(below[0])
    y = curve_db[i_hi:i_lo]
    t = np.arange(i_hi, i_lo) / rate
    tc = t - t.mean()
    slope = float(np.dot(tc, y - y.mean()) / np.dot(tc, tc))
    return -60.0 / slope


def _parameters(x: np.ndarray, rate: int, i0: int, at_onset: float = 0.0, remove=None) -> dict:
    """All seven parameters of one band signal ``x`` whose time zero is sample ``i0``.

    ``remove=(slice, part)`` takes ``part²`` out of the energy over ``slice`` and
    ``at_onset`` puts an energy at t0 (the step variant of :func:`_band_truths`); a
    negative energy where a ratio needs a positive one raises ValueError.
    """
    e = np.square(x)
    if remove is not None:
        span, part = remove
        e[span] -= np.square(part)
    e[i0] += at_onset
    lowest = min(lo for _, lo in RANGES.values())
    # The zero-phase filter's spread before t0 arrived at t0: it joins the decay at t0.
    e_decay = e[i0:].copy()
    e_decay[0] += e[:i0].sum()
    if remove is not None and np.any(np.cumsum(e_decay[::-1]) < 0):
        raise ValueError("negative energy in the decay")
    curve = schroeder_db(e_decay, floor_db=lowest - 1.0)
    out = {k: fit_range(curve, rate, hi, lo) for k, (hi, lo) in RANGES.items()}
    n50, n80 = int(round(0.05 * rate)), int(round(0.08 * rate))
    total = float(e.sum())
    early50, early80 = float(e[: i0 + n50].sum()), float(e[: i0 + n80].sum())
    out["c50_db"] = 10.0 * math.log10(early50 / (total - early50))
    out["c80_db"] = 10.0 * math.log10(early80 / (total - early80))
    out["d50"] = early50 / total
    # Σ (n − i0)·e[n] / fs, without an array of times.
    moment = float(np.dot(np.arange(e.size, dtype=float), e)) - i0 * total
    out["ts_ms"] = 1000.0 * moment / rate / total
    return out


def reference_truth(
    built: Built, nominals, *, edge_scale: float = 1.0, wideband: bool = True
) -> dict:
    """Per-band truth of this realization: {nominal Hz or "wideband": {metric: value}}.

    ``nominals`` lists the bands wanted (nominal Hz of ``built.case.bands``); "wideband" (the
    clean response unfiltered) is added unless ``wideband`` is False. Each band is the clean
    response through the zero-phase reference band-pass (:func:`reference_filter`, edges
    scaled by ``edge_scale``), its spread before t0 counted at t0.
    """
    both = _band_truths(built, nominals, edge_scale)
    truth = (
        {"wideband": _parameters(built.clean, built.case.rate, built.case.onset)}
        if wideband
        else {}
    )
    truth.update({nom: v[0] for nom, v in both.items()})
    return truth


def _band_truths(built: Built, nominals, edge_scale: float) -> dict:
    """{band: (filtered, step)}: the parameters of the band-filtered clean response, and of
    the same with the direct sound's own band energy moved to t0 (None where that leaves a
    negative energy: the direct sound's band response overlaps much of the reverberation)."""
    case = built.case
    rate = case.rate
    if not nominals:
        return {}
    fraction = 1 if case.bands == "octave" else 3
    r = edge_width_ratio(fraction) * edge_scale
    out = {}
    for nom in nominals:
        _, lo, hi = band_edges(nom, case.bands)
        # Each band gets the padding its own edges need (the lowest bands need seconds, the
        # highest milliseconds), so a transform of its own size.
        pad = _pad_for(lo, rate, fraction, edge_scale)
        nfft = _fast_len(built.clean.size + 2 * pad)
        f = np.fft.rfftfreq(nfft, 1 / rate)
        # Only the band's support is non-zero: transform and filter there alone.
        k0 = int(np.searchsorted(f, lo * (1 - r / 2)))
        k1 = int(np.searchsorted(f, hi * (1 + r / 2), side="right"))
        buf = np.zeros(nfft)
        buf[pad : pad + built.reverb.size] = built.reverb
        spec = np.fft.rfft(buf)
        band_spec = np.zeros_like(spec)
        band_spec[k0:k1] = spec[k0:k1] * reference_band_gain(
            f[k0:k1], lo, hi, fraction, edge_scale=edge_scale
        )
        yr = np.fft.irfft(band_spec, nfft)
        i0 = pad + case.onset
        # The band-pass's impulse response on ±pad samples (its spread beyond is
        # negligible, see _pad_for), for the direct sound's band signal.
        n_short = _fast_len(2 * pad)
        centre = n_short // 2
        gain = reference_band_gain(
            np.fft.rfftfreq(n_short, 1 / rate), lo, hi, fraction, edge_scale=edge_scale
        )
        ir = np.roll(np.fft.irfft(gain, n_short), centre)[centre - pad : centre + pad]
        yd = built.direct_amplitude * ir  # the direct sound's band signal from i0 − pad
        span = slice(i0 - pad, i0 + pad)
        y = yr.copy()
        y[span] += yd
        filtered = _parameters(y, rate, i0)
        # Step: Σ yd² (with its cross-term 2·yd·yr kept where it happens) moved to t0: the
        # limit of a band filter with no time spread of its own.
        try:
            e_shift = float(np.dot(yd, yd))
            step = _parameters(y, rate, i0, at_onset=e_shift, remove=(span, yd))
        except (ValueError, ZeroDivisionError):
            step = None
        out[nom] = (filtered, step)
    return out


#: A second admissible reference: edges this much narrower (same −3 dB points).
ALT_EDGE_SCALE = 0.4
#: Bands whose B·T (T of the case) is below this get the second reference as well; above it
#: the two agree within a small fraction of the JND (seen over the grid).
ALT_BELOW_BT = 200.0


def truth_ranges(built: Built, nominals) -> tuple[dict, dict]:
    """(main, ranges): the truth of :func:`reference_truth`, and {band: {metric: (low, high)}}
    the range spanned by admissible definitions of it.

    Two things make one realization's band parameters depend on the band filter, not only on
    its −3 dB edges. At small B·T a band holds few independent spectral components, and edges
    that weigh them differently give a different decay: IEC 61260-1 admits a range of shapes
    around the same edges, so bands with B·T < ``ALT_BELOW_BT`` are also computed with edges
    ``ALT_EDGE_SCALE`` as wide. And every band filter spreads the direct sound over a few 1/B,
    which with a strong direct sound moves EDT beyond the JND even at large B·T: so each
    band is also computed with the direct sound's own band energy at t0 (the step variant,
    the limit of no time spread). The range spans all of these; the wideband has one value.
    """
    case = built.case
    first = _band_truths(built, nominals, 1.0)
    main = {"wideband": _parameters(built.clean, case.rate, case.onset)}
    main.update({n: pair[0] for n, pair in first.items()})
    narrow = [n for n in nominals if _bandwidth(n, case.bands) * case.t_s < ALT_BELOW_BT]
    variants = {n: [v for v in pair if v is not None] for n, pair in first.items()}
    for n, pair in _band_truths(built, narrow, ALT_EDGE_SCALE).items():
        variants[n] += [v for v in pair if v is not None]
    out = {"wideband": {m: (v, v) for m, v in main["wideband"].items()}}
    for band, vals in variants.items():
        out[band] = {}
        for m in main[band]:
            finite = [v[m] for v in vals if math.isfinite(v[m])]
            out[band][m] = (min(finite), max(finite)) if finite else (math.nan, math.nan)
    return main, out


def _bandwidth(nominal, kind: str) -> float:
    _, lo, hi = band_edges(nominal, kind)
    return hi - lo


def closed_forms(case: Case) -> dict:
    """Ensemble values of a single-slope case (any band: white n gives the same envelope).

    With k = 6·ln10/T and d = 10^(DRR/10) (the direct sound, all early):
    C_te = 10·lg((d + 1 − e^(−k·te)) / e^(−k·te)), D50 = (d + 1 − e^(−0.05k)) / (1 + d),
    Ts = (1/k) / (1 + d), EDT = T20 = T30 = T (integrals of e^(−kt); ISO 3382-1:2009 A.2
    definitions).
    """
    if case.slope != "single":
        raise ValueError("closed forms exist for single-slope cases only")
    k = 6 * LN10 / case.t_s
    d = 10 ** (case.drr_db / 10)
    out = {m: case.t_s for m in RANGES}
    for key, te in (("c50_db", 0.05), ("c80_db", 0.08)):
        late = math.exp(-k * te)
        out[key] = 10 * math.log10((d + 1 - late) / late)
    out["d50"] = (d + 1 - math.exp(-0.05 * k)) / (1 + d)
    out["ts_ms"] = 1000.0 / k / (1 + d)
    return out


def band_inr_db(case: Case, nominal: float | None) -> float:
    """The INR of a band, from the construction (closed form).

    White noise: the same in every band. Pink noise: equal power per octave, while the
    reverberant part's band power grows with the bandwidth, so the INR moves by
    10·lg(B / B_1k) for bands of the same kind (and by the octave/third power ratio).
    """
    if nominal is None or case.noise == "white":
        return case.inr_db
    _, lo, hi = band_edges(nominal, case.bands)
    _, lo1, hi1 = band_edges(INR_BAND_HZ, "octave")
    rev = (hi - lo) / (hi1 - lo1)
    noi = math.log(hi / lo) / math.log(hi1 / lo1)
    return case.inr_db + 10 * math.log10(rev / noi)


def single_decay_sigma(t_s: float, bandwidth: float, rng_kind: str = "t30_s") -> float:
    """Standard deviation of T from one integrated impulse response.

    ISO 3382-2:2008, Annex A (from memory): σ(T20) = 0.88·T·sqrt((1 + 1.90/n)/(N·B·T)),
    σ(T30) = 0.55·T·sqrt((1 + 1.52/n)/(N·B·T)); one integrated impulse response counts as
    n = 10 averaged decays (same annex, from memory), N = 1.
    """
    c, q = (0.88, 1.90) if rng_kind == "t20_s" else (0.55, 1.52)
    return c * t_s * math.sqrt((1 + q / 10) / (bandwidth * t_s))


def error_in_jnd(metric: str, value: float, truth) -> float:
    """Signed error in JND units (relative for decay times); ``truth`` a value or a
    (low, high) range, against which the error is the distance to the nearer end."""
    lo, hi = truth if isinstance(truth, tuple) else (truth, truth)
    if lo <= value <= hi:
        return 0.0
    ref = lo if value < lo else hi
    kind, jnd = JND[metric]
    if kind == "rel":
        return (value - ref) / ref / jnd
    return (value - ref) / jnd


def classify(metric: str, value, truth, verdict: str) -> str:
    """One of: "within", "within_flagged", "flagged", "null", "silent".

    ``truth`` is a value or a (low, high) range (:func:`truth_ranges`): a value within the
    JND of any point of the range is within the JND.
    """
    if value is None or not math.isfinite(float(value)):
        return "null"
    inside = abs(error_in_jnd(metric, value, truth)) <= 1.0
    if inside:
        return "within" if verdict == "ok" else "within_flagged"
    return "flagged" if verdict != "ok" else "silent"
