"""The late reverberant tail: noise whose decay time is a smooth function of frequency,
at the diffuse-field level a room of volume V implies.

The decay asked for is a reverberation time per octave band, i.e. what an octave-band filter
(IEC 61260-1) reading the tail should measure. Between and beyond the octave centres the
tail needs a decay at every frequency: :func:`decay_curve` draws one through node values,
linear in log T against log f and held flat beyond the outer bands, and the tail applies it
per narrow band (six per octave). Because an octave filter also hears its neighbours'
slopes, :func:`fit_decay_nodes` adjusts the node values until a model of the octave reading
(:func:`octave_reading`, the same narrow bands and the analysis's own filter, read from
where the tail starts) returns the values asked for, and reports any band it cannot bring
there.

When the asked value cannot be read
-----------------------------------
Where T changes by a factor of about three within one octave, no decay curve makes the
octave filter read the asked value. Example: an 8 × 6 × 3 m room with a carpeted floor,
acoustic-tile ceiling and plaster walls has Eyring T = 3.54 s at 125 Hz, 1.24 s at 250 Hz
and 0.44 s at 500 Hz. The 250 Hz filter (Butterworth of order 3 on the exact band edges,
as the analysis uses) passes the spectrum below its lower edge, 177.8 Hz, where the 125 Hz
band's 3.54 s lives, at −13.0 dB relative to its pass band (its closed-form magnitude
integrated over a flat spectrum). A backward integral weighs each part by its T, so the
leak starts at −13.0 + 10·log10(3.54/1.24) = −8.4 dB and falls at 60/3.54 = 17 dB/s, the
band's own part at 60/1.24 = 48 dB/s: they cross 0.27 s in, at −13 dB, inside the
−5…−35 dB range of T30; when the band's own part reaches −35 dB (0.72 s) the leak lies at
−20.6 dB, 14 dB above it. Fitting T30 to the sum of the two exponentials, the leak would
have to start below about −27 dB (−25 dB reads +7.5 %, −28 dB +3.5 %), some 18 dB under
what the skirt lets through, to move T30 by less than the 5 % difference limen of
ISO 3382-1 (Annex A, from memory); at −8.4 dB the same fit reads 3.07 s.
Tried with the same closed-form reading (for a continuous T(f), read from the emission):

* pre-compensated nodes: over 125 Hz nodes of 3.0–5.0 s, 250 Hz nodes of 0.02–1.24 s and
  500 Hz nodes of 0.2–0.44 s, as long as the 125 Hz reading stays within 5 % of 3.54 s
  the 250 Hz reading never falls below 1.78 s (+43 %); a node far below the asked value
  only adds a fast early drop (EDT 0.39 s, T30/T20 − 1 = +24 % for a 0.024 s node);
* a stepped curve (each octave's T held up to its band edges) is worse: 3.05 s at 250 Hz,
  because the slow decay then reaches the edge, where the filter passes −3 dB.

A real room with these surfaces, measured through the same filters, would show the same
leak: the reading is a property of octave filters meeting this T(f), not of the synthesis.
So such a band keeps its asked value at its own centre, and the synthesis states both
numbers: the T asked for (``used_rt``) and the T30 the analysis will read
(``expected_reading``), and why.
"""

from __future__ import annotations

import functools

import numpy as np
from scipy.signal import butter, fftconvolve, sosfreqz

from ..signal import cosine_step
from .air import speed_of_sound
from .image_source import band_weights
from .materials import OCTAVES

__all__ = [
    "band_noise",
    "decay_curve",
    "octave_reading",
    "fit_decay_nodes",
    "diffuse_tail",
    "NARROW_PER_OCTAVE",
]

_LN10 = np.log(10)
#: Envelope-evening window per band: 4 periods of the band's width, at least 10 ms (our
#: choice, common practice for smoothing a band envelope without following the decay).
_EVEN_PERIODS = 4.0
_EVEN_MIN_S = 0.01
#: Narrow bands per octave carrying their own decay (our choice): fine enough that
#: neighbouring narrow bands differ by under a fifth of an octave's change in T, few enough
#: to keep the tail to one inverse FFT per narrow band.
NARROW_PER_OCTAVE = 6
#: Lowest narrow band, Hz: everything below it shares its decay.
_NARROW_LOW_HZ = 20.0
#: A fitted octave reading within this fraction of the asked value counts as reached (our
#: choice: a tenth of the 5 % just-noticeable difference of ISO 3382-1, Annex A).
FIT_TOLERANCE = 0.005
#: How far a node may move from its asked value while fitting (our choice): beyond this the
#: curve would need implausible swings, and the band is reported as not reachable instead.
_NODE_RANGE = 4.0
#: Exponent of each update (our choice): a full step overshoots where neighbouring bands
#: pull on each other's readings.
_STEP = 0.5
#: A band still this far from its target after fitting is left at its asked value (our
#: choice, twice the ISO 3382-1 JND of 5 %).
_GIVE_UP = 0.10


