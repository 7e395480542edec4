"""Open-plan office single numbers (ISO 3382-3) against closed-form lines and numpy."""

import numpy as np
import pytest

from roomconv.analysis import office as O
from roomconv.errors import InputError

R = np.array([2.0, 3.0, 4.0, 6.0, 8.0, 11.0, 16.0])


def level_law(r, l4=48.03, d2s=7.04):
    # Speech level falling by D2,S per distance doubling through L4 at 4 m (ISO 3382-3's
    # model): L(r) = L4 − D2,S·log2(r/4).
    return l4 - d2s * np.log2(r / 4.0)


def sti_law(r, rd=6.62, rp=14.14):
    # A straight STI line through 0.50 at rD and 0.20 at rP.
    slope = (0.20 - 0.50) / (rp - rd)
    return 0.50 + slope * (r - rd)


def test_exact_lines_give_back_their_parameters():
    n = O.office_numbers(R, level_law(R), sti_law(R))
    # The regression of an exact law returns the law (closed form).
    assert n.d2s_db == pytest.approx(7.04, abs=1e-9)
    assert n.lp_a_s_4m_db == pytest.approx(48.03, abs=1e-9)
    assert n.r_d_m == pytest.approx(6.62, abs=1e-9)
    assert n.r_p_m == pytest.approx(14.14, abs=1e-9)
    # rC = 4·2^((L4 − 45)/D2,S) (ISO 3382-3:2022): 4·2^(3.03/7.04) = 5.39 m.
    assert n.r_c_m == pytest.approx(4 * 2 ** (3.03 / 7.04), rel=1e-12)
    assert n.r_c_m == pytest.approx(5.39, abs=0.005)
    assert n.level_fit.r2 == pytest.approx(1.0) and not n.warnings


def test_positions_outside_the_range_are_left_out():
    # Points at 1 m and 20 m off the law: the standard's 2–16 m range (from memory) keeps
    # them out of the fit.
    r = np.concatenate([[1.0], R, [20.0]])
    L = np.concatenate([[80.0], level_law(R), [10.0]])
    s = np.concatenate([[0.95], sti_law(R), [0.9]])
    n = O.office_numbers(r, L, s)
    assert n.d2s_db == pytest.approx(7.04, abs=1e-9)
    assert n.r_d_m == pytest.approx(6.62, abs=1e-9)
    assert n.level_fit.used == [False] + [True] * 7 + [False]


def test_scattered_points_match_numpy_least_squares():
    rng = np.random.default_rng(5)
    L = level_law(R) + rng.normal(0, 1.0, R.size)
    s = sti_law(R) + rng.normal(0, 0.02, R.size)
    n = O.office_numbers(R, L, s)
    # Reference: numpy.polyfit of L on lg r and STI on r.
    b, a = np.polyfit(np.log10(R), L, 1)
    assert n.d2s_db == pytest.approx(-b * np.log10(2), abs=1e-9)
    assert n.lp_a_s_4m_db == pytest.approx(a + b * np.log10(4), abs=1e-9)
    d, c = np.polyfit(R, s, 1)
    assert n.r_d_m == pytest.approx((0.5 - c) / d, abs=1e-9)


def test_too_few_positions_give_null_with_reason():
    r = np.array([1.0, 2.5, 5.0, 9.0, 25.0])  # three inside 2–16 m
    n = O.office_numbers(r, level_law(r), sti_law(r))
    assert n.d2s_db is None and n.r_d_m is None and n.r_c_m is None
    assert "at least 4" in n.reasons["d2s_db"] and "at least 4" in n.reasons["r_d_m"]


def test_missing_sti_values_count_as_missing():
    s = list(sti_law(R))
    s[0] = s[1] = s[2] = s[3] = None
    n = O.office_numbers(R, level_law(R), s)
    assert n.r_d_m is None and "3 position(s)" in n.reasons["r_d_m"]
    assert n.d2s_db == pytest.approx(7.04, abs=1e-9)


def test_extrapolated_distance_is_flagged():
    # rP at 30 m lies beyond the last position (16 m): given, with a warning.
    n = O.office_numbers(R, level_law(R), sti_law(R, rd=10.0, rp=30.0))
    assert n.r_p_m == pytest.approx(30.0)
    assert any("rP" in w and "extrapolation" in w for w in n.warnings)


def test_rising_sti_gives_no_distances():
    n = O.office_numbers(R, level_law(R), 0.3 + 0.01 * R)
    assert n.r_d_m is None and "does not fall" in n.reasons["r_d_m"]


def test_normal_speech_spectrum_is_57_4_dba():
    # ISO 3382-3's normal-effort spectrum (from memory) sums to 57.4 dB(A) with the
    # IEC 61672-1 octave A-weights.
    assert O.a_weighted_speech(O.NORMAL_SPEECH_1M_DB) == pytest.approx(57.4, abs=0.05)


def test_level_from_strength_is_inverse_square():
    # G is relative to 10 m in a free field; 1 m is 20·lg(10) = 20 dB louder (ISO 3382-1).
    assert O.level_re_1m_from_strength([0.0, 6.0]) == pytest.approx([-20.0, -14.0])
    assert O.speech_octaves_at(np.full(7, -20.0)) == pytest.approx(
        np.array(O.NORMAL_SPEECH_1M_DB) - 20
    )


def test_bad_distances_refused():
    with pytest.raises(InputError, match="distances"):
        O.office_numbers([2.0, -3.0, 4.0, 5.0], [50.0] * 4, [0.5] * 4)
