"""Safety helpers: the limiter against its defining recursion, ramps and caps."""

import numpy as np
import pytest

from roomconv.errors import InputError
from roomconv.safety import OutputLimiter, apply_ramps, check_level, hard_cap


def reference_gain(x, rate, ceiling_db, release_s=0.2):
    """The limiter's definition, one sample at a time: instant attack, exponential release."""
    c = 10 ** (ceiling_db / 20)
    r = np.exp(-1 / (release_s * rate))
    g, out = 1.0, []
    for v in np.abs(x):
        need = c / v if v > c else 1.0
        g = min(need, 1 - (1 - g) * r)
        out.append(g)
    return np.array(out)


@pytest.mark.parametrize("block", [1, 64, 1000])
def test_vectorized_limiter_equals_its_recursion(block):
    rng = np.random.default_rng(0)
    x = rng.standard_normal(6000) * np.linspace(0.05, 4, 6000)
    lim = OutputLimiter(48000, -3.0)
    y = np.concatenate([lim.process(x[i : i + block, None]) for i in range(0, x.size, block)])
    want = np.clip(x * reference_gain(x, 48000, -3.0), -(10 ** (-3 / 20)), 10 ** (-3 / 20))
    assert np.max(np.abs(y[:, 0] - want)) < 1e-12
    assert np.max(np.abs(y)) <= 10 ** (-3 / 20)


def test_limiter_on_long_stereo_blocks_equals_its_recursion():
    # Blocks longer than the limiter's internal chunk (r^-n must not overflow), and stereo,
    # where both channels take the gain their louder sample needs.
    rng = np.random.default_rng(1)
    x = rng.standard_normal((20000, 2)) * np.linspace(0.05, 4, 20000)[:, None]
    lim = OutputLimiter(48000, -3.0)
    y = lim.process(x)
    g = reference_gain(np.abs(x).max(axis=1), 48000, -3.0)
    c = 10 ** (-3 / 20)
    assert np.max(np.abs(y - np.clip(x * g[:, None], -c, c))) < 1e-12
    assert lim.max_reduction_db == pytest.approx(-20 * np.log10(g.min()))
    assert lim.last_peak == pytest.approx(np.abs(y).max())
    # In place: the same numbers, written into the caller's array.
    again = OutputLimiter(48000, -3.0)
    z = x.copy()
    assert again.process(z, in_place=True) is z
    assert np.array_equal(z, y) and again.last_peak == lim.last_peak


def test_ramps_caps_and_level_check():
    x = np.ones((1000, 2))
    r = apply_ramps(x, 1000, 0.1)
    # Half of a Hann window (Harris 1978, Proc. IEEE 66(1), eq. for the cos² window):
    # w[k] = 0.5 − 0.5·cos(πk/n) for the n = 100 samples of the fade-in, mirrored at the end.
    k = np.arange(100)
    w = 0.5 - 0.5 * np.cos(np.pi * k / 100)
    assert np.max(np.abs(r[:100, 0] - w)) < 1e-15
    assert np.max(np.abs(r[-100:, 1] - w[::-1])) < 1e-15
    assert np.all(r[100:-100] == 1.0)
    assert np.max(hard_cap(np.array([3.0, -3.0]), -6.0)) == pytest.approx(10 ** (-6 / 20))
    assert check_level(-20) == -20
    with pytest.raises(InputError, match="output cap"):
        check_level(0.0)