def _moving_rms(x: np.ndarray, n: int) -> np.ndarray:
    k = np.ones(max(1, n)) / max(1, n)
    # FFT convolution: a direct one costs samples × window, minutes for long low bands.
    return np.sqrt(np.maximum(fftconvolve(x * x, k, mode="same"), 1e-30))


def band_noise(rate: int, n_samples: int, rng: np.random.Generator, bands=OCTAVES) -> np.ndarray:
    """Unit-variance white noise split into bands (sum over bands = the white noise), each
    band's short-term level evened out.

    A plain Gaussian band noise fluctuates in level over a few periods of its bandwidth, so a
    decay imposed on it comes out several per cent off at low frequencies; dividing each band
    by its own smoothed envelope (window ≈ 4/bandwidth, at least 10 ms) removes that.

    Parameters
    ----------
    rate : int
        Sample rate, Hz.
    n_samples : int
        Length, samples.
    rng : numpy.random.Generator
        Source of the noise (reproducible with a seeded generator).
    bands : sequence of float
        Octave mid-band frequencies, Hz.

    Returns
    -------
    ndarray, shape (bands, samples)

    Examples
    --------
    >>> z = band_noise(48000, 48000, np.random.default_rng(0))
    >>> z.shape
    (8, 48000)
    >>> round(float(np.var(z.sum(axis=0))), 1)  # the bands add up to unit-variance noise
    1.0
    """
    z = rng.standard_normal(n_samples)
    nfft = 1 << int(np.ceil(np.log2(n_samples)))
    W = band_weights(np.fft.rfftfreq(nfft, 1.0 / rate), bands)
    Z = np.fft.rfft(z, nfft)
    out = np.empty((len(bands), n_samples))
    for i, fc in enumerate(bands):
        zb = np.fft.irfft(Z * W[i], nfft)[:n_samples]
        bw = fc * (2**0.5 - 2**-0.5)
        win = int(max(_EVEN_MIN_S, _EVEN_PERIODS / bw) * rate)
        env = _moving_rms(zb, win)
        out[i] = zb / env * np.sqrt(np.mean(zb * zb))
    return out


def decay_curve(freqs, nodes: dict) -> np.ndarray:
    """Decay time at any frequency through per-band node values.

    log T is linear in log f between neighbouring nodes and held at the end values beyond
    the lowest and highest node.

    Parameters
    ----------
    freqs : array_like
        Frequencies, Hz (values at or below 0 take the lowest node's value).
    nodes : dict
        {band centre Hz: T in s}.

    Returns
    -------
    ndarray
        T in s at ``freqs``.

    Examples
    --------
    Half-way (in octaves) between 1 s at 500 Hz and 4 s at 1 kHz is the geometric mean:

    >>> decay_curve([250.0, 707.1, 2000.0], {500: 1.0, 1000: 4.0}).round(2).tolist()
    [1.0, 2.0, 4.0]
    """
    b = np.array(sorted(nodes), float)
    v = np.log([nodes[k] for k in sorted(nodes)])
    lf = np.log(np.maximum(np.asarray(freqs, float), 1e-6))
    return np.exp(np.interp(lf, np.log(b), v))


def narrow_centres(rate: int) -> np.ndarray:
    """Centres of the narrow decay bands, Hz: NARROW_PER_OCTAVE per octave from 20 Hz up to
    below Nyquist.

    Examples
    --------
    >>> c = narrow_centres(48000)
    >>> float(c[0]), round(float(c[NARROW_PER_OCTAVE]), 6), bool(c[-1] < 24000)
    (20.0, 40.0, True)
    """
    n = int(np.floor(np.log2(0.5 * rate / _NARROW_LOW_HZ) * NARROW_PER_OCTAVE))
    return _NARROW_LOW_HZ * 2.0 ** (np.arange(n + 1) / NARROW_PER_OCTAVE)


