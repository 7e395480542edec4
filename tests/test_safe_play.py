"""The one safe way to play a signal: ramps, limiter, cap, confirmation, device errors."""

import numpy as np
import pytest

from roomconv.errors import InputError
from roomconv.safety import OUTPUT_CAP_DBFS, safe_play

RATE = 48000


class FakeCard:
    """Stands in for the sound card: records what it was given, or fails like PortAudio."""

    def __init__(self, error: Exception | None = None):
        self.error, self.sent = error, []

    def __call__(self, samples, rate):
        if self.error is not None:
            raise self.error
        self.sent.append((samples.copy(), rate))


def test_loud_input_is_capped_and_ramped():
    card = FakeCard()
    res = safe_play(np.full(RATE, 3.0), RATE, confirm=lambda: None, play=card)
    y, rate = card.sent[0]
    # Cap: -1 dBFS is 10**(-1/20) = 0.8913 of full scale (closed form).
    assert np.max(np.abs(y)) <= 10 ** (OUTPUT_CAP_DBFS / 20) + 1e-6
    assert res.ok and rate == RATE and res.played_s == pytest.approx(1.0)
    # Ramps: a raised-cosine fade starts from exactly zero (closed form of 0.5 - 0.5 cos 0).
    assert y[0] == 0.0 and y[-1] == 0.0
    assert res.limited_db > 9.0  # 3.0 → 0.891 needs 20 log10(3 / 0.891) = 10.5 dB


def test_attenuation_lowers_the_level_by_its_db():
    card = FakeCard()
    safe_play(np.full(RATE, 0.5), RATE, confirm=lambda: None, play=card, attenuation_db=-12.0)
    y = card.sent[0][0]
    # -12 dB is a factor 10**(-12/20) = 0.2512 (closed form); the middle is past the ramps.
    assert y[RATE // 2] == pytest.approx(0.5 * 10 ** (-12 / 20), rel=1e-6)


def test_refusal_plays_nothing():
    card = FakeCard()

    def refuse():
        raise InputError("caution not confirmed")

    with pytest.raises(InputError):
        safe_play(np.ones(100), RATE, confirm=refuse, play=card)
    assert card.sent == []


def test_a_missing_device_is_a_message_not_a_crash():
    card = FakeCard(OSError("Error querying device -1"))
    res = safe_play(np.ones(RATE // 10), RATE, confirm=lambda: None, play=card)
    assert not res.ok and "Error querying device -1" in res.message and res.played_s == 0.0


def test_non_finite_samples_become_silence_and_gain_is_never_raised():
    card = FakeCard()
    x = np.full(1000, np.nan)
    safe_play(x, RATE, confirm=lambda: None, play=card)
    assert np.all(card.sent[0][0] == 0.0)
    with pytest.raises(InputError):
        safe_play(np.ones(10), RATE, confirm=lambda: None, play=card, attenuation_db=6.0)
