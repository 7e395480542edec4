"""Speech transmission index (IEC 60268-16:2011, indirect method) against closed forms.

How the check values were derived: for a pure exponential energy decay with the same T in
every band the modulation transfer is m(F) = 1/√(1 + (2πFT/13.8155)²) (Houtgast, Steeneken &
Plomp 1980; Schroeder 1981). With the same m in every band the α/β sum reduces the STI to
the MTI (Σα − Σβ = 1), so the STI is the mean over F of TI(m(F)), TI = (10 lg(m/(1−m)) + 15)
/ 30 — computed below with numpy, independently of the module. The issue's values 0.736
(T = 0.5 s) and 0.589 (T = 1 s) are that closed form without masking; the standard's
masking and reception threshold at the default 60 dB(A) lower them by about 0.002 (the
factors are computed by hand from the formulas below).
"""

import numpy as np
import pytest

from roomconv.analysis import sti as S
from roomconv.errors import InputError

F14 = np.array([0.63, 0.8, 1.0, 1.25, 1.6, 2.0, 2.5, 3.15, 4.0, 5.0, 6.3, 8.0, 10.0, 12.5])


def closed_form_mtf(T, f=F14):
    # Houtgast, Steeneken & Plomp (1980): exponential decay, 13.8155 = 6 ln 10.
    return 1.0 / np.sqrt(1.0 + (2 * np.pi * f * T / 13.8155) ** 2)


def closed_form_sti(m):
    """Mean TI over F: the STI when every band has the same m (Σα − Σβ = 1)."""
    snr = np.clip(10 * np.log10(m / (1 - m)), -15, 15)
    return float(np.mean((snr + 15) / 30))


def flat(m):
    return np.tile(m, (7, 1))


@pytest.mark.parametrize(("T", "expected"), [(0.5, 0.7363), (1.0, 0.5885)])
def test_exponential_decay_no_noise_matches_issue_values(T, expected):
    r = S.speech_transmission_index(flat(closed_form_mtf(T)), masking=False)
    # 0.736 and 0.589 (0.7363 and 0.5885 to four decimals): closed form for a pure
    # exponential decay (IEC 60268-16 procedure, Houtgast et al. 1980).
    assert r.value == pytest.approx(expected, abs=0.00006)
    assert r.value == pytest.approx(closed_form_sti(closed_form_mtf(T)), abs=1e-9)


@pytest.mark.parametrize("T", [0.3, 0.8, 2.0, 4.0])
def test_other_decay_times_match_closed_form(T):
    r = S.speech_transmission_index(flat(closed_form_mtf(T)), masking=False)
    assert r.value == pytest.approx(closed_form_sti(closed_form_mtf(T)), abs=1e-9)
    # The MTI of every band is that same mean TI.
    assert np.allclose(r.mti, closed_form_sti(closed_form_mtf(T)))


@pytest.mark.parametrize("voice", ["male", "female"])
@pytest.mark.parametrize("snr", [-20.0, -10.0, 0.0, 6.0, 12.0, 30.0])
def test_noise_alone_gives_ti_of_the_snr(snr, voice):
    # No reverberation (m = 1) and noise at SNR s: m = 1/(1+10^(−s/10)) so
    # 10 lg(m/(1−m)) = s exactly; STI = (clip(s, ±15) + 15)/30 (closed form).
    speech = np.full(7, 65.0)
    r = S.speech_transmission_index(
        np.ones((7, 14)), speech_db=speech, noise_db=speech - snr, voice=voice, masking=False
    )
    assert r.value == pytest.approx((np.clip(snr, -15, 15) + 15) / 30, abs=1e-6)


@pytest.mark.parametrize(("T", "snr"), [(0.5, 15.0), (1.0, 10.0), (2.0, 0.0), (1.5, 5.0)])
def test_reverberation_and_noise_combine_as_product(T, snr):
    # m_total = m_room · 1/(1+10^(−SNR/10)) (IEC 60268-16, indirect method), then the mean TI.
    speech = np.full(7, 60.0)
    r = S.speech_transmission_index(
        flat(closed_form_mtf(T)), speech_db=speech, noise_db=speech - snr, masking=False
    )
    m = closed_form_mtf(T) / (1 + 10 ** (-snr / 10))
    assert r.value == pytest.approx(closed_form_sti(m), abs=1e-9)


def test_table_values_with_noise():
    # Closed-form values computed with numpy from the same formulas (T = 1 s): SNR 15 dB
    # 0.5653, 10 dB 0.5304, 0 dB 0.3585.
    speech = np.full(7, 60.0)
    got = [
        S.speech_transmission_index(
            flat(closed_form_mtf(1.0)), speech_db=speech, noise_db=speech - s, masking=False
        ).value
        for s in (15, 10, 0)
    ]
    assert got == pytest.approx([0.5653, 0.5304, 0.3585], abs=0.0001)


