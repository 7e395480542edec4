"""Synthesized responses analysed by roomconv's own ISO 3382 analysis."""

import numpy as np
import pytest

from roomconv.analysis.parameters import room_parameters
from roomconv.errors import InputError
from roomconv.synth.air import speed_of_sound
from roomconv.synth.generate import Receivers, synthesize
from roomconv.synth.room import RoomModel

HALL = RoomModel(24, 16, 8, {"floor": "seats-upholstered-occupied", "front": "wood-floor",
                             "back": "curtain-heavy"})
# A hall-like curve: no band differs from its neighbour by more than 25 %.
ASKED = {63: 1.7, 125: 1.9, 250: 2.0, 500: 2.0, 1000: 1.9, 2000: 1.7, 4000: 1.45, 8000: 1.15}


@pytest.mark.parametrize("seed", [1, 2])
def test_asked_reverberation_time_is_what_analysis_reads(seed):
    # Within 5 %, the ISO 3382-1 JND for decay times (Annex A, from memory).
    res = synthesize(HALL, (5, 4, 1.5), (14, 10, 1.2), seed=seed, rt=ASKED)
    bands, _, _ = room_parameters(res.ir[:, 0], res.rate, low=63, high=8000)
    for b in bands:
        assert b.t30_s == pytest.approx(ASKED[int(b.band_hz)], rel=0.05), b.band_hz


def test_sample_zero_is_emission_and_direct_sound_at_r_over_c():
    res = synthesize(HALL, (5, 4, 1.5), (14, 10, 1.2), seed=0, length_s=0.5)
    r = np.linalg.norm(np.subtract((5, 4, 1.5), (14, 10, 1.2)))
    peak = int(np.argmax(np.abs(res.ir[:, 0])))
    assert abs(peak - r / speed_of_sound(20) * res.rate) <= 1.0


def test_reproducible_with_a_seed_and_different_without():
    a = synthesize(HALL, (5, 4, 1.5), (14, 10, 1.2), seed=7, length_s=0.6)
    b = synthesize(HALL, (5, 4, 1.5), (14, 10, 1.2), seed=7, length_s=0.6)
    c = synthesize(HALL, (5, 4, 1.5), (14, 10, 1.2), seed=8, length_s=0.6)
    assert np.array_equal(a.ir, b.ir)
    assert not np.array_equal(a.ir, c.ir)


def test_stereo_pairs():
    spaced = synthesize(HALL, (5, 4, 1.5), (14, 10, 1.2), receivers=Receivers.parse("spaced:1"),
                        seed=1, length_s=1.0)
    assert spaced.ir.shape[1] == 2
    # The two capsules are 1 m apart along the length: direct sounds differ by the path change.
    c = speed_of_sound(20)
    r_l = np.linalg.norm(np.subtract((5, 4, 1.5), (13.5, 10, 1.2)))
    r_r = np.linalg.norm(np.subtract((5, 4, 1.5), (14.5, 10, 1.2)))
    pk = np.argmax(np.abs(spaced.ir), axis=0)
    assert abs(pk[0] - r_l / c * 48000) <= 1 and abs(pk[1] - r_r / c * 48000) <= 1
    co = synthesize(HALL, (5, 4, 1.5), (14, 10, 1.2), receivers=Receivers.parse("coincident:90"),
                    seed=1, length_s=1.0)
    late = co.ir[int(0.3 * 48000):]
    rho = np.corrcoef(late[:, 0], late[:, 1])[0, 1]
    # Diffuse-field correlation of cardioids 90° apart: (3 + cos 90°)/4 = 0.75 (closed form).
    assert rho == pytest.approx(0.75, abs=0.05)


@pytest.mark.parametrize("kwargs, text", [
    (dict(source=(30, 4, 1.5)), "outside the room"),
    (dict(receiver=(5, 4, -1)), "outside the room"),
    (dict(rt={500: 80.0}), "impossible"),
    (dict(rt={500: -1.0}), "impossible"),
    (dict(rt={600: 1.0}), "no octave band"),
])
def test_bad_synthesis_requests(kwargs, text):
    args = dict(source=(5, 4, 1.5), receiver=(14, 10, 1.2))
    args.update(kwargs)
    with pytest.raises(InputError, match=text):
        synthesize(HALL, args.pop("source"), args.pop("receiver"), **args)
