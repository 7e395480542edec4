"""The strength reference for G against closed forms, Parseval and the inverse-square law.

Sources named beside each check: closed forms (a sampled unit impulse of amplitude a has
∫p² dt = a²/fs), Parseval's theorem evaluated with numpy.fft and scipy.signal.sosfreqz
(reference libraries), the inverse-square law of a point source in a free field, and the
ISO 3382-1:2009 Annex A definition of G against a free-field reference at 10 m (from memory),
and for the reverberation-room method the diffuse-field relation of Vigran (2008), Building
Acoustics, eq. 4.48, with Sabine's A = 55.26·V/(c·T).
"""

import json
import math

import numpy as np
import pytest
from scipy.signal import resample_poly, sosfreqz

from roomconv.analysis.bands import all_bands, band_sos, bands_for_rate
from roomconv.analysis.calibration import (
    StrengthReference,
    parse_strength_reference,
    reference_from_dict,
    reference_from_response,
    reference_to_dict,
)
from roomconv.errors import InputError
from roomconv.measure.sweep import Sweep, sweep_signal


def band_limited_pulse(rate=96000, length_s=1.0, delay_s=0.1, lo=40.0, hi=16000.0):
    """Our own source: flat from lo to hi with half-octave raised-cosine skirts outside,
    linear phase, built as a spectrum so its energy is known by Parseval."""
    n = int(length_s * rate)
    f = np.fft.rfftfreq(n, 1.0 / rate)
    lf = np.log2(np.maximum(f, 1e-9))
    up = np.clip((lf - np.log2(lo / 2**0.5)) / 0.5, 0, 1)
    down = np.clip((np.log2(hi * 2**0.5) - lf) / 0.5, 0, 1)
    spec = (0.5 - 0.5 * np.cos(np.pi * up)) * (0.5 - 0.5 * np.cos(np.pi * down))
    h = np.fft.irfft(spec * np.exp(-2j * np.pi * f * delay_s), n)
    return 0.5 * h / np.max(np.abs(h))


def at_rate(h96, rate):
    """The same band-limited pulse at another rate (scipy.signal.resample_poly)."""
    if rate == 96000:
        return h96
    up, down = {48000: (1, 2), 44100: (147, 320)}[rate]
    return resample_poly(h96, up, down)


def parseval_band_energy(h, rate, band):
    """∫p² dt of the band-filtered pulse from the spectrum: (1/M)·Σ|X_k·H_k|² over the full
    circle (Parseval, numpy.fft + scipy.signal.sosfreqz), M long enough that the filter's
    ringing does not wrap round."""
    m = 1 << int(np.ceil(np.log2(2 * h.size)))
    x = np.fft.fft(h, m)
    _, resp = sosfreqz(band_sos(band, rate), worN=m, whole=True)
    return float(np.sum(np.abs(x * resp) ** 2) / m) / rate


def with_noise(h, level_db_re_peak, seed=0):
    rng = np.random.default_rng(seed)
    return h + np.max(np.abs(h)) * 10 ** (level_db_re_peak / 20) * rng.standard_normal(h.size)


# --- closed forms ---------------------------------------------------------------------------
@pytest.mark.parametrize("rate", [44100, 48000, 96000])
def test_unit_impulse_has_energy_a_squared_over_fs(rate):
    # Closed form: a sampled impulse of amplitude a is ∫p² dt = a²/fs.
    a = 0.25
    h = np.zeros(rate)
    h[2000] = a
    ref = reference_from_response(h, rate, distance_m=10.0)
    assert ref.wideband_db == pytest.approx(10 * math.log10(a * a / rate), abs=0.01)
    # Per band, the impulse's band energy is a²·Σh_band²/fs, the filter's own energy by
    # Parseval (scipy.signal.sosfreqz over the whole circle).
    bands, _ = bands_for_rate("octave", rate)
    for b in bands:
        _, resp = sosfreqz(band_sos(b, rate), worN=1 << 17, whole=True)
        want = 10 * math.log10(a * a * np.mean(np.abs(resp) ** 2) / rate)
        assert ref.bands_db[b.nominal] == pytest.approx(want, abs=0.02), b.nominal


