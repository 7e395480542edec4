"""``roomconv analyze --sti``: the JSON entries, the noise options and their refusals."""

import json

import numpy as np
import pytest
import soundfile as sf

from roomconv.analysis import sti as S

FS = 48000


def _decay(T, seed, seconds=2.0, floor=1e-4):
    rng = np.random.default_rng(seed)
    t = np.arange(int(seconds * FS)) / FS
    h = 0.3 * rng.standard_normal(t.size) * 10 ** (-3 * t / T) + floor * rng.standard_normal(t.size)
    return np.concatenate([np.zeros(50), h])


def _closed_form(T, noise_db=None):
    # Houtgast et al. (1980): m(F) = 1/√(1+(2πFT/13.8155)²) in every band.
    m = np.tile(1 / np.sqrt(1 + (2 * np.pi * np.array(S.MODULATION_HZ) * T / 13.8155) ** 2), (7, 1))
    return S.speech_transmission_index(m, noise_db=noise_db).value


@pytest.fixture
def irs(tmp_path):
    a, b = tmp_path / "a.wav", tmp_path / "b.wav"
    sf.write(a, _decay(0.6, 1), FS, subtype="FLOAT")
    sf.write(b, _decay(0.6, 2), FS, subtype="FLOAT")
    return tmp_path, a, b


def test_sti_per_position_and_average_in_json(irs, cli):
    tmp, a, b = irs
    noise = [30.0, 28, 26, 24, 22, 20, 18]
    code, out, err = cli(
        "analyze", a, b, "--sti", "--noise", ",".join(f"{x:g}" for x in noise),
        "--json", tmp / "r.json",
    )  # fmt: skip
    assert code == 0, err
    doc = json.loads((tmp / "r.json").read_text())
    expected = _closed_form(0.6, noise)
    for p in doc["positions"]:
        s = p["sti"]
        assert set(s) >= {"value", "mti", "band", "method", "warnings"}
        assert len(s["mti"]) == 7
        # Within one JND (0.03, Galbrun & Kitapci 2014) of the closed form for T = 0.6 s.
        assert s["value"] == pytest.approx(expected, abs=S.JND)
        assert s["band"] == S.qualification_band(s["value"])
        assert "IEC 60268-16:2011" in s["method"]
    avg = doc["average"]["sti"]
    vals = [p["sti"]["value"] for p in doc["positions"]]
    assert avg["value"] == pytest.approx(np.mean(vals), abs=1e-4) and avg["n"] == 2
    assert doc["settings"]["sti"]["noise_octaves_db"] == noise
    assert any("licensed professional" in c for c in doc["cautions"])
    assert any("direct STIPA measurement" in c for c in doc["cautions"])
    assert "licensed professional" in out and "STI:" in out


def test_noise_file_levels_follow_the_calibration(tmp_path, cli, irs):
    _, a, _ = irs
    # A full-scale 1 kHz sine with a calibration of 94 dB SPL is 94 dB in the 1 kHz octave
    # (AES17: a full-scale sine is 0 dBFS) and far lower elsewhere.
    t = np.arange(2 * FS) / FS
    sf.write(tmp_path / "n.wav", np.sin(2 * np.pi * 1000 * t), FS, subtype="FLOAT")
    code, _, err = cli(
        "analyze", a, "--sti", "--noise-file", tmp_path / "n.wav", "--noise-calibration", 94,
        "--json", tmp_path / "n.json", "--quiet",
    )  # fmt: skip
    assert code == 0, err
    st = json.loads((tmp_path / "n.json").read_text())["settings"]["sti"]
    assert st["noise_octaves_db"][3] == pytest.approx(94.0, abs=0.1)
    assert max(st["noise_octaves_db"][:2] + st["noise_octaves_db"][5:]) < 60


def test_low_inr_gives_null_with_reason(tmp_path, cli):
    sf.write(tmp_path / "n.wav", _decay(1.0, 3, floor=0.03), FS, subtype="FLOAT")
    code, out, err = cli("analyze", tmp_path / "n.wav", "--sti", "--json", tmp_path / "r.json")
    assert code == 0, err
    doc = json.loads((tmp_path / "r.json").read_text())
    s = doc["positions"][0]["sti"]
    assert s["value"] is None and "INR too low" in s["reason"]
    assert doc["average"]["sti"]["value"] is None
    assert "not evaluable" in out


@pytest.mark.parametrize(
    ("args", "option"),
    [
        (["--sti", "--noise", "30,30,30"], "--noise"),
        (["--sti", "--noise", "30,a,30,30,30,30,30"], "--noise"),
        (["--speech-level", "70"], "--speech-level"),
        (["--sti", "--speech-level", "400"], "--speech-level"),
        (["--sti", "--noise-file", "missing.wav", "--noise-calibration", "94"], "missing.wav"),
        (["--sti", "--noise-file", "x.wav"], "calibration"),
        (["--sti", "--noise-calibration", "94"], "--noise-calibration"),
    ],
)
def test_refusals_name_the_option(irs, cli, args, option):
    tmp, a, _ = irs
    code, _, err = cli("analyze", a, *args, "--json", tmp / "bad.json")
    assert code == 2
    assert option in err and "Traceback" not in err
    assert not (tmp / "bad.json").exists()


def test_report_has_the_speech_section(irs, cli):
    tmp, a, b = irs
    code, _, err = cli("analyze", a, b, "--sti", "--report", tmp / "rep", "--quiet")
    assert code == 0, err
    page = (tmp / "rep" / "report.html").read_text()
    assert "Speech intelligibility (STI)" in page
    assert "licensed professional" in page and "MTI 8k" in page


def test_study_with_sti(irs, cli):
    tmp, a, b = irs
    (tmp / "s.toml").write_text(
        '[study]\ntitle = "Meeting room"\n[room]\nname = "Room 2"\n'
        '[[sources]]\nid = "S1"\n[[receivers]]\nid = "R1"\n[[receivers]]\nid = "R2"\n'
        '[[responses]]\nsource = "S1"\nreceiver = "R1"\nfile = "a.wav"\n'
        '[[responses]]\nsource = "S1"\nreceiver = "R2"\nfile = "b.wav"\n'
    )
    code, out, err = cli("analyze", "--study", tmp / "s.toml", "--sti", "--json", tmp / "s.json")
    assert code == 0, err
    doc = json.loads((tmp / "s.json").read_text())
    assert [p["position"] for p in doc["positions"]] == ["S1-R1", "S1-R2"]
    # Closed form for T = 0.6 s within one JND (Houtgast et al. 1980; Galbrun & Kitapci 2014).
    assert doc["average"]["sti"]["value"] == pytest.approx(_closed_form(0.6), abs=S.JND)
    assert "STI:" in out


def test_noise_recording_is_never_overwritten(irs, cli):
    tmp, a, _ = irs
    t = np.arange(FS) / FS
    noise = tmp / "n.wav"
    sf.write(noise, 0.1 * np.sin(2 * np.pi * 500 * t), FS, subtype="FLOAT")
    before = noise.read_bytes()
    code, _, err = cli(
        "analyze", a, "--sti", "--noise-file", noise, "--noise-calibration", 94,
        "--json", noise, "--force",
    )  # fmt: skip
    assert code == 2 and "n.wav" in err
    assert noise.read_bytes() == before
