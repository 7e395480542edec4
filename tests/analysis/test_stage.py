"""Stage support ST_early / ST_late against closed forms and a scipy-designed band filter."""

import numpy as np
import pytest
from scipy.signal import butter, sosfreqz

from roomconv.analysis.bands import all_bands
from roomconv.analysis.parameters import CAUTION, NOT_EVALUABLE, OK
from roomconv.analysis.stage import stage_single_numbers, stage_support

FS = 48000
ONSET = 2400  # 50 ms of silence before the direct sound


def iec_octave(fm_nominal):
    """Octave edges from IEC 61260-1:2014 eqs. 3, 5, 6 (base-ten ratio G = 10^0.3)."""
    g = 10**0.3
    index = round(np.log(fm_nominal / 1000) / np.log(2))
    fm = 1000 * g**index
    return fm * g**-0.5, fm * g**0.5


def delta_band_energy(fm_nominal):
    """Energy of a unit impulse filtered forwards and backwards by an order-3 Butterworth
    octave band-pass designed here with scipy (|H|⁴ averaged over the unit circle:
    Parseval)."""
    lo, hi = iec_octave(fm_nominal)
    sos = butter(3, [lo, hi], btype="bandpass", fs=FS, output="sos")
    _, H = sosfreqz(sos, worN=1 << 18, whole=True)
    return float(np.mean(np.abs(H) ** 4))


def tone_field(band, amplitude, n, t60=0.6):
    """A tone at the band's exact centre (where the Butterworth band-pass passes it whole)
    with a smooth onset at 20 ms, steady to 100 ms, then decaying at 60 dB per ``t60``
    until 1 s: a monotonic decay, as a room gives. Returns it and its energies in 20–100 ms
    and 100–1000 ms, summed from the unfiltered samples (Parseval: a tone inside the pass
    band keeps its energy)."""
    t = (np.arange(n) - ONSET) / FS
    env = np.where(t < 0.100, 1.0, 10 ** (-3 * (t - 0.100) / t60))
    rise = np.clip((t - 0.020) / 0.005, 0.0, 1.0)
    env = env * 0.5 * (1 - np.cos(np.pi * rise)) * (t < 1.0)
    x = amplitude * env * np.sin(2 * np.pi * band.exact * t)
    i20, i100, i1000 = (ONSET + int(round(s * FS)) for s in (0.020, 0.100, 1.000))
    return x, float(np.sum(x[i20:i100] ** 2)), float(np.sum(x[i100:i1000] ** 2))


@pytest.mark.parametrize("fm", [500.0, 1000.0, 2000.0])
def test_st_matches_closed_form_band_limited(fm):
    n = int(1.3 * FS)
    band = next(b for b in all_bands("octave") if b.nominal == fm)
    field, e_early, e_late = tone_field(band, 0.05, n)
    h = 1e-7 * np.random.default_rng(4).standard_normal(n) + field
    h[ONSET] += 1.0
    e_direct = delta_band_energy(fm)
    (row,) = stage_support(h, FS, bands=[band])
    # ST = 10·lg(E_window / E_0–10) (ISO 3382-1:2009, Annex C — from memory), the energies
    # from the closed forms above.
    assert row.values["st_early_db"] == pytest.approx(10 * np.log10(e_early / e_direct), abs=0.1)
    assert row.values["st_late_db"] == pytest.approx(10 * np.log10(e_late / e_direct), abs=0.1)
    # A tone field is one arrival, which the diffuse-field randomness check counts as random
    # (erring on the side of a caution): that is the only flag allowed here.
    for key in ("st_early_db", "st_late_db"):
        assert row.verdicts[key] == OK or row.codes[key] == ["statistical_uncertainty"], key


def test_st_only_in_250_to_2000_octaves_and_averaged_there():
    rate = 32000
    t = np.arange(int(1.5 * rate)) / rate
    h = np.random.default_rng(1).standard_normal(t.size) * 0.02 * 10 ** (-3 * t / 1.0)
    h[:400] = 0.0
    h[400] = 1.0
    rows = stage_support(h, rate)
    given = [r.band_hz for r in rows if r.values["st_early_db"] is not None]
    # Octaves 250 Hz–2 kHz (ISO 3382-1:2009, Annex C — from memory).
    assert given == [250.0, 500.0, 1000.0, 2000.0]
    outside = next(r for r in rows if r.band_hz == 4000.0)
    assert outside.verdicts["st_early_db"] == NOT_EVALUABLE
    assert "st_band_outside" in outside.warning_codes
    sn = stage_single_numbers(rows)
    # The single number is the arithmetic mean of the four octaves (numpy reference).
    mean = np.mean([r.values["st_early_db"] for r in rows if r.band_hz in given])
    assert sn["values"]["st_early_avg_db"] == pytest.approx(mean)


def test_st_late_in_strong_noise_is_flagged_or_null():
    n = int(1.3 * FS)
    rng = np.random.default_rng(7)
    t = np.arange(n) / FS
    h = 0.01 * rng.standard_normal(n) * 10 ** (-3 * t / 0.5)
    h[:ONSET] = 0.0
    h[ONSET] = 1.0
    clean = stage_support(h, FS, bands=[b for b in all_bands() if b.nominal == 1000.0])[0]
    noisy_h = h + 3e-3 * rng.standard_normal(n)  # the floor lies near the late energy
    (noisy,) = stage_support(noisy_h, FS, bands=[b for b in all_bands() if b.nominal == 1000.0])
    noise_codes = {"st_late_db_noise_uncertain", "st_noise_bias", "st_no_energy"}
    assert not noise_codes & set(clean.codes.get("st_late_db", []))
    # The noise either leaves a value whose uncertainty is stated (caution) or none at all.
    assert noisy.verdicts["st_late_db"] in (CAUTION, NOT_EVALUABLE)
    assert noise_codes & set(noisy.codes.get("st_late_db", []))
    if noisy.values["st_late_db"] is not None:
        # Whatever is given is within a few JNDs of the clean value (its caution says so).
        assert abs(noisy.values["st_late_db"] - clean.values["st_late_db"]) < 3.0


def test_st_average_null_with_reason_when_a_band_is_missing():
    rows = stage_support(
        np.r_[np.zeros(100), 1.0, np.zeros(FS)] + 0.0,
        FS,
        bands=[b for b in all_bands() if b.nominal in (500.0, 1000.0)],
    )
    sn = stage_single_numbers(rows)
    assert sn["values"]["st_early_avg_db"] is None
    assert sn["verdicts"]["st_early_avg_db"] == NOT_EVALUABLE
    assert "250 Hz" in sn["reasons"]["st_early_avg_db"]


def test_response_cut_at_its_direct_sound_is_flagged():
    # A direct sound on the first sample leaves no room for what a real arrival spreads
    # ahead of its 20 dB onset point: the windows from time zero are questioned.
    t = np.arange(FS) / FS
    h = 0.02 * np.random.default_rng(3).standard_normal(FS) * 10 ** (-3 * t / 0.8)
    h[0] = 1.0
    (row,) = stage_support(h, FS, bands=[b for b in all_bands() if b.nominal == 1000.0])
    assert "onset_near_start" in row.codes["st_early_db"]
    assert "onset_near_start" in row.codes["st_late_db"]
    (row,) = stage_support(
        np.r_[np.zeros(480), h], FS, bands=[b for b in all_bands() if b.nominal == 1000.0]
    )
    assert "onset_near_start" not in row.warning_codes