def _narrow_weight(freqs: np.ndarray, centres: np.ndarray, i: int) -> np.ndarray:
    """Row ``i`` of ``band_weights(freqs, centres, 1 / NARROW_PER_OCTAVE)``, computed from its
    own two crossovers only."""
    lf = np.log2(np.maximum(freqs, 1e-6))
    tr = 1.0 / NARROW_PER_OCTAVE
    w = np.ones_like(lf)
    if i > 0:
        w *= cosine_step((lf - 0.5 * np.log2(centres[i - 1] * centres[i])) / tr + 0.5)
    if i + 1 < centres.size:
        w *= 1 - cosine_step((lf - 0.5 * np.log2(centres[i] * centres[i + 1])) / tr + 0.5)
    return w


@functools.lru_cache(maxsize=64)
def _octave_power(rate: int, band: float) -> np.ndarray:
    """|H|² of an IEC 61260-1 octave band-pass (Butterworth, order 3, or 4 for bands reaching
    above 15 % of the rate, on the exact base-10 band edges) at ``freqs``."""
    # Exact mid-band frequency 1000·10^(0.3x) (IEC 61260-1:2014, eq. 2), edges at 10^(±0.15).
    x = np.round(10 * np.log10(band / 1000.0) / 3)
    fm = 1000.0 * 10 ** (0.3 * x)
    lo, hi = fm * 10**-0.15, fm * 10**0.15
    if hi >= 0.5 * rate:
        hi = 0.499 * rate
    if lo >= 0.9 * hi:
        # A band above what the rate holds (8 kHz at 8 kHz sampling): read the top of the
        # spectrum instead, so its node is still fitted to something.
        lo = 0.8 * hi
    order = 3 if hi < 0.15 * rate else 4
    sos = butter(order, [lo, hi], btype="bandpass", fs=rate, output="sos")
    _, h = sosfreqz(sos, worN=_grid(rate), fs=rate)
    return np.abs(h) ** 2


def _grid(rate: int) -> np.ndarray:
    return np.geomspace(10.0, 0.49 * rate, 600)


def octave_reading(nodes: dict, rate: int, bands=OCTAVES, *, start_s: float = 0.0) -> dict:
    """Expected octave-band T30 of the tail :func:`diffuse_tail` makes from ``nodes``.

    The tail gives each narrow band i (:func:`narrow_centres`) the amplitude decay
    exp(−k_i·t/2), k_i = 6 ln10 / T_i with T_i from :func:`decay_curve`; its crossovers
    sum to one in amplitude, so at a frequency f shared by bands i and j the energy decays
    as (w_i·e^(−k_i t/2) + w_j·e^(−k_j t/2))². Expanded, every term is an exponential whose
    rate does not depend on f, so the octave filter's output energy and its backward
    integral are sums of exponentials in closed form:
    s(t) = Σ_ij G_ij·e^(−κ_ij t)/κ_ij, with κ_ij = (k_i + k_j)/2 and
    G_ij = Σ_f |H(f)|²·w_i(f)·w_j(f)·df. T30 is the line fitted to s from −5 to −35 dB.

    The backward integral starts where the tail does (``start_s``): what the tail would
    hold before it is not there to be read, so its fast-decaying first part weighs less
    against a slow neighbour's leak.

    Parameters
    ----------
    nodes : dict
        {band Hz: T s}, the curve's nodes.
    rate : int
        Sample rate, Hz.
    bands : sequence of float
        Octave bands to read.
    start_s : float
        Where the tail's contribution to the backward integral begins, s after emission.

    Returns
    -------
    dict
        {band: T30 in s}.

    Examples
    --------
    A decay that is the same at every frequency is read back unchanged:

    >>> round(octave_reading({b: 1.5 for b in OCTAVES}, 48000)[500], 3)
    1.5

    References
    ----------
    ISO 3382-1:2009, 5.3 (backward integration, T30 from −5 to −35 dB).
    Schroeder, M. R. (1965). New method of measuring reverberation time. J. Acoust. Soc.
    Am. 37, 409–412.
    IEC 61260-1:2014 (octave-band filters).
    """
    f = _grid(rate)
    df = np.gradient(f)
    centres = narrow_centres(rate)
    k = 6 * _LN10 / decay_curve(centres, nodes)  # energy decay rate per narrow band, 1/s
    w = np.array([_narrow_weight(f, centres, i) for i in range(centres.size)])
    # Own terms (i, i) and cross terms (i, i+1) counted twice; farther bands never overlap.
    pair_w = np.concatenate([w * w, 2 * w[:-1] * w[1:]])
    kappa = np.concatenate([k, 0.5 * (k[:-1] + k[1:])])
    out = {}
    for b in bands:
        g = pair_w @ (_octave_power(rate, float(b)) * df) / kappa
        # Terms the filter rejects by more than 70 dB cannot move the fit.
        keep = g > 1e-7 * g.max()
        g, kb = g[keep], kappa[keep]
        # Energy from start_s on: each term scaled by its decay over the part not played.
        g = g * np.exp(-kb * start_s)
        g = g / g.max()
        # The slowest term kept reaches −35 dB by 35/(10·log10(e)·κ_min) at the latest.
        t_end = 35.0 / (10 * np.log10(np.e) * kb.min())
        for _ in range(2):
            # Coarse pass to find the −35 dB point, then a fine one up to it.
            t = np.linspace(0.0, t_end, 400)
            s = np.exp(-np.outer(t, kb)) @ g
            db = 10 * np.log10(np.maximum(s / s[0], 1e-300))
            i35 = int(np.searchsorted(-db, 35.0))
            t_end = float(t[min(i35 + 1, t.size - 1)])
        sel = (db <= -5) & (db >= -35)
        slope = np.polyfit(t[sel], db[sel], 1)[0]
        out[b] = float(-60.0 / slope)
    return out


