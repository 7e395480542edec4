"""Cases an outside hostile-input audit found accepted or crashing; each now a clear refusal
or a stated note."""

import numpy as np
import soundfile as sf

from roomconv.synth.generate import DEFAULT_LENGTH_CAP_S, synthesize
from roomconv.synth.room import RoomModel


def test_render_refuses_a_response_at_an_absurd_sample_rate(tmp_path, cli):
    sf.write(tmp_path / "dry.wav", 0.1 * np.random.default_rng(0).standard_normal(4800), 48000)
    sf.write(tmp_path / "ir7.wav", np.array([1.0, 0.5, 0.25]), 7)
    code, _, err = cli(
        "render", tmp_path / "dry.wav", "--ir", tmp_path / "ir7.wav", "-o", tmp_path / "w.wav"
    )
    assert code == 2 and "ir7.wav" in err and "7 Hz" in err
    assert len(err.strip().splitlines()) == 1 and not (tmp_path / "w.wav").exists()


def test_a_response_cut_before_its_decay_ends_says_so():
    # A 200 m cube of concrete decays for minutes (Sabine's T = 0.161·V/A, V = 8e6 m³); the
    # default length stops at the cap, and the result's notes say so.
    walls = ("left", "right", "front", "back", "floor", "ceiling")
    res = synthesize(
        RoomModel(200, 200, 200, dict.fromkeys(walls, "concrete")),
        (50, 50, 1.5),
        (60, 55, 1.2),
        rate=16000,
        length_s=None,
    )
    assert res.ir.shape[0] == round(DEFAULT_LENGTH_CAP_S * 16000)
    assert any("cut at" in n for n in res.notes)


def test_synth_at_the_lowest_accepted_rate_works(tmp_path, cli):
    # 8 kHz is the lowest rate the options accept; the 8 kHz octave lies above its Nyquist
    # frequency and once crashed the tail fit ("Wn[0] must be less than Wn[1]", exit 1).
    code, _, err = cli("synth", tmp_path / "s.wav", "--room", "6x5x3", "--rate", 8000)
    assert code == 0, err
    assert sf.info(str(tmp_path / "s.wav")).samplerate == 8000


def test_an_output_planned_as_file_and_folder_is_refused_before_work(tmp_path):
    # extract … --harmonics hh --json hh ran the whole extraction, then blamed "another
    # process"; the one guard now refuses the plan itself.
    import pytest

    from roomconv.audio import WriteGuard
    from roomconv.errors import InputError

    g = WriteGuard()
    g.folder(tmp_path / "hh")
    with pytest.raises(InputError, match="as a folder and as a file"):
        g.file(tmp_path / "hh")
    g2 = WriteGuard()
    g2.file(tmp_path / "x")
    with pytest.raises(InputError, match="as a file and as a folder"):
        g2.folder(tmp_path / "x")