@pytest.mark.parametrize("bands", ["octave", "third"])
def test_clean_pulse_110_db_above_noise_matches_parseval(bands):
    # A clean reference (noise 110 dB below the peak) used to be cut at sample 1; every band
    # must now hold the whole direct sound: Parseval (numpy.fft, scipy.signal.sosfreqz).
    rate = 48000
    h_clean = at_rate(band_limited_pulse(), rate)
    ref = reference_from_response(with_noise(h_clean, -110), rate, distance_m=10.0, bands=bands)
    kept, _ = bands_for_rate(bands, rate)
    inside = [b for b in kept if 50 <= b.nominal <= 12500]
    for b in inside:
        want = 10 * math.log10(parseval_band_energy(h_clean, rate, b))
        assert ref.bands_db[b.nominal] == pytest.approx(want, abs=0.02), b.nominal
    wide = 10 * math.log10(np.sum(h_clean**2) / rate)  # Parseval in time: Σx²/fs
    assert ref.wideband_db == pytest.approx(wide, abs=0.01)


def test_inverse_square_law_scales_to_ten_metres():
    # Point source in a free field: energy falls as 1/r², so L_10 = L_d + 20·lg(d/10).
    rate = 48000
    h = with_noise(at_rate(band_limited_pulse(), rate), -100)
    at10 = reference_from_response(h, rate, distance_m=10.0)
    for d in (3.0, 5.0, 20.0):
        ref = reference_from_response(h, rate, distance_m=d)
        shift = 20 * math.log10(d / 10.0)
        assert ref.wideband_db - at10.wideband_db == pytest.approx(shift, abs=1e-9)
        for k, v in at10.bands_db.items():
            assert ref.bands_db[k] - v == pytest.approx(shift, abs=1e-9)
    assert "3 m" in reference_from_response(h, rate, distance_m=3.0).method


def test_band_values_do_not_depend_on_the_sample_rate():
    # ∫p² dt is an energy per unit time: the same pulse at 44.1, 48 and 96 kHz must give the
    # same values (within 0.1 dB). The 8 kHz octave filter has order 4 at 44.1/48 kHz and 3 at
    # 96 kHz in analysis.bands, which changes its own energy; there the difference must be the
    # filters' own, by Parseval (numpy.fft + scipy.signal.sosfreqz), and no more.
    h96 = band_limited_pulse()
    refs = {
        r: reference_from_response(with_noise(at_rate(h96, r), -110), r, distance_m=10.0)
        for r in (44100, 48000, 96000)
    }
    base = refs[96000]
    for rate in (44100, 48000):
        assert refs[rate].wideband_db == pytest.approx(base.wideband_db, abs=0.1)
        for b in bands_for_rate("octave", rate)[0]:
            got = refs[rate].bands_db[b.nominal] - base.bands_db[b.nominal]
            if band_sos(b, rate).shape == band_sos(b, 96000).shape:
                assert abs(got) <= 0.1, (rate, b.nominal, got)
            else:
                want = 10 * math.log10(
                    parseval_band_energy(at_rate(h96, rate), rate, b)
                    / parseval_band_energy(h96, 96000, b)
                )
                assert got == pytest.approx(want, abs=0.02), (rate, b.nominal)


@pytest.mark.parametrize("seed", range(4))
def test_modest_noise_keeps_only_bands_it_leaves_within_half_a_jnd(seed):
    # Noise 60 dB below the peak sample: each band kept must lie within half the 1 dB JND of
    # G (ISO 3382-1:2009 Table A.1, from memory) of the clean value, and its stated random
    # error must cover the deviation; bands left out say why.
    rate = 48000
    h = at_rate(band_limited_pulse(), rate)
    clean = reference_from_response(with_noise(h, -110), rate, distance_m=10.0)
    ref = reference_from_response(with_noise(h, -60, seed), rate, distance_m=10.0)
    assert len(ref.bands_db) >= 6
    for k, v in ref.bands_db.items():
        assert abs(v - clean.bands_db[k]) <= 0.5, k
        assert abs(v - clean.bands_db[k]) <= 4 * ref.uncertainty_db[k] + 0.02, k
    for k in set(clean.bands_db) - set(ref.bands_db):
        label = f"{k / 1000:g}k" if k >= 1000 else f"{k:g}"
        assert any(n.startswith(f"{label} Hz band left out") for n in ref.notes)


