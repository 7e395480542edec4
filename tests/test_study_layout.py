"""A study file says what its response files' channels are ([channels] layout), and the
study analysis and client report then carry the ISO 3382-1 spatial parameters."""

from __future__ import annotations

import json

import numpy as np
import soundfile as sf

from roomconv.jobs.study import init_study, report_study

RATE = 48000


def _binaural_study(tmp_path, layout='"binaural"', extra=""):
    for i in (1, 2):
        t = np.arange(int(1.5 * RATE)) / RATE
        h = np.random.default_rng(i).standard_normal(t.size) * 10 ** (-3 * t / 0.8) * 0.3
        h[: int(0.004 * RATE)] = 0.0
        h[int(0.004 * RATE)] = 1.0
        sf.write(tmp_path / f"S1R{i}.wav", np.stack([h, h], 1), RATE, subtype="FLOAT")
    path = init_study(tmp_path / "study.toml")
    with path.open("a") as f:
        f.write(f"\n[channels]\nlayout = {layout}\n{extra}")
    return path


def test_binaural_study_gives_iacc_in_results_and_report(tmp_path):
    path = _binaural_study(tmp_path)
    res = report_study(
        path, report_dir=tmp_path / "rep", json_path=tmp_path / "r.json", require_pdf=False
    )
    doc = json.loads((tmp_path / "r.json").read_text())
    assert len(doc["positions"]) == 2 and doc["positions"][0]["layout"] == "left,right"
    # Identical ear signals: the normalized interaural cross-correlation is 1 at τ = 0
    # (Cauchy–Schwarz), so IACC = 1 in every octave it is given for (ISO 3382-1, Annex B —
    # from memory: 125 Hz–4 kHz) and 1 − IACC_E3 = 0.
    for p in doc["positions"]:
        given = {b["band_hz"]: b["iacc_full"] for b in p["bands"] if b["iacc_full"] is not None}
        assert set(given) == {125.0, 250.0, 500.0, 1000.0, 2000.0, 4000.0}
        assert all(abs(v - 1.0) < 1e-9 for v in given.values())
    avg = doc["average"]["layout_single_numbers"]
    assert abs(avg["values"]["one_minus_iacc_e3"]) < 1e-9
    page = (tmp_path / "rep" / "report.html").read_text()
    assert "IACC_E3" in page
    assert res.written


def test_bad_layout_and_unknown_key_are_refused_naming_the_key(tmp_path, cli):
    path = _binaural_study(tmp_path, layout='"surround"')
    code, _, err = cli("study", "check", path)
    assert code == 2 and "channels.layout" in err and "binaural" in err
    other = tmp_path / "other"
    other.mkdir()
    path = _binaural_study(other, layout='"binaural"', extra="mics = 2\n")
    code, _, err = cli("study", "check", path)
    assert code == 2 and "channels.mics" in err


def test_wrong_channel_count_for_the_layout_is_refused(tmp_path, cli):
    path = _binaural_study(tmp_path, layout='"omni,fig8"')
    sf.write(tmp_path / "S1R2.wav", np.zeros((RATE, 1)) + 0.0, RATE)  # one channel only
    code, _, err = cli("analyze", "--study", path, "--json", tmp_path / "r.json")
    assert code == 2 and "S1R2.wav" in err and "2 channels" in err
    assert not (tmp_path / "r.json").exists()
