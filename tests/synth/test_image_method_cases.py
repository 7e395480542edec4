"""Image sources of a shoebox against Allen and Berkley's image method, worked by hand.

Allen, J. B., Berkley, D. A. (1979). Image method for efficiently simulating small-room
acoustics. J. Acoust. Soc. Am. 65(4), 943–950: the images sit at R_p + R_r with
R_p = (x ± x', y ± y', z ± z') and R_r = 2(n·Lx, l·Ly, m·Lz); an image meets each wall of a
pair |n − q| and |n| times and its pressure carries β per meeting and 1/distance (their
1/(4π d) without the 4π, the scaling roomconv uses so that the direct sound is 1/r).
"""

import numpy as np
import pytest

from roomconv.synth.air import speed_of_sound
from roomconv.synth.image_source import image_sources, render_images
from roomconv.synth.room import SURFACES, RoomModel

FS = 48000
# A 6 × 4 × 3 m room, a different material on every surface so each wall's β shows.
MATS = {
    "left": "concrete",
    "right": "brick",
    "front": "glass-heavy",
    "back": "wood-panel",
    "floor": "carpet",
    "ceiling": "acoustic-tile",
}
ROOM = RoomModel(6, 4, 3, MATS)
SRC, RCV = (1.0, 1.0, 1.0), (5.0, 3.0, 2.0)


def beta(surface, band=1000):
    return np.sqrt(1 - ROOM.surface_alpha(surface, band))


# (image position worked by hand, walls met, distance to (5, 3, 2) worked by hand)
HAND = [
    ((1, 1, 1), (), np.sqrt(16 + 4 + 1)),  # direct
    ((-1, 1, 1), ("left",), np.sqrt(36 + 4 + 1)),  # x' mirrored in x = 0
    ((11, 1, 1), ("right",), np.sqrt(36 + 4 + 1)),  # mirrored in x = 6
    ((1, -1, 1), ("front",), np.sqrt(16 + 16 + 1)),  # mirrored in y = 0
    ((1, 1, -1), ("floor",), np.sqrt(16 + 4 + 9)),  # mirrored in z = 0
    ((1, 1, 5), ("ceiling",), np.sqrt(16 + 4 + 9)),  # mirrored in z = 3
    ((13, 1, 1), ("left", "right"), np.sqrt(64 + 4 + 1)),  # n = 1, q = 0 along x
    ((-1, -1, -1), ("left", "front", "floor"), np.sqrt(36 + 16 + 9)),  # the corner, q = 1
    ((1, 9, 1), ("front", "back"), np.sqrt(16 + 36 + 1)),  # l = 1, q = 0 along y
]


@pytest.mark.parametrize("pos, walls, dist", HAND)
def test_hand_worked_images(pos, walls, dist):
    imgs = image_sources(ROOM, SRC, RCV, max_order=3)
    i = int(np.argmin(np.linalg.norm(imgs.positions - np.array(pos, float), axis=1)))
    assert np.allclose(imgs.positions[i], pos)
    assert imgs.distance[i] == pytest.approx(dist)
    assert imgs.order[i] == len(walls)
    expected = np.prod([beta(w) for w in walls]) / dist
    band = imgs.bands.index(1000)
    assert imgs.gains[i, band] == pytest.approx(expected)


@pytest.mark.parametrize("order, count", [(1, 6), (2, 18), (3, 38)])
def test_number_of_images_of_each_order(order, count):
    # Images of exactly order N are the integer points with |i| + |j| + |k| = N of the image
    # lattice, 4N² + 2 of them for N ≥ 1 (closed form).
    imgs = image_sources(ROOM, SRC, RCV, max_order=3)
    assert np.count_nonzero(imgs.order == order) == count == 4 * order**2 + 2


def test_corner_image_arrives_at_its_path_length():
    # Only the three walls of one corner reflect: the order-3 corner image at (−1, −1, −1)
    # arrives at its distance / c with gain β³/d, here β = 1 (rigid) so 1/d.
    walls = {s: ("rigid" if s in ("left", "front", "floor") else "anechoic") for s in SURFACES}
    room = RoomModel(6, 4, 3, walls)
    imgs = image_sources(room, SRC, RCV, max_order=3)
    h = render_images(imgs, FS, 4096, air=False)
    d = np.sqrt(36 + 16 + 9)
    n0 = d / speed_of_sound(20) * FS
    # The nearest other live image (left + front, sqrt(36 + 16 + 1) m) must lie beyond the
    # ±32-tap kernel for the corner arrival's DC gain to be read on its own.
    live = imgs.distance[imgs.gains[:, 0] > 0]
    others = np.sort(np.abs(live - d))[1] / speed_of_sound(20) * FS
    assert others > 70
    seg = h[int(n0) - 33 : int(n0) + 34]
    assert np.sum(seg) == pytest.approx(1 / d, rel=1e-3)
    assert np.argmax(np.abs(h[int(n0) - 40 : int(n0) + 40])) + int(n0) - 40 == round(n0)