def test_heavy_noise_leaves_bands_out_instead_of_guessing():
    rate = 48000
    h = with_noise(at_rate(band_limited_pulse(), rate), -45, seed=3)
    ref = reference_from_response(h, rate, distance_m=10.0)
    clean = reference_from_response(at_rate(band_limited_pulse(), rate), rate, distance_m=10.0)
    assert len(ref.bands_db) < len(clean.bands_db)
    for k, v in ref.bands_db.items():
        assert abs(v - clean.bands_db[k]) <= 0.5, k


# --- refusals -------------------------------------------------------------------------------
def _sweep_recording(rate=48000):
    s = Sweep(rate=rate, duration=2.0, silence_pre=0.3, silence_post=1.0)
    room = at_rate(band_limited_pulse(), rate)[4700:5400]
    y = np.convolve(sweep_signal(s), room)[: s.n_total]
    return 0.5 * y / np.max(np.abs(y)) + 1e-5 * np.random.default_rng(0).standard_normal(y.size)


def _plucks(rate=48000):
    # Our own "music": decaying tones every 0.25 s.
    t = np.arange(int(0.25 * rate)) / rate
    notes = [np.sin(2 * np.pi * f * t) * np.exp(-t / 0.15) for f in (220, 277, 330, 440, 554)]
    return 0.3 * np.tile(np.concatenate(notes), 2)


@pytest.mark.parametrize(
    "make",
    [_sweep_recording, _plucks, lambda: 0.1 * np.random.default_rng(1).standard_normal(48000)],
    ids=["sweep recording", "music", "noise"],
)
def test_what_is_not_an_impulse_response_is_refused(make):
    with pytest.raises(InputError, match="roomconv extract"):
        reference_from_response(make(), 48000, distance_m=3.0)


@pytest.mark.parametrize(
    "kw, text",
    [
        (dict(distance_m=0.0), "distance"),
        (dict(distance_m=-3.0), "distance"),
        (dict(distance_m=float("nan")), "distance"),
        (dict(distance_m=float("inf")), "distance"),
        (dict(distance_m=10.0, bands="sixth"), "band set"),
    ],
)
def test_bad_arguments_are_refused(kw, text):
    with pytest.raises(InputError, match=text):
        reference_from_response(band_limited_pulse(48000), 48000, **kw)


# --- lookup ---------------------------------------------------------------------------------
def _ref(**kw):
    d = dict(
        wideband_db=-60.0,
        bands_db={500.0: -70.0, 1000.0: -69.0},
        band_set="octave",
        rate_hz=48000,
        method="test values of our own",
    )
    d.update(kw)
    return StrengthReference(**d)


def test_lookup_per_band_and_wideband():
    ref = _ref()
    assert ref.lookup(500.0, 48000) == (-70.0, None)
    assert ref.lookup(500, 96000) == (-70.0, None)  # band energies hold at any rate
    assert ref.lookup(None, 48000) == (-60.0, None)
    value, why = ref.lookup(2000.0, 48000)
    assert value is None and "2k Hz" in why and "no value" in why


def test_lookup_refuses_the_wideband_value_at_another_rate():
    value, why = _ref().lookup(None, 96000)
    assert value is None and "48000 Hz" in why and "96000 Hz" in why


def test_a_bare_number_applies_to_the_wideband_only():
    ref = parse_strength_reference("-52.5")
    assert ref.lookup(None, 44100) == (-52.5, None)
    value, why = ref.lookup(1000.0, 44100)
    assert value is None and "wideband" in why and "roomconv calibrate" in why


