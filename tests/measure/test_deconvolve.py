"""Deconvolution against responses we know exactly (scipy.signal.fftconvolve builds the
recordings)."""

import numpy as np
import pytest
from scipy.signal import fftconvolve, hilbert, resample_poly

from roomconv.errors import InputError
from roomconv.measure.deconvolve import extract_ir
from roomconv.measure.sweep import Sweep, harmonic_delay, inverse_filter, sweep_signal
from tests.conftest import band_limited_room, rel_error_db

FS = 48000
WIDE = Sweep(rate=FS, f_low=10, f_high=22000, duration=3.0, silence_pre=0.2, silence_post=1.5)


def _record(h, sweep=WIDE, noise=1e-6, seed=0):
    x = sweep_signal(sweep)
    y = fftconvolve(x, h)
    g = 0.5 / np.max(np.abs(y))
    rng = np.random.default_rng(seed)
    return y * g + noise * rng.standard_normal(y.size), h * g


def _two_tap(n=4000):
    # Band-limited so that the 10 Hz–22 kHz sweep covers all of its energy.
    h = band_limited_room(FS, rt=0.01, length_s=n / FS, direct_at=100)
    return h + 0.5 * np.roll(h, 1500)


@pytest.mark.parametrize(
    "name, h",
    [
        ("synthetic room", band_limited_room(FS)),
        ("pure delay", np.roll(band_limited_room(FS, rt=0.001, length_s=0.05, direct_at=0), 321)),
        ("two-tap echo", _two_tap()),
    ],
)
@pytest.mark.parametrize("use_sidecar", [True, False])
def test_round_trip_error_below_minus_60_db(name, h, use_sidecar):
    y, h_true = _record(h)
    kw = dict(sweep=WIDE) if use_sidecar else dict(excitation=sweep_signal(WIDE))
    ex = extract_ir(y, FS, length_s=1.0, **kw)
    assert rel_error_db(ex.ir[:, 0], h_true) < -60.0


@pytest.mark.parametrize("d", [0, 1, 250, 4801])
def test_pure_delay_peaks_at_its_delay(d):
    # Alignment contract: sample 0 is zero lag.
    h = np.zeros(d + 1)
    h[d] = 0.5
    y = fftconvolve(sweep_signal(WIDE), h)
    ex = extract_ir(y, FS, sweep=WIDE, length_s=0.5)
    assert int(np.argmax(np.abs(ex.ir[:, 0]))) == d


def test_reference_channel_cancels_latency_and_card_response():
    # The card delays everything by 777 samples and colours it with a short filter; the
    # loopback sees the same chain, so the division leaves the room alone.
    room = band_limited_room(FS, rt=0.2, length_s=0.4)
    card = np.zeros(800)
    card[777], card[779] = 1.0, 0.3
    x = sweep_signal(WIDE)
    out = fftconvolve(x, card)
    mic = fftconvolve(out, room)[: out.size + room.size]
    g = 0.5 / np.max(np.abs(mic))
    ref = np.pad(out, (0, mic.size - out.size))
    rec = np.stack([mic * g, ref], axis=1)
    ex = extract_ir(rec, FS, sweep=WIDE, reference_channel=1, length_s=1.0)
    assert ex.ir.shape[1] == 1
    assert ex.quality["reference_latency_samples"] == 777
    assert rel_error_db(ex.ir[:, 0], room * g) < -60.0


def test_nonlinearity_leaves_linear_ir_and_places_harmonics():
    # A memoryless polynomial after the room (here a pure delay of 300 samples).
    s = Sweep(
        rate=FS,
        f_low=20,
        f_high=20000,
        duration=4.0,
        level_dbfs=-12,
        silence_pre=1.0,
        silence_post=1.0,
    )
    d = 300
    x = sweep_signal(s)
    r = np.concatenate([np.zeros(d), x])
    # Applied at 4× the rate and filtered back down, as the converter's anti-alias filter
    # would: harmonics above Nyquist must not fold back into the band.
    r4 = resample_poly(r, 4, 1)
    y = resample_poly(r4 + 0.1 * r4**2 + 0.02 * r4**3, 1, 4)
    ex = extract_ir(y, FS, sweep=s, length_s=0.5)
    # The same chain without the polynomial is the reference: whatever differs in the linear
    # IR is distortion that leaked. The x³ term adds 3/4·a3·A² ≈ −60 dB to the fundamental.
    clean = extract_ir(r, FS, sweep=s, length_s=0.5)
    assert rel_error_db(ex.ir[:, 0], clean.ir[:, 0]) < -50.0
    assert int(np.argmax(np.abs(ex.ir[:, 0]))) == d
    for k in (2, 3):
        hk = ex.harmonics[k][:, 0]
        env = np.abs(hilbert(hk))
        # Harmonic IR k starts at lag −Δt_k (Farina 2000); its zero is rounded to a sample.
        assert abs(int(np.argmax(env)) - d) <= 2
        # A distinct arrival, not a ripple: well above the rest of its window.
        assert np.max(env) > 20 * np.median(env)
    # Harmonic energy never shows up in the linear IR beyond the −50 dB above.
    assert set(ex.harmonics) == {2, 3, 4, 5}
    assert harmonic_delay(s, 2) == pytest.approx(4.0 * np.log(2) / np.log(1000))


