"""Air absorption against ISO 9613 tables, reverberation formulas against a handbook example."""

import numpy as np
import pytest

from roomconv.errors import InputError
from roomconv.synth.air import air_attenuation, power_attenuation, speed_of_sound
from roomconv.synth.materials import MATERIALS, Material, load_materials
from roomconv.synth.room import SURFACES, Absorber, Patch, RoomModel, eyring, sabine

# Exact octave mid-band frequencies 1000·10^(3x/10), 63 Hz … 8 kHz.
EXACT = 1000 * 10 ** (0.3 * np.arange(-4, 4))

# Attenuation coefficients in dB/km at 101.325 kPa, as tabulated in ISO 9613-2:1996 Table 2
# (computed there from ISO 9613-1) — from memory.
ISO_TABLE = {
    (10, 70): [0.1, 0.4, 1.0, 1.9, 3.7, 9.7, 32.8, 117],
    (20, 70): [0.1, 0.3, 1.1, 2.8, 5.0, 9.0, 22.9, 76.6],
    (15, 20): [0.3, 0.6, 1.2, 2.7, 8.2, 28.2, 88.8, 202],
    (15, 50): [0.1, 0.5, 1.2, 2.2, 4.2, 10.8, 36.2, 129],
    (15, 80): [0.1, 0.3, 1.1, 2.4, 4.1, 8.3, 23.7, 82.8],
}


@pytest.mark.parametrize("cond", sorted(ISO_TABLE))
def test_air_attenuation_matches_iso_table(cond):
    T, rh = cond
    got = air_attenuation(EXACT, T, rh) * 1000
    for g, ref in zip(got, ISO_TABLE[cond], strict=True):
        # The table's rounding (0.05 dB/km, 0.5 dB/km above 100) plus 0.05 dB/km because the
        # remembered values may be off in the last digit.
        tol = 0.5 + 0.005 * ref if ref >= 100 else 0.1 + 0.002 * ref
        assert abs(g - ref) <= tol, (cond, g, ref)


def test_power_attenuation_and_speed_of_sound():
    # m = α / (10·log10 e) (ISO 3382-2, 3); c(20 °C) = 343.2 m/s (ideal gas).
    a = air_attenuation(4000.0)
    assert power_attenuation(4000.0) == pytest.approx(a / 4.3429448, rel=1e-6)
    assert speed_of_sound(20.0) == pytest.approx(343.2, abs=0.1)


def _handbook_room():
    # Everest & Pohlmann, Master Handbook of Acoustics, worked Sabine example: a 23.3 × 16 ×
    # 10 ft room, concrete floor 373 ft², gypsum board on walls and ceiling 1,159 ft², and
    # 340 ft² of acoustical tile counted on top of those. Their totals: 370.4, 214.8, 328.8,
    # 339.5, 336.8, 329.4 sabins; T = 0.49, 0.85, 0.56, 0.54, 0.54, 0.55 s (125 Hz–4 kHz).
    ft = 0.3048
    room = RoomModel(
        23.3 * ft,
        16 * ft,
        10 * ft,
        {
            "floor": "concrete",
            "ceiling": "gypsum-board",
            "left": "gypsum-board",
            "right": "gypsum-board",
            "front": "gypsum-board",
            "back": "gypsum-board",
        },
        absorbers=(Absorber("acoustic-tile", 340 * ft * ft),),
    )
    return room


def test_sabine_matches_handbook_worked_example():
    room = _handbook_room()
    ft2 = 0.3048**2
    sabins = {125: 370.4, 250: 214.8, 500: 328.8, 1000: 339.5, 2000: 336.8, 4000: 329.4}
    for b, A in sabins.items():
        assert room.absorption_area(b) / ft2 == pytest.approx(A, abs=0.2), b
    expected = {125: 0.49, 250: 0.85, 500: 0.56, 1000: 0.54, 2000: 0.54, 4000: 0.55}
    got = sabine(room, air=False)
    for b, T in expected.items():
        assert got[b] == pytest.approx(T, abs=0.006), b  # the book rounds to 0.01 s


