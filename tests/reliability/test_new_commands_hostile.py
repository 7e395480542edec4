"""Hostile inputs to the newest commands (office, analyze's spatial layouts, render's SOFA
measurement, the workbench's study file): each once failed internally, accepted a
meaningless input or echoed it unreadably; each is now a one-line exit-2 refusal naming the
file or option, with nothing written."""

from __future__ import annotations

import numpy as np
import soundfile as sf

RATE = 32000


def _decay(seed: int = 0, seconds: float = 0.5) -> np.ndarray:
    # A toy exponential decay of our own (60 dB in 0.5 s), with a direct sound at sample 50.
    rng = np.random.default_rng(seed)
    t = np.arange(int(seconds * RATE)) / RATE
    h = 0.1 * rng.standard_normal(t.size) * 10 ** (-3 * t / 0.5)
    h[50] = 1.0
    return h


def _one_line(err: str) -> bool:
    return len(err.strip().splitlines()) == 1


def _office_study(folder, first_file: str) -> None:
    # A two-position line whose strength reference comes from a free-field pulse at 2 m.
    ff = np.zeros(RATE // 2)
    ff[200] = 0.5
    sf.write(folder / "ff.wav", ff, RATE, subtype="FLOAT")
    sf.write(folder / "p2.wav", _decay(2), RATE, subtype="FLOAT")
    (folder / "study.toml").write_text(
        '[study]\ntitle = "Hostile line"\n[room]\nname = "Test office"\n'
        '[[sources]]\nid = "S1"\n[[receivers]]\nid = "R1"\n[[receivers]]\nid = "R2"\n'
        f'[[responses]]\nsource = "S1"\nreceiver = "R1"\nfile = "{first_file}"\n'
        "distance_m = 2.0\n"
        '[[responses]]\nsource = "S1"\nreceiver = "R2"\nfile = "p2.wav"\ndistance_m = 4.0\n'
        '[office]\ncalibration = "cal.json"\n'
    )


def test_office_refuses_a_silent_response_by_file(tmp_path, cli):
    # An all-zero response has no onset (ISO 3382-1 A.3.2 measures time from the direct
    # sound); it was an internal error (exit 1) in the office line and in analyze --study.
    sf.write(tmp_path / "quiet.wav", np.zeros(RATE // 2), RATE, subtype="FLOAT")
    _office_study(tmp_path, "quiet.wav")
    code, _, err = cli(
        "calibrate", tmp_path / "ff.wav", "--distance", 2, "-o", tmp_path / "cal.json"
    )
    assert code == 0, err
    code, _, err = cli("office", tmp_path / "study.toml", "--json", tmp_path / "o.json")
    assert code == 2 and _one_line(err), err
    assert "quiet.wav" in err and "silent" in err and "internal error" not in err
    assert not (tmp_path / "o.json").exists()


def test_a_silent_figure_of_eight_is_refused_not_read_as_no_lateral_sound(tmp_path, cli):
    # J_LF = E_fig8(5–80 ms) / E_omni(0–80 ms) (ISO 3382-1:2009, A.3.3) is 0 for an all-zero
    # channel: a channel left unrecorded, not a room without lateral sound.
    h = _decay()
    sf.write(tmp_path / "pair.wav", np.stack([h, np.zeros_like(h)], 1), RATE, subtype="FLOAT")
    code, _, err = cli(
        "analyze", tmp_path / "pair.wav", "--channels", "omni,fig8", "--json", tmp_path / "a.json"
    )
    assert code == 2 and _one_line(err), err
    assert "pair.wav" in err and "figure-of-eight" in err
    assert not (tmp_path / "a.json").exists()


def test_silent_horizontal_ambisonic_channels_are_refused(tmp_path, cli):
    # The lateral pattern of a first-order ambisonic response comes from Y and X (ACN order
    # W, Y, Z, X; AmbiX convention, from memory): with both all zero there is none.
    h = _decay()
    z = np.zeros_like(h)
    sf.write(tmp_path / "foa.wav", np.stack([h, z, 0.3 * h, z], 1), RATE, subtype="FLOAT")
    code, _, err = cli("analyze", tmp_path / "foa.wav", "--channels", "acn-sn3d")
    assert code == 2 and _one_line(err), err
    assert "foa.wav" in err and "Y and X" in err


def test_a_huge_measurement_number_is_echoed_as_typed(tmp_path, cli):
    # "1e300" was echoed as its 301 integer digits; the refusal now names it as given.
    sf.write(tmp_path / "dry.wav", 0.1 * np.random.default_rng(0).standard_normal(RATE), RATE)
    sf.write(tmp_path / "ir.wav", _decay(), RATE, subtype="FLOAT")
    code, _, err = cli(
        "render", tmp_path / "dry.wav", "--ir", tmp_path / "ir.wav",
        "--measurement", "1e300", "-o", tmp_path / "w.wav",
    )  # fmt: skip
    assert code == 2 and _one_line(err), err
    assert "--measurement" in err and "1e+300" in err and len(err) < 300
    assert not (tmp_path / "w.wav").exists()


def test_the_workbench_names_a_malformed_study_file(tmp_path, capsys):
    # Without a terminal the workbench used to blame the terminal only; the bad file is now
    # named first (and in a terminal it is no longer opened as an empty session).
    from tui.app import main as tui_main

    bad = tmp_path / "bad.toml"
    bad.write_text(
        '[study]\ntitle = "x"\n[room]\nname = "y"\n[[sources]]\nid = "S1"\n'
        '[[receivers]]\nid = "R1"\n'
        '[[responses]]\nsource = "S1"\nreceiver = "R1"\nfile = "r.wav"\n'
        '[channels]\nlayout = "sideways"\n'
    )
    code = tui_main([str(bad)])
    err = capsys.readouterr().err
    assert code == 2 and _one_line(err), err
    assert "bad.toml" in err and "channels.layout" in err and "terminal" not in err


def test_a_materials_file_with_other_bands_or_unknown_fields_is_refused(tmp_path, cli):
    # Absorption coefficients are tabulated per octave band 125 Hz–4 kHz (ISO 354 reports
    # them so, from memory); a file listing other bands was read as if in ours, unchecked.
    import json

    other = tmp_path / "other.json"
    other.write_text(
        json.dumps(
            {"felt": {"alpha": [0.1, 0.2, 0.3, 0.4, 0.5, 0.6, 0.7, 0.8],
                      "bands_hz": [125, 250, 500, 1000, 2000, 4000, 8000, 16000]}}
        )
    )  # fmt: skip
    code, _, err = cli("materials", "--materials-file", other, "--json", tmp_path / "m.json")
    assert code == 2 and _one_line(err), err
    assert "other.json" in err and "bands_hz" in err and not (tmp_path / "m.json").exists()
    typo = tmp_path / "typo.json"
    typo.write_text(json.dumps({"felt": {"alpha": [0.1] * 6, "sorce": "lab"}}))
    code, _, err = cli("materials", "--materials-file", typo)
    assert code == 2 and _one_line(err) and "typo.json" in err and "sorce" in err, err
    blank = tmp_path / "blank.json"
    blank.write_text(json.dumps({"": {"alpha": [0.1] * 6}}))
    code, _, err = cli("materials", "--materials-file", blank)
    assert code == 2 and _one_line(err) and "blank.json" in err, err


def test_the_materials_listing_reads_back_as_a_materials_file(tmp_path, cli):
    # What 'materials --json' writes (with its bands_hz and notes) stays a valid input.
    code, _, err = cli("materials", "--json", tmp_path / "all.json")
    assert code == 0, err
    code, _, err = cli("materials", "--materials-file", tmp_path / "all.json")
    assert code == 0, err


def _plan_study(folder, source_xy: str) -> None:
    sf.write(folder / "p.wav", _decay(), RATE, subtype="FLOAT")
    (folder / "plan.toml").write_text(
        '[study]\ntitle = "Plan distances"\n[room]\nname = "Test office"\n'
        f'[[sources]]\nid = "S1"\nxy_m = {source_xy}\n'
        '[[receivers]]\nid = "R1"\nxy_m = [2.0, 0.0]\n'
        '[[responses]]\nsource = "S1"\nreceiver = "R1"\nfile = "p.wav"\n'
        '[office]\ncalibration = "cal.json"\n'
    )


def test_plan_positions_must_be_finite_and_give_a_usable_distance(tmp_path, cli):
    # The distance from plan positions is the Euclidean distance (closed form); a NaN
    # coordinate was blamed on "one plan position", and 1e300 m or 10 µm were accepted or
    # refused without naming the file.
    cases = {"[nan, 0.0]": "xy_m", "[1e300, 0.0]": "1e+300 m", "[1.99999, 0.0]": "1e-05 m"}
    for xy, shown in cases.items():
        _plan_study(tmp_path, xy)
        code, _, err = cli("office", tmp_path / "plan.toml", "--json", tmp_path / "o.json")
        assert code == 2 and _one_line(err), (xy, err)
        assert "plan.toml" in err and shown in err, (xy, err)
        assert not (tmp_path / "o.json").exists()


def test_a_folder_given_as_the_study_file_is_called_a_folder(tmp_path, cli):
    # It was reported as "not found", which sends the user looking for a missing path.
    (tmp_path / "rooms").mkdir()
    code, _, err = cli("office", tmp_path / "rooms", "--json", tmp_path / "o.json")
    assert code == 2 and _one_line(err) and "rooms" in err and "folder" in err, err
    assert not (tmp_path / "o.json").exists()