def fit_decay_nodes(
    target: dict, rate: int, *, iterations: int = 20, start_s: float = 0.0
) -> tuple[dict, dict]:
    """Node values whose curve an octave filter reads as ``target``.

    Starting from the target itself, each node is scaled by target / reading until every
    band is within :data:`FIT_TOLERANCE` or stops improving; nodes stay within a factor 4
    of their target. A band still more than 10 % off keeps its asked value as node and the
    others are fitted again; its reading then differs from the target (the caller reports
    it).

    Parameters
    ----------
    target : dict
        {octave band Hz: T30 in s} the octave filter should read.
    rate : int
        Sample rate, Hz.
    iterations : int
        Most updates.
    start_s : float
        Where the tail begins, s (see :func:`octave_reading`).

    Returns
    -------
    nodes : dict
        {band: T in s} for :func:`decay_curve`.
    reading : dict
        {band: T30 in s} the model reads from the nodes; equal to ``target`` within
        :data:`FIT_TOLERANCE` where the fit succeeded.

    Examples
    --------
    A decay falling by a third per octave is read 6 % slow at 250 Hz before the fit:

    >>> target = {63: 2.6, 125: 2.4, 250: 1.6, 500: 1.1, 1000: 1.0, 2000: 0.9, 4000: 0.8,
    ...           8000: 0.6}
    >>> round(octave_reading(target, 48000)[250] / 1.6, 2)
    1.06
    >>> nodes, reading = fit_decay_nodes(target, 48000)
    >>> all(abs(reading[b] / target[b] - 1) < 0.01 for b in target)
    True
    """
    bands = sorted(target)
    free = set(bands)
    nodes, reading = _fit(target, dict(target), free, rate, iterations, start_s)
    # A band the fit cannot bring near its target (a much slower neighbour leaks through the
    # filter's skirts whatever its own node) keeps its node at the asked value, so the decay
    # within it stays as asked, and the others are fitted again around it.
    stuck: set = set()
    for _ in range(len(bands)):
        more = {b for b in free - stuck if abs(reading[b] / target[b] - 1) > _GIVE_UP}
        if not more:
            break
        stuck |= more
        nodes, reading = _fit(target, dict(target), free - stuck, rate, iterations, start_s)
    return nodes, reading


def _fit(target: dict, nodes: dict, free: set, rate: int, iterations: int, start_s: float):
    bands = sorted(target)
    reading = octave_reading(nodes, rate, bands, start_s=start_s)

    def cost(r):
        return max((abs(np.log(r[b] / target[b])) for b in free), default=0.0)

    best = (cost(reading), dict(nodes), reading)
    for _ in range(iterations):
        if best[0] < np.log1p(FIT_TOLERANCE):
            break
        for b in free:
            nodes[b] = float(
                np.clip(
                    nodes[b] * (target[b] / reading[b]) ** _STEP,
                    target[b] / _NODE_RANGE,
                    target[b] * _NODE_RANGE,
                )
            )
        reading = octave_reading(nodes, rate, bands, start_s=start_s)
        if cost(reading) < best[0]:
            best = (cost(reading), dict(nodes), reading)
    return best[1], best[2]