def test_lookup_refuses_a_different_band_set():
    # Octave centres are third-octave centres too; an octave level on a third-octave band is
    # about 10·lg(3) = 4.8 dB high for a flat spectrum, so it must not pass silently.
    ref = _ref()
    value, why = ref.lookup(1000.0, 48000, band_set="third")
    # The library names the band set to use; the command line's option name is its own.
    assert value is None and "reference in the same third-octave-band set" in why
    third_1k = next(b for b in all_bands("third") if b.nominal == 1000)
    assert ref.lookup(third_1k, 48000)[0] is None
    octave_1k = next(b for b in all_bands("octave") if b.nominal == 1000)
    assert ref.lookup(octave_1k, 48000) == (-69.0, None)


@pytest.mark.parametrize("text", ["nan", "inf", "-inf", "NaN"])
def test_non_finite_numbers_are_refused(text):
    with pytest.raises(InputError, match="finite"):
        parse_strength_reference(text)


# --- the file -------------------------------------------------------------------------------
def test_json_round_trip(tmp_path):
    rate = 48000
    ref = reference_from_response(
        with_noise(at_rate(band_limited_pulse(), rate), -100), rate, distance_m=4.0, bands="third"
    )
    d = reference_to_dict(ref)
    assert d["kind"] == "roomconv strength reference" and d["version"] == 1
    assert set(d) == {
        "kind",
        "version",
        "quantity",
        "rate_hz",
        "band_set",
        "method",
        "wideband_db",
        "bands_db",
    }
    path = tmp_path / "cal.json"
    path.write_text(json.dumps(d))
    back = parse_strength_reference(str(path))
    assert back == ref
    assert back.lookup(1000.0, rate, band_set="third") == ref.lookup(1000.0, rate, band_set="third")


def _valid():
    return reference_to_dict(_ref())


@pytest.mark.parametrize(
    "mutate, field",
    [
        (lambda d: [d], "list"),
        (lambda d: {"500": 72.5, "wideband": 80.1}, "earlier version"),
        (lambda d: {k: v for k, v in d.items() if k != "kind"}, "kind"),
        (lambda d: {**d, "kind": "something else"}, "kind"),
        (lambda d: {**d, "version": 2}, "version"),
        (lambda d: {**d, "version": True}, "version"),
        (lambda d: {k: v for k, v in d.items() if k != "rate_hz"}, "rate_hz"),
        (lambda d: {**d, "rate_hz": "48k"}, "rate_hz"),
        (lambda d: {**d, "band_set": "sixth"}, "band_set"),
        (lambda d: {k: v for k, v in d.items() if k != "band_set"}, "band_set"),
        (lambda d: {**d, "method": 3}, "method"),
        (lambda d: {k: v for k, v in d.items() if k != "wideband_db"}, "wideband_db"),
        (lambda d: {**d, "wideband_db": "loud"}, "wideband_db"),
        (lambda d: {**d, "wideband_db": float("nan")}, "wideband_db"),
        (lambda d: {**d, "bands_db": [1, 2]}, "bands_db"),
        (lambda d: {**d, "bands_db": {"500": None}}, "bands_db.500"),
        (lambda d: {**d, "bands_db": {"500": float("inf")}}, "bands_db.500"),
        (lambda d: {**d, "bands_db": {"hello": 1.0}}, "bands_db"),
        (lambda d: {**d, "bands_db": {"600": 1.0}}, "bands_db"),
        (lambda d: {**d, "band_set": None}, "band_set"),
        (lambda d: {**d, "wideband_db": None, "bands_db": {}}, "no value"),
    ],
)
def test_malformed_files_name_the_file_and_the_field(tmp_path, mutate, field):
    path = tmp_path / "bad-cal.json"
    # json.dumps writes NaN/Infinity, which json.loads reads back: the check must catch them.
    path.write_text(json.dumps(mutate(_valid())))
    with pytest.raises(InputError) as info:
        parse_strength_reference(str(path))
    msg = str(info.value)
    assert str(path) in msg and field in msg, msg