def test_harmonic_ir_levels_follow_the_polynomial_closed_form():
    # A memoryless y = x + a2·x² + a3·x³ driven by x = A·sin φ gives, by the power-reduction
    # identities sin² = (1 − cos 2φ)/2 and sin³ = (3 sin φ − sin 3φ)/4, a 2nd harmonic of
    # amplitude a2·A²/2 and a 3rd of a3·A³/4. The exponential sweep's k-th harmonic is itself
    # an exponential sweep with the same rate constant L, so it spends as long per hertz as
    # the fundamental does at the same frequency (df/dt = f/L for both; Farina 2000), and the
    # inverse filter turns it into a flat response of gain (harmonic amplitude)/A, delayed by
    # −L·ln k. Its magnitude is flat only in band; the phase offset (−cos, −sin) does not
    # change it. The median over 300 Hz–3 kHz is read, away from the band edges and fades.
    a2, a3, level_dbfs = 0.1, 0.02, -12.0
    s = Sweep(
        rate=FS,
        f_low=20,
        f_high=20000,
        duration=4.0,
        level_dbfs=level_dbfs,
        silence_pre=1.0,
        silence_post=1.0,
    )
    # A 300-sample delay keeps each harmonic response's pre-ringing inside its window.
    r = np.concatenate([np.zeros(300), sweep_signal(s)])
    r4 = resample_poly(r, 4, 1)  # no fold-back of harmonics above Nyquist
    y = resample_poly(r4 + a2 * r4**2 + a3 * r4**3, 1, 4)
    ex = extract_ir(y, FS, sweep=s, length_s=0.5)
    amp = 10 ** (level_dbfs / 20)
    expected = {2: a2 * amp / 2, 3: a3 * amp**2 / 4}
    n = 1 << 16
    f = np.fft.rfftfreq(n, 1 / FS)
    band = (f > 300) & (f < 3000)
    for k, want in expected.items():
        mag = np.abs(np.fft.rfft(ex.harmonics[k][:, 0], n))[band]
        assert 20 * np.log10(np.median(mag) / want) == pytest.approx(0.0, abs=0.1)


def test_averaging_repeats_lowers_noise_by_10_log_n():
    # Uncorrelated noise: averaging N synchronous repeats lowers its power by 10·log10(N).
    n_rep = 4
    s = Sweep(
        rate=FS,
        f_low=20,
        f_high=20000,
        duration=1.0,
        silence_pre=0.2,
        silence_post=1.5,
        repeats=n_rep,
    )
    h = band_limited_room(FS, rt=0.2, length_s=0.3)
    y = fftconvolve(sweep_signal(s), h)
    g = 0.5 / np.max(np.abs(y))
    sigma = 1e-3
    y = g * y + sigma * np.random.default_rng(3).standard_normal(y.size)
    ex = extract_ir(y, FS, sweep=s, length_s=1.0)
    rep = ex.quality["repeats"]
    assert rep["count"] == n_rep
    # The figure compares two noise-power estimates over 4 800 and 19 200 samples of the
    # response's last tenth. A power estimate from M independent Gaussian samples has a
    # relative standard error of sqrt(2/M) (chi-square statistics), about 0.1 dB for the
    # ratio here; 0.4 dB allows four such errors (the deconvolved noise is not quite white).
    assert rep["snr_gain_db"] == pytest.approx(10 * np.log10(n_rep), abs=0.4)
    # Mismatch of the repeats over 100 ms from the peak, closed form: white noise of variance
    # σ² through the inverse filter has variance σ²·Σinv² (Parseval); a repeat's deviation
    # from the mean of N holds (N−1)/N of it, and the mean holds the response's own energy
    # there plus 1/N of the noise. Over 4 × 4 800 samples the estimate scatters by ~0.05 dB.
    noise_var = sigma**2 * np.sum(inverse_filter(s) ** 2)
    hg = g * h
    pk, win = int(np.argmax(hg**2)), int(0.1 * FS)
    signal_e = np.sum(hg[pk : pk + win] ** 2)
    expected = 10 * np.log10(
        (n_rep - 1) / n_rep * noise_var * win / (signal_e + noise_var * win / n_rep)
    )
    assert rep["repeat_mismatch_db"] == pytest.approx(expected, abs=0.2)


def test_trim_cuts_leading_silence_and_says_how_much():
    h = np.zeros(5001)
    h[5000] = 0.5
    y = fftconvolve(sweep_signal(WIDE), h)
    ex = extract_ir(y, FS, sweep=WIDE, length_s=0.5, trim=True)
    # The onset is the first sample within 20 dB of the peak (the band-limited impulse rings
    # a little before its peak), and the trim keeps 1 ms before it.
    assert 5000 - 200 < ex.trimmed_samples <= 5000 - int(0.001 * FS)
    assert ex.trimmed_samples + int(np.argmax(np.abs(ex.ir[:, 0]))) == 5000


@pytest.mark.parametrize(
    "make, text",
    [
        (lambda y: np.zeros_like(y), "silent"),
        (lambda y: y[: y.size // 2], "shorter than the sweep"),
        # Channels count from 1 wherever a person reads them.
        (lambda y: np.clip(y * 10, -1, 1), r"clipped on channel\(s\) \[1\]"),
    ],
)
def test_bad_recordings_are_refused(make, text):
    y, _ = _record(band_limited_room(FS))
    with pytest.raises(InputError, match=text):
        extract_ir(make(y), FS, sweep=WIDE)


def test_quality_warns_when_noise_rules_out_t30():
    y, _ = _record(band_limited_room(FS), noise=3e-3)
    ex = extract_ir(y, FS, sweep=WIDE, length_s=1.0)
    assert ex.quality["ir"]["inr_db"][0] < 45
    assert any("T30" in w for w in ex.quality["warnings"])
    # One name for the idea across measurement and analysis.
    assert any("impulse-to-noise ratio (INR)" in w for w in ex.quality["warnings"])
    assert not any("peak-to-noise" in w for w in ex.quality["warnings"])
