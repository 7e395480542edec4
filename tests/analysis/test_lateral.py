"""Lateral energy fractions J_LF, J_LFC and the late lateral level L_J against closed forms."""

import numpy as np
import pytest

from roomconv.analysis.bands import all_bands
from roomconv.analysis.calibration import StrengthReference
from roomconv.analysis.lateral import (
    fig8_from_ambisonic,
    lateral_fractions,
    lateral_single_numbers,
    wideband_fractions,
)
from roomconv.analysis.parameters import CAUTION, NOT_EVALUABLE, OK
from roomconv.errors import InputError

FS = 48000
ONSET = 480


def direct_plus_reflection(a, theta_deg, delay_ms, n=FS // 2, leak=0.0):
    """Omni: unit direct sound plus a reflection of amplitude a; figure-of-eight with its
    null towards the source: the reflection times cos θ, θ measured from the lateral axis
    (ISO 3382-1 figure-of-eight orientation — from memory), and the direct sound times
    ``leak``."""
    p, pl = np.zeros(n), np.zeros(n)
    d = int(round(delay_ms * FS / 1000))
    p[ONSET] = 1.0
    p[ONSET + d] = a
    pl[ONSET] = leak
    pl[ONSET + d] = a * np.cos(np.radians(theta_deg))
    return p, pl


def closed_form(a, theta_deg):
    """J_LF = a²cos²θ/(1+a²), J_LFC = a²|cos θ|/(1+a²): direct sound and one reflection,
    from the definitions (ISO 3382-1:2009, Annex A — from memory; the 0.05 / 0.10 pair for
    a = 0.5, θ = 60° follows by hand: 0.25·0.25/1.25 and 0.25·0.5/1.25)."""
    c = np.cos(np.radians(theta_deg))
    return a * a * c * c / (1 + a * a), a * a * abs(c) / (1 + a * a)


CASES = [(0.5, 60.0, 20.0), (0.8, 30.0, 40.0), (0.3, 0.0, 12.0), (0.6, 75.0, 60.0)]


@pytest.mark.parametrize("a,theta,delay", CASES)
def test_wideband_matches_closed_form(a, theta, delay):
    p, pl = direct_plus_reflection(a, theta, delay)
    jlf, jlfc = wideband_fractions(p, pl, FS)
    want_lf, want_lfc = closed_form(a, theta)
    if (a, theta) == (0.5, 60.0):  # the values worked by hand
        assert (want_lf, want_lfc) == pytest.approx((0.05, 0.10), abs=1e-12)
    assert jlf == pytest.approx(want_lf, abs=1e-12)
    assert jlfc == pytest.approx(want_lfc, abs=1e-12)


@pytest.mark.parametrize("a,theta,delay", CASES)
def test_octave_bands_match_closed_form_within_a_tenth_of_the_jnd(a, theta, delay):
    # A unit impulse has the same band energy in every band for the direct sound and the
    # reflection, so each band's fraction equals the wideband closed form; the zero-phase
    # band filter must not move energy across the 5 ms and 80 ms limits. Tolerance 0.005:
    # a tenth of the JND 0.05 (ISO 3382-1:2009, Table A.1 — from memory).
    p, pl = direct_plus_reflection(a, theta, delay)
    want_lf, want_lfc = closed_form(a, theta)
    bands = [b for b in all_bands() if b.nominal in (250.0, 500.0, 1000.0, 2000.0, 4000.0)]
    for row in lateral_fractions(p, pl, FS, bands=bands):
        assert row.values["jlf"] == pytest.approx(want_lf, abs=0.005), row.band_hz
        assert row.values["jlfc"] == pytest.approx(want_lfc, abs=0.005), row.band_hz
        # One reflection counts as random for the diffuse-field check (a caution at most);
        # no other flag.
        for key in ("jlf", "jlfc"):
            assert row.verdicts[key] == OK or row.codes[key] == ["statistical_uncertainty"]


def test_single_numbers_average_125_to_1000():
    p, pl = direct_plus_reflection(0.5, 60.0, 30.0)
    rows = lateral_fractions(p, pl, FS)
    sn = lateral_single_numbers(rows)
    # The arithmetic mean of the 125, 250, 500 and 1000 Hz octaves (ISO 3382-1:2009,
    # Annex A — from memory), numpy as the reference.
    want = np.mean([r.values["jlf"] for r in rows if r.band_hz in (125, 250, 500, 1000)])
    assert sn["values"]["jlf_avg"] == pytest.approx(want)
    assert sn["values"]["jlf_avg"] == pytest.approx(0.05, abs=0.005)
    # No calibration: L_J has no value, and says why.
    assert sn["values"]["lj_avg_db"] is None
    assert all(
        "lj_no_calibration" in r.codes.get("lj_db", [])
        for r in rows
        if r.band_hz in (125, 250, 500, 1000, 2000, 4000)
    )


def test_lj_with_calibration_matches_energy_sum():
    rng = np.random.default_rng(2)
    n = FS
    t = np.arange(n) / FS
    p = 0.05 * rng.standard_normal(n) * 10 ** (-3 * t / 0.8)
    pl = 0.05 * rng.standard_normal(n) * 10 ** (-3 * t / 0.8)
    p[:ONSET] = pl[:ONSET] = 0.0
    p[ONSET] = 1.0
    band = next(b for b in all_bands() if b.nominal == 1000.0)
    ref = StrengthReference(None, {1000.0: -20.0}, "octave", FS, "test value")
    (row,) = lateral_fractions(p, pl, FS, bands=[band], strength_reference=ref)
    # L_J = 10·lg(∫80ms^∞ p_L² dt) − L_ref (ISO 3382-1:2009, Annex A — from memory). The
    # reference: the same band filtered in the frequency domain with the scipy design of
    # the IEC 61260-1 octave, |H|² applied (zero phase), energy summed with numpy.
    from scipy.signal import butter, sosfreqz

    g = 10**0.3
    sos = butter(3, [1000 * g**-0.5, 1000 * g**0.5], btype="bandpass", fs=FS, output="sos")
    m = 1 << 17
    _, H = sosfreqz(sos, worN=m, whole=True)
    x = np.real(np.fft.ifft(np.fft.fft(pl, m) * np.abs(H) ** 2))[:n]
    want = 10 * np.log10(np.sum(x[ONSET + int(0.08 * FS) :] ** 2) / FS) + 20.0
    assert row.values["lj_db"] == pytest.approx(want, abs=0.2)


def test_fig8_that_does_not_null_the_direct_sound_is_flagged():
    # The reflection holds 0.25/1.25 = 0.2 of the 0–80 ms energy. A direct-sound leak ε
    # bounds the error at ε²·0.2 (J_LF) and ε·0.2 (J_LFC); JND 0.05 (ISO 3382-1:2009,
    # Table A.1 — from memory): over half of it a caution, over three JNDs no value.
    band = next(b for b in all_bands() if b.nominal == 1000.0)
    p, pl = direct_plus_reflection(0.5, 60.0, 20.0, leak=0.5)  # 6 dB down
    (row,) = lateral_fractions(p, pl, FS, bands=[band])
    assert "fig8_not_nulled" in row.codes["jlf"] and "fig8_not_nulled" in row.codes["jlfc"]
    assert row.verdicts["jlf"] == CAUTION and row.verdicts["jlfc"] == CAUTION  # 0.05, 0.1
    p, pl = direct_plus_reflection(0.5, 60.0, 20.0, leak=1.0)  # not nulled at all
    (row,) = lateral_fractions(p, pl, FS, bands=[band])
    # Both bounds 0.2, four JNDs: no values.
    assert row.verdicts["jlfc"] == NOT_EVALUABLE and row.values["jlfc"] is None
    assert row.verdicts["jlf"] == NOT_EVALUABLE and row.values["jlf"] is None
    # 40 dB down: both bounds below half the JND, so no flag.
    p, pl = direct_plus_reflection(0.5, 60.0, 20.0, leak=0.01)
    (row,) = lateral_fractions(p, pl, FS, bands=[band])
    assert "fig8_not_nulled" not in row.warning_codes


def test_channels_of_different_lengths_are_refused():
    p, pl = direct_plus_reflection(0.5, 60.0, 20.0)
    with pytest.raises(InputError, match="differ in length"):
        lateral_fractions(p, pl[:-10], FS)


@pytest.mark.parametrize("source_deg", [0.0, 40.0, -110.0])
def test_ambisonic_fig8_points_at_90_degrees_to_the_source(source_deg):
    # A plane wave from azimuth θ in ACN/SN3D first order: W = p, Y = p·sin θ, Z = 0,
    # X = p·cos θ (AmbiX: Nachbar et al. 2011). The lateral channel must null the source
    # and pass a reflection from θ_s + 90° at full gain.
    n = FS // 2
    acn = np.zeros((n, 4))

    def wave(i, az_deg, amp):
        az = np.radians(az_deg)
        acn[i] += amp * np.array([1.0, np.sin(az), 0.0, np.cos(az)])

    wave(ONSET, source_deg, 1.0)
    wave(ONSET + 960, source_deg + 90.0, 0.5)  # 20 ms, exactly lateral
    wave(ONSET + 1440, source_deg + 30.0, 0.4)  # 30 ms, 60° off the lateral axis
    split = fig8_from_ambisonic(acn, FS)
    assert split.source_azimuth_deg == pytest.approx(source_deg, abs=1e-9)
    assert abs(split.fig8[ONSET]) < 1e-12
    assert abs(split.fig8[ONSET + 960]) == pytest.approx(0.5, abs=1e-12)
    assert abs(split.fig8[ONSET + 1440]) == pytest.approx(0.4 * np.cos(np.radians(60)), abs=1e-12)
    # J_LF = Σ a²cos²θ / (1 + Σ a²) for the two reflections (closed form).
    jlf, _ = wideband_fractions(split.omni, split.fig8, FS)
    want = (0.25 + 0.16 * 0.25) / (1 + 0.25 + 0.16)
    assert jlf == pytest.approx(want, abs=1e-12)


def test_ambisonic_with_wrong_normalization_is_flagged():
    # A diffuse late field of N3D channels: X, Y, Z each carry as much energy as W, so
    # (X²+Y²+Z²)/W² ≈ 3 instead of SN3D's 1 (Zotter & Frank 2019 — from memory).
    rng = np.random.default_rng(5)
    n = FS // 2
    t = np.arange(n) / FS
    env = 10 ** (-3 * t / 0.6)
    acn = rng.standard_normal((n, 4)) * env[:, None] * 0.05
    acn[:ONSET] = 0.0
    acn[ONSET] = [1.0, 0.0, 0.0, 1.0]
    codes = [c for c, _ in fig8_from_ambisonic(acn, FS).cautions]
    assert "ambisonic_normalization" in codes
    acn[:, 1:] /= np.sqrt(3)  # SN3D: ratio ≈ 1
    acn[ONSET] = [1.0, 0.0, 0.0, 1.0]
    codes = [c for c, _ in fig8_from_ambisonic(acn, FS).cautions]
    assert "ambisonic_normalization" not in codes


def test_ambisonic_needs_four_channels():
    with pytest.raises(InputError, match="4 channels"):
        fig8_from_ambisonic(np.zeros((100, 2)), FS)


def test_fig8_gain_checked_against_a_diffuse_late_field():
    # In a diffuse field an ideal figure-of-eight picks up ⟨cos²⟩ = 1/3 of the omni's energy
    # (closed form, mean over the sphere). Build the late field as an omni decay and a
    # figure-of-eight decay of a third of its energy, then with the figure-of-eight 3 dB hot.
    rng = np.random.default_rng(12)
    n = FS
    t = np.arange(n) / FS
    env = 10 ** (-3 * t / 0.8)
    p = 0.05 * rng.standard_normal(n) * env
    pl = 0.05 * rng.standard_normal(n) * env / np.sqrt(3)
    p[:ONSET] = pl[:ONSET] = 0.0
    p[ONSET] = 1.0
    band = next(b for b in all_bands() if b.nominal == 1000.0)
    (row,) = lateral_fractions(p, pl, FS, bands=[band])
    assert "fig8_gain_unmatched" not in row.warning_codes
    (row,) = lateral_fractions(p, pl * 10 ** (3 / 20), FS, bands=[band])
    assert "fig8_gain_unmatched" in row.codes["jlf"]
    assert row.verdicts["jlf"] == CAUTION