def test_old_style_files_say_how_to_recreate_them(tmp_path):
    path = tmp_path / "old.json"
    path.write_text(json.dumps({"125": 70.1, "1000": 72.5, "wideband": 80.0}))
    # The library points to the command; its options are the command's own (--help).
    with pytest.raises(
        InputError, match="re-create it from the reference response with roomconv calibrate"
    ):
        parse_strength_reference(str(path))


@pytest.mark.parametrize(
    "make, text",
    [
        (lambda p: p.mkdir(), "folder"),
        (lambda p: p.write_text("{not json"), "not valid JSON"),
        (lambda p: None, "not found"),
    ],
)
def test_unreadable_files_are_refused(tmp_path, make, text):
    path = tmp_path / "cal.json"
    make(path)
    with pytest.raises(InputError, match=text) as info:
        parse_strength_reference(str(path))
    assert str(path) in str(info.value)


def test_reference_from_dict_accepts_a_wideband_only_file():
    d = {**_valid(), "band_set": None, "bands_db": {}, "rate_hz": None}
    ref = reference_from_dict(d, source="wide.json")
    assert ref.lookup(None, 96000) == (-60.0, None)
    assert ref.lookup(500.0, 96000)[0] is None


# --- the consumer's side: G = 10·lg(∫p² dt) − L_ref ---------------------------------------
def _strength(h, rate, ref, band):
    from roomconv.analysis.bands import filter_band

    level, why = ref.lookup(band, rate)
    assert why is None, why
    x = h if band is None else filter_band(h, rate, band)
    return 10 * math.log10(np.sum(x**2) / rate) - level


@pytest.mark.parametrize("rate", [44100, 48000, 96000])
def test_the_source_itself_at_r_metres_has_g_of_20_lg_10_over_r(rate):
    # Definition of G against the free-field level at 10 m (ISO 3382-1:2009 Annex A, from
    # memory) with the inverse-square law: the free-field response at r has G = 20·lg(10/r).
    # Reference at 48 kHz and 3 m; the response at another rate must not shift G (the
    # per-sample sum used to add 10·lg(96000/48000) = 3.01 dB at 96 kHz).
    h96 = band_limited_pulse()
    ref = reference_from_response(with_noise(at_rate(h96, 48000), -110), 48000, distance_m=3.0)
    for r in (5.0, 20.0):
        h = at_rate(h96, rate) * (3.0 / r)  # the same source heard at r
        want = 20 * math.log10(10.0 / r)
        for b in bands_for_rate("octave", min(rate, 48000))[0]:
            if b.nominal > 4000 and rate != 48000:
                continue  # 8 kHz: the filter's order differs by rate
            assert _strength(h, rate, ref, b) == pytest.approx(want, abs=0.1), (r, b.nominal)
        if rate == 48000:
            assert _strength(h, rate, ref, None) == pytest.approx(want, abs=0.05)


# --- reverberation room ---------------------------------------------------------------------
def diffuse_responses(rate=16000, t60=5.0, amplitude=0.05, positions=8, length_s=7.0, seed=0):
    """Our own reverberation room: Gaussian noise with an energy decay of 60 dB per T, a noise
    floor 80 dB down. Its band energy is known by construction: amplitude²·k_b·T/(6·ln 10),
    with k_b the band filter's energy per unit of white noise (Parseval via sosfreqz)."""
    n = int(length_s * rate)
    t = np.arange(n) / rate
    rng = np.random.default_rng(seed)
    env = amplitude * np.exp(-3 * math.log(10) * t / t60)
    return [
        env * rng.standard_normal(n) + 1e-4 * amplitude * rng.standard_normal(n)
        for _ in range(positions)
    ]