def test_numerical_schroeder_integral_matches_closed_form():
    # Schroeder (1981): m(F) = |∫h² e^(−j2πFt)dt| / ∫h² dt; for h² = exp(−13.8155 t/T) the
    # integral is 1/√(1+(2πFT/13.8155)²) (closed form). Ten decay times long: the cut-off
    # holds 1e-60 of the energy; sampling error ~ (2πF/rate)² is below 1e-6.
    rate, T = 8000, 0.7
    t = np.arange(int(10 * T * rate)) / rate
    e = np.exp(-13.8155 * t / T)
    m = S.modulation_transfer(e, rate, F14)
    assert m == pytest.approx(closed_form_mtf(T), abs=2e-4)
    # 6 ln 10 = 13.81551 against the rounded 13.8155: a difference below 1e-6.
    assert S.exponential_mtf(F14, T) == pytest.approx(closed_form_mtf(T), abs=1e-6)


def test_default_speech_level_masking_and_threshold_are_small():
    # At 60 dB(A) male speech the 125 Hz octave is 62.9 dB against a 46 dB threshold: its
    # m is multiplied by 1/(1+10^(−1.69)) = 0.980; the masking from 125 Hz into 250 Hz
    # (slope 0.5·62.9 − 65 = −33.55 dB) by 1/(1+10^(−3.355)); the other bands change by
    # less than 0.1 %. Formulas of IEC 60268-16:2011 A.2.3–A.2.4 (from memory).
    for T, plain in ((0.5, 0.7363), (1.0, 0.5885)):
        r = S.speech_transmission_index(flat(closed_form_mtf(T)))
        assert plain - 0.004 < r.value < plain
    f = S.masking_factors(S.speech_spectrum(60.0))
    assert f[0] == pytest.approx(1 / (1 + 10 ** ((46.0 - 62.9) / 10)), rel=1e-6)
    assert f[1] == pytest.approx(
        1 / (1 + 10 ** (-33.55 / 10) + 10 ** ((27.0 - 62.9) / 10)), rel=1e-6
    )


def test_masking_lowers_sti_at_high_speech_levels():
    # Upward spread of masking grows with level (IEC 60268-16:2011, A.2.3, slopes from
    # memory). T = 1 s: 0.588 at normal levels → 0.573 at 80 dB(A) → 0.548 at 90 dB(A)
    # (closed-form m, values computed with numpy from the same formulas).
    m = flat(closed_form_mtf(1.0))
    got = [S.speech_transmission_index(m, speech_db=S.speech_spectrum(L)).value for L in (80, 90)]
    assert got == pytest.approx([0.573, 0.548], abs=0.001)
    # One band by hand: 70 dB in the band below gives a slope of 0.5·70 − 59.8 = −24.8 dB.
    f = S.masking_factors(np.full(7, 70.0), threshold=False)
    assert f[3] == pytest.approx(1 / (1 + 10 ** (-24.8 / 10)), rel=1e-9)
    assert f[0] == 1.0


def test_stipa_subset_closed_form():
    # STIPA: two modulation frequencies per band (IEC 60268-16:2011 Annex B, from memory);
    # with equal T per band the STI is the mean TI over those 14 frequency pairs.
    T = 0.5
    mtf = np.array([closed_form_mtf(T, np.array(pair)) for pair in S.STIPA_HZ])
    r = S.speech_transmission_index(mtf, stipa=True, masking=False)
    mti = np.array([closed_form_sti(closed_form_mtf(T, np.array(p))) for p in S.STIPA_HZ])
    # Male α and β, 125 Hz → 8 kHz (IEC 60268-16:2011 Table A.1, from memory), written out
    # here so that the weighting is computed apart from the module.
    alpha = [0.085, 0.127, 0.230, 0.233, 0.309, 0.224, 0.173]
    beta = [0.085, 0.078, 0.065, 0.011, 0.047, 0.095]
    expected = sum(a * m for a, m in zip(alpha, mti, strict=True)) - sum(
        b * np.sqrt(mti[k] * mti[k + 1]) for k, b in enumerate(beta)
    )
    assert r.value == pytest.approx(expected, abs=1e-9)
    assert r.value == pytest.approx(0.7394, abs=0.0001)  # closed form, computed with numpy


def test_weights_sum_to_one_and_spectrum_is_a_weighted_consistently():
    # Σα − Σβ = 1 for each voice (IEC 60268-16:2011, A.2.6, values from memory).
    for v in ("male", "female"):
        assert sum(S.ALPHA[v]) - sum(S.BETA[v]) == pytest.approx(1.0, abs=1e-9)
    # The male spectrum relative to the A-weighted level sums to +0.05 dB with the
    # IEC 61672-1 octave A-weights: the relative levels are consistent.
    assert S.a_weighted_level(S.MALE_SPECTRUM_DB) == pytest.approx(0.05, abs=0.02)


@pytest.mark.parametrize(
    ("sti", "letter"),
    [(0.80, "A+"), (0.76, "A+"), (0.75, "A"), (0.62, "D"), (0.50, "G"), (0.36, "J"), (0.2, "U")],
)
def test_qualification_band(sti, letter):
    # IEC 60268-16:2011 Annex F, Table F.1: bands 0.04 wide from J (0.36) to A (0.72–0.76).
    assert S.qualification_band(sti) == letter


