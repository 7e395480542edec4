"""The speech-condition job: levels, noise as numbers or a calibrated recording, refusals."""

import numpy as np
import pytest
import soundfile as sf

from roomconv.analysis.sti import a_weighted_level
from roomconv.errors import InputError
from roomconv.jobs.speech import noise_from_file, parse_octave_levels, speech_conditions


def test_speech_level_sets_the_male_spectrum():
    c = speech_conditions(speech_level_dba=65.0, noise_db=[30.0] * 7)
    # The male spectrum relative to the A-weighted level sums to +0.05 dB with the
    # IEC 61672-1 octave A-weights (IEC 60268-16:2011 Table A.2, from memory).
    assert a_weighted_level(c.speech_db) == pytest.approx(65.05, abs=0.02)
    assert c.noise_db == (30.0,) * 7 and c.source_files == ()


def test_pink_noise_recording_levels(tmp_path):
    # Pink noise has equal energy per octave (closed form): its octave levels agree within
    # the filters' edge losses and the noise's randomness, ±1 dB.
    rate = 48000
    rng = np.random.default_rng(3)
    n = 8 * rate
    spec = np.fft.rfft(rng.standard_normal(n))
    f = np.fft.rfftfreq(n, 1 / rate)
    spec[1:] /= np.sqrt(f[1:])
    spec[0] = 0
    x = np.fft.irfft(spec, n)
    x *= 0.1 / np.sqrt(np.mean(x**2))
    sf.write(tmp_path / "pink.wav", x, rate, subtype="FLOAT")
    levels = np.array(noise_from_file(tmp_path / "pink.wav", 100.0))
    assert np.ptp(levels) < 2.0
    c = speech_conditions(noise_file=tmp_path / "pink.wav", noise_calibration_db=100.0)
    assert c.source_files == (str(tmp_path / "pink.wav"),)


@pytest.mark.parametrize(
    ("kwargs", "text"),
    [
        ({"noise_db": [30.0] * 7, "noise_file": "x.wav", "noise_calibration_db": 94.0}, "not both"),
        ({"noise_file": "x.wav"}, "calibration"),
        ({"noise_calibration_db": 94.0}, "without a noise recording"),
        ({"speech_level_dba": 5.0}, "speech level"),
        ({"noise_db": [30.0] * 6}, "seven octave levels"),
    ],
)
def test_refusals(kwargs, text):
    with pytest.raises(InputError, match=text):
        speech_conditions(**kwargs)


def test_parse_octave_levels():
    assert parse_octave_levels("45, 40,35,30,27,25,22") == (45, 40, 35, 30, 27, 25, 22)
    for bad in ("1,2,3", "a,b,c,d,e,f,g", "1,2,3,4,5,6,inf"):
        with pytest.raises(InputError):
            parse_octave_levels(bad)
