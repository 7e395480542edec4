"""Decay-time and energy parameters against closed forms for ideal exponential decays."""

import numpy as np
import pytest

from roomconv.analysis.decay import lundeby_truncation
from roomconv.analysis.parameters import analyse_response, room_parameters
from roomconv.errors import InputError

FS = 48000
LN10 = np.log(10)


def ideal_decay(T, seconds=3.0, rate=FS):
    """h(t) with h² = exp(−6·ln10·t/T): an ideal exponential energy decay."""
    t = np.arange(int(seconds * rate)) / rate
    return np.exp(-3 * LN10 * t / T)


@pytest.mark.parametrize("T", [0.4, 1.0, 2.2])
def test_ideal_exponential_matches_closed_forms(T):
    r = analyse_response(ideal_decay(T, seconds=max(3.0, 1.5 * T)), FS)
    # A straight Schroeder line of slope −60/T dB/s: EDT = T20 = T30 = T (ISO 3382-1, 5.3).
    for value in (r.edt_s, r.t20_s, r.t30_s):
        assert value == pytest.approx(T, rel=0.005)
    # C80 = 10·log10(exp(0.08·6·ln10/T) − 1) dB (integral of the exponential, closed form).
    assert r.c80_db == pytest.approx(10 * np.log10(np.exp(0.08 * 6 * LN10 / T) - 1), abs=0.05)
    # D50 = 1 − exp(−0.05·6·ln10/T).
    assert r.d50 == pytest.approx(1 - np.exp(-0.05 * 6 * LN10 / T), abs=0.002)
    # Ts = T / (6·ln10).
    assert r.ts_ms == pytest.approx(1000 * T / (6 * LN10), rel=0.01)
    # A straight line: no curvature, no non-linearity (ISO 3382-2, Annex B).
    assert abs(r.curvature_pct) < 1.0 and r.xi_permille < 1.0


@pytest.mark.parametrize("floor_db", [-40, -60, -80])
@pytest.mark.parametrize("seed", [0, 1])
def test_lundeby_path_returns_T_within_2_percent_under_noise(floor_db, seed):
    # Random carrier with an exponential envelope (a diffuse decay), plus steady noise.
    T = 1.2
    rng = np.random.default_rng(seed)
    t = np.arange(3 * FS) / FS
    h = rng.standard_normal(t.size) * np.exp(-3 * LN10 * t / T)
    clean = analyse_response(h, FS)
    noisy = analyse_response(h + 10 ** (floor_db / 20) * rng.standard_normal(t.size), FS)
    assert noisy.t20_s == pytest.approx(T, rel=0.02)
    assert noisy.edt_s == pytest.approx(clean.edt_s, rel=0.02)
    if floor_db == -40:
        # INR ≈ 40 dB < 45 dB: T30's range (−5..−35 dB, +10 dB margin) is not available.
        assert noisy.t30_s is None
        assert any("T30 not evaluated" in w for w in noisy.warnings)
    else:
        assert noisy.t30_s == pytest.approx(T, rel=0.02)
    assert noisy.inr_db == pytest.approx(-floor_db, abs=3)


def test_lundeby_crossing_point_where_decay_meets_noise():
    # Envelope 10^(−6t/T) meets noise n at t = (T/60)·10·log10(1/n) (closed form).
    T, floor = 1.0, -50
    rng = np.random.default_rng(5)
    t = np.arange(3 * FS) / FS
    h = rng.standard_normal(t.size) * np.exp(-3 * LN10 * t / T)
    tr = lundeby_truncation(h + 10 ** (floor / 20) * rng.standard_normal(t.size), FS)
    assert tr.index / FS == pytest.approx(T / 60 * -floor, rel=0.1)
    # The late-decay line sits just above the noise, which flattens it a little.
    assert tr.slope_db_s == pytest.approx(-60 / T, rel=0.1)
    assert tr.compensation > 0


def test_two_slope_decay_shows_curvature_and_nonlinearity():
    # Coupled rooms: fast decay then a slow one 20 dB down.
    t = np.arange(4 * FS) / FS
    e = np.exp(-6 * LN10 * t / 0.5) + 1e-2 * np.exp(-6 * LN10 * t / 2.5)
    r = analyse_response(np.sqrt(e), FS)
    assert r.curvature_pct > 10  # ISO 3382-2, B.3: C above 10 % flags a bent decay
    assert r.xi_permille > 10  # ISO 3382-2, B.2: ξ above 10 ‰ flags non-linearity


def test_reverse_filtering_reduces_low_band_bias():
    # One room mode at 63 Hz decaying with T = 0.1 s (B·T ≈ 4.4 in the 63 Hz octave): the
    # forward filter's own decay lengthens the result; filtering backwards in time moves its
    # ringing before the onset (Rasmussen, Rindel & Henriksen 1991).
    T = 0.1
    t = np.arange(2 * FS) / FS
    h = np.sin(2 * np.pi * 63 * t) * np.exp(-3 * LN10 * t / T)
    fwd, _, _ = room_parameters(h, FS, low=63, high=63, filtering="forward")
    rev, _, _ = room_parameters(h, FS, low=63, high=63)  # the default filters backwards
    assert "low_bt" in fwd[0].warning_codes
    assert fwd[0].edt_s > 1.5 * T
    for value in (rev[0].t20_s, rev[0].t30_s):
        assert value == pytest.approx(T, rel=0.05)
    # EDT's first 10 dB hold the sine's abrupt start (read as direct sound): within 10 %, and
    # flagged, since B·T < 16 (Jacobsen 1987).
    assert rev[0].edt_s == pytest.approx(T, rel=0.1)
    assert rev[0].value_verdicts["edt_s"] == "caution" and "low_bt" in rev[0].warning_codes


def test_silent_and_nan_responses_are_refused():
    with pytest.raises(InputError, match="silent"):
        room_parameters(np.zeros(FS), FS)
    h = ideal_decay(0.5)
    h[10] = np.nan
    with pytest.raises(InputError, match="NaN"):
        room_parameters(h, FS)


def test_too_short_for_low_bands_gives_partial_result():
    rng = np.random.default_rng(0)
    t = np.arange(int(0.2 * FS)) / FS
    h = rng.standard_normal(t.size) * np.exp(-3 * LN10 * t / 0.05)
    res, wide, _ = room_parameters(h, FS)
    by_band = {r.band_hz: r for r in res}
    assert by_band[31.5].t20_s is None
    assert any("too short" in w for w in by_band[31.5].warnings)
    assert by_band[2000].t20_s == pytest.approx(0.05, rel=0.15)


def test_low_sample_rate_skips_bands_with_a_note():
    rng = np.random.default_rng(0)
    rate = 8000
    t = np.arange(2 * rate) / rate
    h = rng.standard_normal(t.size) * np.exp(-3 * LN10 * t / 0.5)
    res, _, notes = room_parameters(h, rate)
    assert max(r.band_hz for r in res) == 2000
    assert any("4k Hz band skipped" in n for n in notes)
    with pytest.raises(InputError, match="no octave band fits"):
        room_parameters(h[:100], 40)
