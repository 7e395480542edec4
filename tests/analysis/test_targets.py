"""Reverberation-time targets: the DIN 18041 formulas at volumes of our own, the S12.60
limits by volume, BB93 variants, and the user's flat and per-band forms."""

from __future__ import annotations

import math

import pytest

from roomconv.analysis.targets import (
    KNOWN_TARGETS,
    din18041_t_soll,
    din18041_tolerance,
    parse_target,
    s1260_limit,
    user_target,
)
from roomconv.errors import InputError

# DIN 18041:2016 T_soll = a·lg V + b (formulas seen in a manufacturer's summary of the
# standard). At powers of ten lg V is exact, so the values below are by hand:
#   A1 at 1000 m³: 0.45·3 + 0.07 = 1.42     A2 at 1000 m³: 0.37·3 − 0.14 = 0.97
#   A3 at  100 m³: 0.32·2 − 0.17 = 0.47     A4 at  100 m³: 0.26·2 − 0.14 = 0.38
#   A5 at 1000 m³: 0.75·3 − 1.00 = 1.25     A5 above 10 000 m³: 2.0 s
BY_HAND = [
    ("A1", 1000.0, 1.42),
    ("A2", 1000.0, 0.97),
    ("A3", 100.0, 0.47),
    ("A4", 100.0, 0.38),
    ("A5", 1000.0, 1.25),
    ("A5", 20000.0, 2.0),
]


@pytest.mark.parametrize("group, volume, expected", BY_HAND)
def test_din18041_t_soll_by_hand(group, volume, expected):
    assert din18041_t_soll(group, volume) == pytest.approx(expected, abs=1e-12)


@pytest.mark.parametrize(
    "group, a, b, volume",
    [
        ("A1", 0.45, 0.07, 420.0),
        ("A2", 0.37, -0.14, 2600.0),
        ("A3", 0.32, -0.17, 230.4),
        ("A4", 0.26, -0.14, 180.0),
        ("A5", 0.75, -1.00, 5400.0),
    ],
)
def test_din18041_t_soll_formula_at_our_volumes(group, a, b, volume):
    # Closed form a·lg V + b (DIN 18041:2016, as above).
    assert din18041_t_soll(group, volume) == pytest.approx(a * math.log10(volume) + b, rel=1e-12)


@pytest.mark.parametrize(
    "group, volume", [("A1", 1200.0), ("A3", 20.0), ("A4", 600.0), ("A5", 150.0)]
)
def test_din18041_outside_its_volume_range_is_refused(group, volume):
    with pytest.raises(InputError, match="outside .* m³, where DIN 18041"):
        din18041_t_soll(group, volume)


def test_din18041_target_carries_the_tolerance_band():
    # Tolerance T/T_soll (DIN 18041:2016, groups A2–A4) — from memory, low confidence:
    # 125 Hz 0.65–1.45, 250 Hz–2 kHz 0.8–1.2.
    assert din18041_tolerance(125) == (0.65, 1.45)
    assert din18041_tolerance(1000) == (0.8, 1.2)
    t = parse_target("din18041:A3", 100.0)
    assert t.target_s[500] == pytest.approx(0.47)
    assert t.min_s[500] == pytest.approx(0.8 * 0.47) and t.max_s[500] == pytest.approx(1.2 * 0.47)
    assert t.max_s[125] == pytest.approx(1.45 * 0.47)
    assert "from memory" in t.source


@pytest.mark.parametrize("volume, limit", [(60.0, 0.6), (283.0, 0.6), (284.0, 0.7), (566.0, 0.7)])
def test_s1260_limits_by_volume(volume, limit):
    # ANSI/ASA S12.60-2010 Part 1: 0.6 s up to 10 000 ft³ (283 m³), 0.7 s up to 20 000 ft³
    # (566 m³), mean of 500 Hz, 1 kHz, 2 kHz.
    assert pytest.approx(283.0, abs=0.2) == 10000 * 0.3048**3
    assert s1260_limit(volume) == limit
    t = parse_target("s12.60", volume)
    assert t.mean_bands == (500, 1000, 2000) and t.max_s[1000] == limit
    assert t.min_s[1000] is None


def test_s1260_above_its_range_is_refused():
    with pytest.raises(InputError, match="above 566 m³"):
        parse_target("s12.60", 800.0)


def test_bb93_variants():
    # BB93:2015: SEN rooms at most 0.4 s over 125 Hz–4 kHz (seen); primary 0.6 s and
    # secondary 0.8 s T_mf for new build (from memory).
    sen = parse_target("bb93:sen")
    assert sen.mean_bands == (125, 250, 500, 1000, 2000, 4000) and sen.max_s[250] == 0.4
    assert parse_target("bb93:primary").max_s[1000] == 0.6
    sec = parse_target("bb93:secondary")
    assert sec.max_s[2000] == 0.8 and "from memory" in sec.source


def test_flat_and_per_band_targets():
    flat = parse_target("0.6", tolerance_pct=(-10.0, 5.0))
    assert set(flat.target_s) == {63, 125, 250, 500, 1000, 2000, 4000, 8000}
    assert flat.min_s[500] == pytest.approx(0.54) and flat.max_s[500] == pytest.approx(0.63)
    bands = parse_target("500:0.7,1000:0.6")
    assert bands.target_s == {500: 0.7, 1000: 0.6}


@pytest.mark.parametrize(
    "text, match",
    [
        ("quiet", "unknown; give seconds"),
        ("din18041:B2", "unknown; known targets"),
        ("bb93:college", "unknown; known targets"),
        ("500:0.6,700:0.6", "not an octave band"),
        ("500=0.6", "unknown; give seconds"),
        ("500:0.6,1000", "must look like BAND:VALUE"),
        ("-0.6", "must be positive"),
        ("s12.60", "depends on the room volume"),
    ],
)
def test_bad_targets_are_refused(text, match):
    with pytest.raises(InputError, match=match):
        parse_target(text)


def test_unknown_name_lists_the_known_ones():
    with pytest.raises(InputError) as err:
        parse_target("din18041:A9", 100.0)
    for name in KNOWN_TARGETS:
        assert name in str(err.value)


def test_user_tolerance_must_straddle_zero():
    with pytest.raises(InputError, match="lower ≤ 0 ≤ upper"):
        user_target({500: 0.6}, (5.0, 10.0))