def test_reverberation_room_reference_against_the_diffuse_field_relation():
    # Diffuse field ∫p² dt = 4ρc·E/A against free field at 10 m ρc·E/(4π·10²) (Vigran 2008,
    # Building Acoustics, eq. 4.48), A = 55.26·V/(c·T) (Sabine), so
    # L_10 = L_rev + 10·lg(A) − 10·lg(1600π) with 10·lg(1600π) = 37.0 dB.
    from roomconv.analysis.calibration import reverberation_room_reference

    rate, t60, amp, volume, c = 16000, 5.0, 0.05, 200.0, 343.0
    bands = bands_for_rate("octave", rate)[0]
    ref = reverberation_room_reference(
        diffuse_responses(rate, t60, amp),
        rate,
        volume_m3=volume,
        reverberation_s={b.nominal: t60 for b in bands},
    )
    assert ref.wideband_db is None and ref.band_set == "octave"
    assert len(ref.bands_db) >= 5
    for b in bands:
        if b.nominal not in ref.bands_db:
            assert any(n.startswith(f"{b.label} Hz band left out") for n in ref.notes)
            continue
        _, resp = sosfreqz(band_sos(b, rate), worN=1 << 16, whole=True)
        energy = amp**2 * np.mean(np.abs(resp) ** 2) * t60 / (6 * math.log(10))
        area = 55.26 * volume / (c * t60)
        want = 10 * math.log10(energy) + 10 * math.log10(area) - 37.0
        sem = ref.uncertainty_db[b.nominal]
        # Random: each position's band energy fluctuates (finite bandwidth × decay time);
        # the standard error across positions bounds it. 0.02 dB: the rounded 37.0 and 55.26.
        assert ref.bands_db[b.nominal] == pytest.approx(want, abs=3 * sem + 0.02), b.nominal
    # Waterhouse correction 10·lg(1 + S·c/(8·V·f)) (ISO 3741, from memory).
    with_s = reverberation_room_reference(
        diffuse_responses(rate, t60, amp),
        rate,
        volume_m3=volume,
        surface_m2=210.0,
        reverberation_s={b.nominal: t60 for b in bands},
    )
    for b in bands:
        if b.nominal in ref.bands_db:
            extra = 10 * math.log10(1 + 210.0 * c / (8 * volume * b.exact))
            assert with_s.bands_db[b.nominal] - ref.bands_db[b.nominal] == pytest.approx(extra)


def test_reverberation_room_needs_several_positions_and_valid_times():
    from roomconv.analysis.calibration import reverberation_room_reference

    resp = diffuse_responses(positions=2)
    with pytest.raises(InputError, match="3 positions"):
        reverberation_room_reference(resp, 16000, volume_m3=200.0, reverberation_s={500: 5.0})
    resp = diffuse_responses(positions=3)
    with pytest.raises(InputError, match="500 Hz"):
        reverberation_room_reference(
            resp, 16000, volume_m3=200.0, reverberation_s={500: float("nan")}
        )
    with pytest.raises(InputError, match="room volume"):
        reverberation_room_reference(resp, 16000, volume_m3=-1.0, reverberation_s={500: 5.0})
    ref = reverberation_room_reference(resp, 16000, volume_m3=200.0, reverberation_s={500: 5.0})
    assert set(ref.bands_db) <= {500.0}
    assert any("1k Hz band left out: no reverberation time" in n for n in ref.notes)


@pytest.mark.parametrize("text", ["1e308", "-1e308", "250"])
def test_levels_that_are_not_levels_are_refused(text):
    # An outside audit found G = −1e308 dB returned as 'ok' for --calibration 1e308.
    with pytest.raises(InputError, match="not a finite level between"):
        parse_strength_reference(text)


def test_a_deeply_nested_file_is_refused_not_a_crash(tmp_path):
    p = tmp_path / "deep.json"
    p.write_text("[" * 100000 + "]" * 100000)
    with pytest.raises(InputError, match="nested too deeply"):
        parse_strength_reference(str(p))


def test_a_pipe_is_refused_before_it_is_opened(tmp_path):
    import os

    p = tmp_path / "fifo.json"
    os.mkfifo(p)
    with pytest.raises(InputError):
        parse_strength_reference(str(p))


def test_distances_beyond_a_free_field_measurement_are_refused():
    h = band_limited_pulse()
    with pytest.raises(InputError, match="distance"):
        reference_from_response(h, 96000, distance_m=1e308)
