"""Image sources: arrival times to a fraction of a sample and 1/r amplitudes."""

import numpy as np
import pytest

from roomconv.synth.air import speed_of_sound
from roomconv.synth.image_source import band_weights, image_sources, render_images
from roomconv.synth.room import SURFACES, RoomModel

FS = 48000


def _delay_from_phase(x, rate, fmax=0.4):
    """Group delay from the slope of the unwrapped phase (shift theorem), samples."""
    n = 1 << 16
    X = np.fft.rfft(x, n)
    f = np.fft.rfftfreq(n, 1.0)
    band = (f > 0.01) & (f < fmax)
    ph = np.unwrap(np.angle(X[band]))
    slope = np.polyfit(2 * np.pi * f[band], ph, 1)[0]
    return -slope


def _room(reflective=()):
    surfaces = {s: ("rigid" if s in reflective else "anechoic") for s in SURFACES}
    return RoomModel(7.0, 5.0, 3.0, surfaces)


def test_direct_sound_arrives_at_distance_over_c_with_1_over_r():
    room = _room()
    src, rcv = (1.3, 1.1, 1.7), (5.21, 3.37, 1.05)
    imgs = image_sources(room, src, rcv, max_order=1)
    assert imgs.positions.shape[0] >= 1 and np.count_nonzero(imgs.gains[:, 0]) == 1
    h = render_images(imgs, FS, 4096, air=False)
    r = np.linalg.norm(np.subtract(src, rcv))
    expected = r / speed_of_sound(20) * FS
    assert _delay_from_phase(h, FS) == pytest.approx(expected, abs=0.1)
    # Band-limited unit impulse scaled by 1/r: its DC gain (sum of taps) is 1/r.
    assert np.sum(h) == pytest.approx(1 / r, rel=1e-3)


@pytest.mark.parametrize("wall", SURFACES)
def test_each_first_order_reflection_arrives_at_its_path_length(wall):
    room = _room(reflective=(wall,))
    src, rcv = np.array([1.3, 1.1, 1.7]), np.array([5.21, 3.37, 1.05])
    # Mirror the source in the wall by hand (closed form).
    axis = {"left": 0, "right": 0, "front": 1, "back": 1, "floor": 2, "ceiling": 2}[wall]
    edge = 0.0 if wall in ("left", "front", "floor") else room.dims[axis]
    mirrored = src.copy()
    mirrored[axis] = 2 * edge - src[axis]
    r_refl = np.linalg.norm(mirrored - rcv)
    r_dir = np.linalg.norm(src - rcv)
    imgs = image_sources(room, src, rcv, max_order=1)
    live = imgs.gains[:, 0] > 0
    assert sorted(imgs.distance[live]) == pytest.approx(sorted([r_dir, r_refl]))
    h = render_images(imgs, FS, 8192, air=False)
    c = speed_of_sound(20)
    t_dir, t_refl = r_dir / c * FS, r_refl / c * FS
    # Window each arrival (they are at least a few samples apart) and read its delay.
    for t, r in ((t_dir, r_dir), (t_refl, r_refl)):
        lo, hi = int(t) - 40, int(t) + 41
        other = t_refl if t == t_dir else t_dir
        if abs(other - t) < 90:
            pytest.skip("arrivals overlap for this wall")
        seg = np.zeros_like(h)
        seg[lo:hi] = h[lo:hi]
        assert _delay_from_phase(seg, FS, fmax=0.3) == pytest.approx(t, abs=0.1)
        assert np.sum(h[lo:hi]) == pytest.approx(1 / r, rel=0.01)


def test_band_weights_are_a_partition_of_unity():
    f = np.linspace(0, 24000, 5000)
    w = band_weights(f)
    assert np.allclose(w.sum(axis=0), 1.0)
    assert np.all(w >= 0) and np.all(w <= 1)


def test_reflection_gain_is_sqrt_one_minus_alpha():
    # Pressure reflection factor β = sqrt(1 − α) per band (energy balance at the wall).
    room = RoomModel(
        7.0, 5.0, 3.0, {s: ("carpet" if s == "floor" else "anechoic") for s in SURFACES}
    )
    src, rcv = (2, 2, 1.5), (5, 3, 1.2)
    imgs = image_sources(room, src, rcv, max_order=1)
    refl = imgs.order == 1
    live = refl & (imgs.gains[:, 0] > 0)
    i = np.flatnonzero(live)[0]
    alpha = np.array([room.surface_alpha("floor", b) for b in imgs.bands])
    assert imgs.gains[i] * imgs.distance[i] == pytest.approx(np.sqrt(1 - alpha))