def test_eyring_and_sabine_against_the_textbook_constant():
    # With ᾱ = 1 − 1/e on every surface, −ln(1 − ᾱ) = 1 exactly, so Eyring's formula
    # (Eyring 1930; IEC 60050-801, 801-31-09) reduces to T = 0.161·V/S and Sabine's to
    # T = 0.161·V/(S·ᾱ); 0.161 s/m is the textbook constant 24·ln10/c for c ≈ 343 m/s
    # (Kuttruff, Room Acoustics, ch. 5; from memory).
    a = 1 - np.exp(-1)
    mat = Material("e-fold", (a,) * 8, "closed-form test value")
    room = RoomModel(10, 8, 4, {s: "e-fold" for s in SURFACES}, extra_materials={"e-fold": mat})
    V, S = 320.0, 2 * (80 + 40 + 32)
    for b in (125, 1000, 4000):
        assert eyring(room, air=False)[b] == pytest.approx(0.161 * V / S, rel=1e-3)
        assert sabine(room, air=False)[b] == pytest.approx(0.161 * V / (S * a), rel=1e-3)
    # A room that absorbs everything has no reverberation by Eyring (the limit ᾱ → 1),
    # while Sabine's formula still gives 0.161·V/S: the known failing of Sabine in dead
    # rooms that Eyring's paper was written to fix.
    dead = RoomModel(10, 8, 4, {s: "anechoic" for s in SURFACES})
    assert eyring(dead, air=False)[1000] == 0.0
    assert sabine(dead, air=False)[1000] == pytest.approx(0.161 * V / S, rel=1e-3)
    # As ᾱ → 0, −ln(1−ᾱ) → ᾱ and Eyring → Sabine from below (series of the logarithm).
    hard = RoomModel(10, 8, 4, {s: "marble" for s in SURFACES})
    s_, e_ = sabine(hard, air=False), eyring(hard, air=False)
    for b in (125, 1000):
        assert e_[b] == pytest.approx(s_[b], rel=0.01)
        assert e_[b] < s_[b]


def test_air_term_shortens_high_bands():
    room = RoomModel(30, 20, 12, {"floor": "seats-upholstered-occupied"})
    with_air, without = sabine(room), sabine(room, air=False)
    assert with_air[8000] < 0.5 * without[8000]
    assert with_air[125] == pytest.approx(without[125], rel=0.01)


@pytest.mark.parametrize(
    "kwargs, text",
    [
        (dict(length=-3, width=4, height=3), "positive"),
        (dict(length=5, width=4, height=3, surfaces={"floor": "moon-dust"}), "unknown material"),
        (dict(length=5, width=4, height=3, surfaces={"roof": "plaster"}), "unknown surface"),
        (dict(length=5, width=4, height=3, patches=(Patch("floor", "carpet", 50.0),)), "cover"),
    ],
)
def test_bad_rooms_are_explained(kwargs, text):
    with pytest.raises(InputError, match=text):
        RoomModel(**kwargs)


def test_user_materials_are_checked(tmp_path):
    good = tmp_path / "m.toml"
    good.write_text('[studio-foam]\nalpha = [0.1, 0.3, 0.6, 0.9, 0.95, 0.95]\nsource = "our lab"\n')
    m = load_materials(good)["studio-foam"]
    assert m.alpha[0] == 0.1 and m.alpha[-1] == 0.95 and len(m.alpha) == 8
    bad = tmp_path / "b.json"
    bad.write_text('{"odd": {"alpha": [0.1, 0.2, 1.4, 0.5, 0.5, 0.5]}}')
    with pytest.raises(InputError, match="outside 0..1"):
        load_materials(bad)
    assert len(MATERIALS) >= 15
