"""Cases an outside hostile-input audit found accepted or crashing; each now a clear refusal
or a stated note."""

import numpy as np
import pytest
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


@pytest.mark.parametrize(
    "args, text",
    [
        (["edit", "IR", "-o", "OUT", "--decay-scale", ""], "no edit"),
        (["edit", "IR", "-o", "OUT", "--decay-scale", "1000:2,1000:3"], "given twice"),
        (["synth", "OUT", "--room", "6x5x3", "--rt60", ""], "empty"),
        (["synth", "OUT", "--room", "6x5x3", "--materials", ""], "empty"),
        (["render", "DRY", "--ir", "IR", "-o", "OUT", "--predelay", "600000"], "pre-delay"),
        (["demo", "--out", "IR", "--quick"], "not a folder"),
    ],
)
def test_audit_refusals_are_one_line_exit_2(tmp_path, cli, args, text):
    rng = np.random.default_rng(1)
    t = np.arange(24000) / 48000
    sf.write(tmp_path / "ir.wav", rng.standard_normal(t.size) * 10 ** (-3 * t / 0.3), 48000)
    sf.write(tmp_path / "dry.wav", 0.1 * rng.standard_normal(48000), 48000)
    names = {"IR": tmp_path / "ir.wav", "DRY": tmp_path / "dry.wav", "OUT": tmp_path / "o.wav"}
    before = sorted(p.name for p in tmp_path.iterdir())
    code, _, err = cli(*[names.get(a, a) for a in args])
    assert code == 2, err
    assert text in err and len(err.strip().splitlines()) == 1 and "Traceback" not in err
    assert sorted(p.name for p in tmp_path.iterdir()) == before


def test_a_batch_with_no_usable_input_is_one_refusal(tmp_path, cli):
    import os

    os.mkfifo(tmp_path / "dry.wav")  # a pipe: refused before it is opened (it would block)
    sf.write(tmp_path / "ir.wav", np.array([1.0, 0.5]), 48000)
    code, _, err = cli(
        "batch", tmp_path / "dry.wav", "--ir", tmp_path / "ir.wav", "--out-dir", tmp_path / "out"
    )
    assert code == 2 and len(err.strip().splitlines()) == 1, err
    assert not (tmp_path / "out").exists()


def test_stretching_a_decay_does_not_raise_its_noise_floor(tmp_path, cli):
    # Outside audit: --decay-scale 2 on T = 1 s with noise 80 dB down raised the noise floor
    # past the direct sound (peak 0.5 → 1.5). The stretched decay stops at the noise it was
    # measured in and goes on from there at the new rate.
    rng = np.random.default_rng(4)
    rate = 16000
    t = np.arange(4 * rate) / rate
    h = rng.standard_normal(t.size) * 10 ** (-3 * t / 1.0)
    h = 0.5 * h / np.max(np.abs(h)) + 0.5 * 10 ** (-80 / 20) * rng.standard_normal(t.size)
    sf.write(tmp_path / "ir.wav", h, rate, subtype="FLOAT")
    code, _, err = cli("edit", tmp_path / "ir.wav", "-o", tmp_path / "e.wav", "--decay-scale", 2)
    assert code == 0, err
    y, _ = sf.read(tmp_path / "e.wav")
    # A longer decay holds more energy in its first milliseconds, so the peak may rise a
    # little (here +0.9 dB); the noise floor must not: the last second is below the input's.
    assert np.max(np.abs(y)) <= 1.25 * np.max(np.abs(h))
    assert np.sqrt(np.mean(y[-rate:] ** 2)) < np.sqrt(np.mean(h[-rate:] ** 2))
    # ... and the stretched response is still an impulse response the analysis reads.
    code, _, err = cli("analyze", tmp_path / "e.wav", "--json", tmp_path / "e.json")
    assert code == 0, err
