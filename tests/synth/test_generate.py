"""Synthesized responses: timing, reproducibility, receiver pairs and refusals. The decay
and level checks against closed forms are in test_closed_forms.py."""

import numpy as np
import pytest

from roomconv.errors import InputError
from roomconv.synth.air import speed_of_sound
from roomconv.synth.generate import Receivers, synthesize
from roomconv.synth.room import RoomModel

HALL = RoomModel(
    24,
    16,
    8,
    {"floor": "seats-upholstered-occupied", "front": "wood-floor", "back": "curtain-heavy"},
)


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
    spaced = synthesize(
        HALL,
        (5, 4, 1.5),
        (14, 10, 1.2),
        receivers=Receivers.parse("spaced:1"),
        seed=1,
        length_s=1.0,
    )
    assert spaced.ir.shape[1] == 2
    # The two capsules are 1 m apart along the length: direct sounds differ by the path change.
    c = speed_of_sound(20)
    r_l = np.linalg.norm(np.subtract((5, 4, 1.5), (13.5, 10, 1.2)))
    r_r = np.linalg.norm(np.subtract((5, 4, 1.5), (14.5, 10, 1.2)))
    pk = np.argmax(np.abs(spaced.ir), axis=0)
    assert abs(pk[0] - r_l / c * 48000) <= 1 and abs(pk[1] - r_r / c * 48000) <= 1
    # Coincident pairs: correlation and level against a diffuse-field integral in
    # tests/synth/test_closed_forms.py.


@pytest.mark.parametrize(
    "kwargs, text",
    [
        (dict(source=(30, 4, 1.5)), "outside the room"),
        (dict(receiver=(5, 4, -1)), "outside the room"),
        (dict(rt={500: 80.0}), "impossible"),
        (dict(rt={500: -1.0}), "impossible"),
        (dict(rt={600: 1.0}), "no octave band"),
    ],
)
def test_bad_synthesis_requests(kwargs, text):
    args = dict(source=(5, 4, 1.5), receiver=(14, 10, 1.2))
    args.update(kwargs)
    with pytest.raises(InputError, match=text):
        synthesize(HALL, args.pop("source"), args.pop("receiver"), **args)