def diffuse_tail(
    rt: dict,
    volume: float,
    rate: int,
    n_samples: int,
    *,
    c: float | None = None,
    seed: int = 0,
    bands=OCTAVES,
    noise: np.ndarray | None = None,
    nodes: dict | None = None,
) -> np.ndarray:
    """Noise · sqrt(4πc / (V·fs)) · 10^(−3t/T(f)), T(f) a smooth curve through per-band
    nodes, applied per narrow band.

    The level is the expected energy of image-source arrivals per unit time for a source
    whose direct sound has amplitude 1/r: 4πc/V (reflection density 4πc³t²/V times 1/(ct)²),
    referred to the moment of emission. Integrated from the direct sound's arrival r/c on it
    is (4πcT/(6 ln10·V))·e^(−6 ln10·r/(cT)) = (312·T/V)·e^(−0.04 r/T) relative to the
    direct sound's 1/r², Barron and Lee's revised theory.

    Parameters
    ----------
    rt : dict
        Reverberation time per octave band an octave filter should read, {band_hz: s}.
    volume : float
        Room volume, m³.
    rate : int
        Sample rate, Hz.
    n_samples : int
        Length, samples; sample 0 is the moment of emission.
    c : float, optional
        Speed of sound, m/s (default: :func:`~roomconv.synth.air.speed_of_sound` at 20 °C).
    seed : int
        Seed of the noise when ``noise`` is not given.
    bands : sequence of float
        Octave mid-band frequencies, Hz, of ``noise``.
    noise : ndarray, optional
        (bands, samples) from :func:`band_noise`, to share or correlate noise between
        channels.
    nodes : dict, optional
        The curve's nodes from :func:`fit_decay_nodes` (default: fitted here from ``rt``).

    Returns
    -------
    ndarray, shape (samples,)

    Examples
    --------
    The energy from 0 to 0.1 s against the closed form (4πc/V)·T/(6 ln10)·(1 − 10^(−0.6)):

    >>> x = diffuse_tail({b: 1.0 for b in OCTAVES}, 200.0, 48000, 4800, c=343.2)
    >>> expected = 4 * np.pi * 343.2 / 200.0 / (6 * np.log(10)) * (1 - 10 ** -0.6)
    >>> bool(abs(10 * np.log10(np.sum(x * x) / expected)) < 0.5)
    True

    References
    ----------
    Kuttruff, H. Room Acoustics (5th ed., 2009), 4.1 (density of reflections) and 5.1
    (exponential decay of the diffuse field).
    Barron, M., Lee, L.-J. (1988). Energy relations in concert auditoriums, I. J. Acoust. Soc.
    Am. 84(2), 618–628 (revised theory of the reflected energy).
    """
    if c is None:
        c = speed_of_sound(20.0)
    if noise is None:
        noise = band_noise(rate, n_samples, np.random.default_rng(seed), bands)
    if nodes is None:
        nodes, _ = fit_decay_nodes({b: rt[b] for b in bands}, rate)
    white = noise.sum(axis=0)
    nfft = 1 << int(np.ceil(np.log2(n_samples)))
    Z = np.fft.rfft(white, nfft)
    centres = narrow_centres(rate)
    freqs = np.fft.rfftfreq(nfft, 1.0 / rate)
    T = decay_curve(centres, nodes)
    t = np.arange(n_samples) / rate
    out = np.zeros(n_samples)
    spec = np.zeros_like(Z)
    for i in range(centres.size):
        # A narrow band's weight is zero outside its neighbours' centres: evaluate it on
        # that slice only, so memory stays one spectrum however many bands there are.
        lo = np.searchsorted(freqs, centres[i - 1]) if i > 0 else 0
        hi = np.searchsorted(freqs, centres[i + 1], "right") if i + 1 < centres.size else None
        sl = slice(lo, hi)
        w = _narrow_weight(freqs[sl], centres, i)
        spec[:] = 0
        spec[sl] = Z[sl] * w
        out += np.fft.irfft(spec, nfft)[:n_samples] * np.exp(-3 * _LN10 * t / T[i])
    return out * np.sqrt(4 * np.pi * c / (volume * rate))