def _room(T, rate, seconds, inr_db=None, seed=3):
    rng = np.random.default_rng(seed)
    t = np.arange(int(seconds * rate)) / rate
    h = rng.standard_normal(t.size) * 10 ** (-3 * t / T)
    h = np.concatenate([np.zeros(64), h])
    if inr_db is not None:
        h = h + rng.standard_normal(h.size) * 10 ** (-inr_db / 20)
    return h


@pytest.mark.parametrize("T", [0.5, 1.0])
def test_response_pipeline_matches_closed_form_within_jnd(T):
    # A diffuse exponential decay with a 50 dB noise floor: the STI from the response lies
    # within one JND (0.03, Galbrun & Kitapci 2014) of the closed form at 60 dB(A).
    rate = 32000
    r = S.sti_of_response(_room(T, rate, 2.5 * T, inr_db=50), rate)
    expected = S.speech_transmission_index(flat(closed_form_mtf(T))).value
    assert r.value == pytest.approx(expected, abs=S.JND)
    assert r.band == S.qualification_band(r.value)


def test_inr_limit_keeps_the_estimate_within_half_a_jnd():
    # The same response with noise just above the limit INR in every band (white noise
    # 24 dB below the onset level leaves the 125 Hz octave about 21 dB): the truncated,
    # compensated estimate stays within half a JND (0.015) of the noise-free one — the basis
    # of MIN_INR_DB.
    rate, T = 32000, 1.0
    clean = _room(T, rate, 2.5)
    rng = np.random.default_rng(9)
    scale = np.sqrt(np.mean(clean[64 : 64 + rate // 100] ** 2))
    noisy = clean + rng.standard_normal(clean.size) * scale * 10 ** (-(S.MIN_INR_DB + 4) / 20)
    a, b = S.sti_of_response(clean, rate), S.sti_of_response(noisy, rate)
    assert b.value is not None
    assert abs(a.value - b.value) < S.JND / 2


def test_low_inr_gives_no_value_with_reason():
    rate = 32000
    r = S.sti_of_response(_room(1.0, rate, 2.0, inr_db=12), rate)
    assert r.value is None and r.band is None
    assert "INR too low" in r.reason and r.reason in r.warnings


def test_low_sample_rate_gives_no_value_with_reason():
    rate = 16000
    r = S.sti_of_response(_room(0.5, rate, 1.0), rate)
    assert r.value is None and "8 kHz octave" in r.reason


def test_bad_inputs_are_refused():
    with pytest.raises(InputError, match="shape"):
        S.speech_transmission_index(np.ones((6, 14)))
    with pytest.raises(InputError, match="noise levels"):
        S.speech_transmission_index(np.ones((7, 14)), noise_db=[30.0] * 6)
    with pytest.raises(InputError, match="voice"):
        S.sti_from_mti(np.ones(7), voice="child")


def test_response_cut_inside_its_decay_is_flagged():
    # T = 2 s cut after 1 s: the response ends 30 dB below its start with no noise floor.
    # The missing tail raises m; the closed form (Houtgast et al. 1980) is lower, and the
    # value carries a warning; cut after 0.3 s (9 dB) it has no value.
    rate = 32000
    rng = np.random.default_rng(1)
    t = np.arange(int(1.0 * rate)) / rate
    h = rng.standard_normal(t.size) * 10 ** (-3 * t / 2.0)
    r = S.sti_of_response(h, rate)
    exact = S.speech_transmission_index(flat(closed_form_mtf(2.0))).value
    assert r.value is not None and exact < r.value < exact + S.JND
    assert any("inside the decay" in w for w in r.warnings)
    short = S.sti_of_response(h[: int(0.3 * rate)], rate)
    assert short.value is None and "INR too low" in short.reason


@pytest.mark.parametrize(("T", "drr_db"), [(0.5, 0.0), (1.0, -5.0), (1.0, 5.0), (2.0, 0.0)])
def test_direct_sound_plus_decay_matches_closed_form(T, drr_db):
    # Schroeder's formula for a direct sound of energy D followed by an exponential decay of
    # energy R: m(F) = |D + R·k/(k + j2πF)| / (D + R), k = 13.8155/T (closed form). The
    # pipeline (band filters, truncation, filter correction) stays within half a JND.
    rate = 32000
    rng = np.random.default_rng(4)
    t = np.arange(int(2.5 * T * rate)) / rate
    rev = rng.standard_normal(t.size) * 10 ** (-3 * t / T)
    R = float(np.sum(rev**2))
    D = R * 10 ** (drr_db / 10)
    h = np.concatenate([np.zeros(200), rev])
    h[200] += np.sqrt(D)
    k = 13.8155 / T
    m = np.abs(D + R * k / (k + 2j * np.pi * F14)) / (D + R)
    expected = S.speech_transmission_index(flat(m)).value
    assert S.sti_of_response(h, rate).value == pytest.approx(expected, abs=S.JND / 2)
