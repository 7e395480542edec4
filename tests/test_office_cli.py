"""``roomconv office``: a constructed office line whose speech level follows a known law."""

import json

import numpy as np
import pytest
import soundfile as sf

FS = 32000
DISTANCES = (2.0, 3.0, 4.0, 6.0, 8.0, 12.0, 16.0)
L4, D2S = 48.0, 7.0


def law(r):
    # The level law ISO 3382-3's regression assumes: L(r) = L4 − D2,S·log2(r/4).
    return L4 - D2S * np.log2(r / 4.0)


def _write_study(folder, distances=DISTANCES, office=None, with_distance=True):
    rng = np.random.default_rng(0)
    # Free-field reference: one impulse of 0.5 at 2 m (flat spectrum).
    ff = np.zeros(FS // 2)
    ff[200] = 0.5
    sf.write(folder / "ff.wav", ff, FS, subtype="FLOAT")
    t = np.arange(int(0.9 * FS)) / FS
    e_10m = (0.5 * 2 / 10) ** 2 / FS  # inverse-square law from 2 m to 10 m
    lines, receivers = [], []
    for i, r in enumerate(distances):
        # A flat-spectrum decay whose strength G puts normal speech (57.4 dB(A) at 1 m,
        # ISO 3382-3, from memory) at law(r): G = L − 57.4 + 20 (G is re 10 m).
        g = law(r) - 57.4 + 20
        h = np.concatenate([np.zeros(100), rng.standard_normal(t.size) * 10 ** (-3 * t / 0.5)])
        h *= np.sqrt(e_10m * 10 ** (g / 10) / (np.sum(h**2) / FS))
        sf.write(folder / f"p{i}.wav", h, FS, subtype="FLOAT")
        receivers.append(f'[[receivers]]\nid = "R{i}"\nxy_m = [{r}, 0.0]\n')
        dist = f"distance_m = {r}\n" if with_distance else ""
        lines.append(f'[[responses]]\nsource = "S1"\nreceiver = "R{i}"\nfile = "p{i}.wav"\n{dist}')
    if office is None:
        office = (
            '[office]\ncalibration = "cal.json"\n'
            "background_noise_db = [40.0, 38.0, 36.0, 34.0, 31.0, 27.0, 22.0]\n"
        )
    (folder / "study.toml").write_text(
        '[study]\ntitle = "Office line"\n[room]\nname = "Open office"\n'
        '[[sources]]\nid = "S1"\nxy_m = [0.0, 0.0]\n' + "".join(receivers) + "".join(lines) + office
    )
    return folder / "study.toml"


@pytest.fixture
def line(tmp_path, cli):
    study = _write_study(tmp_path)
    code, _, err = cli(
        "calibrate", tmp_path / "ff.wav", "--distance", 2, "-o", tmp_path / "cal.json"
    )
    assert code == 0, err
    return tmp_path, study


def test_office_line_recovers_the_level_law(line, cli):
    tmp, study = line
    code, out, err = cli("office", study, "--json", tmp / "o.json", "--report", tmp / "rep")
    assert code == 0, err
    doc = json.loads((tmp / "o.json").read_text())
    o = doc["office"]
    # The regression over 2–16 m returns the law's D2,S and L4 (closed form), within the
    # random band energies of one noise decay per position.
    assert o["d2s_db"] == pytest.approx(D2S, abs=0.5)
    assert o["lp_a_s_4m_db"] == pytest.approx(L4, abs=0.5)
    # rC = 4·2^((L4 − 45)/D2,S) (ISO 3382-3:2022) from the fitted numbers.
    assert o["r_c_m"] == pytest.approx(4 * 2 ** ((o["lp_a_s_4m_db"] - 45) / o["d2s_db"]), abs=0.02)
    assert o["r_d_m"] is not None and o["r_p_m"] > o["r_d_m"]
    stis = [p["sti"]["value"] for p in doc["positions"]]
    assert all(a > b for a, b in zip(stis, stis[1:], strict=False))  # quieter → lower STI
    for p, r in zip(doc["positions"], DISTANCES, strict=True):
        assert p["distance_m"] == r
        assert p["speech_level_a_db"] == pytest.approx(law(r), abs=1.0)
    assert any("licensed professional" in c for c in doc["cautions"])
    assert "licensed professional" in out and "D2,S" in out
    page = (tmp / "rep" / "office.html").read_text()
    assert "distraction distance" in page and "data:image/png;base64," in page
    # No output is replaced without --force.
    code, _, err = cli("office", study, "--json", tmp / "o.json")
    assert code == 2 and "o.json" in err


def test_plan_distance_from_coordinates(tmp_path, cli):
    study = _write_study(tmp_path, with_distance=False)
    cli("calibrate", tmp_path / "ff.wav", "--distance", 2, "-o", tmp_path / "cal.json")
    code, _, err = cli("office", study, "--json", tmp_path / "o.json", "--quiet")
    assert code == 0, err
    doc = json.loads((tmp_path / "o.json").read_text())
    assert [p["distance_m"] for p in doc["positions"]] == list(DISTANCES)


def test_too_few_positions_give_null_with_reason(tmp_path, cli):
    study = _write_study(tmp_path, distances=(1.0, 3.0, 6.0, 10.0))
    cli("calibrate", tmp_path / "ff.wav", "--distance", 2, "-o", tmp_path / "cal.json")
    code, out, err = cli("office", study, "--json", tmp_path / "o.json")
    assert code == 0, err
    o = json.loads((tmp_path / "o.json").read_text())["office"]
    assert o["d2s_db"] is None and o["r_d_m"] is None
    assert "at least 4" in o["reasons"]["d2s_db"]
    assert "not evaluable" in out


@pytest.mark.parametrize(
    ("office", "key"),
    [
        ("", "office.calibration"),
        ('[office]\ncalibration = "cal.json"\nbackground_noise_db = [40, 30]\n',
         "office.background_noise_db"),
        ('[office]\ncalibration = "cal.json"\nnoise = 3\n', "office.noise"),
    ],
)  # fmt: skip
def test_bad_office_tables_are_refused_naming_the_key(tmp_path, cli, office, key):
    study = _write_study(tmp_path, office=office)
    code, _, err = cli("office", study)
    assert code == 2 and key in err and "Traceback" not in err


def test_missing_distance_is_refused(tmp_path, cli):
    study = _write_study(tmp_path, with_distance=False)
    text = study.read_text().replace("xy_m = [0.0, 0.0]\n", "")
    study.write_text(text)
    code, _, err = cli("office", study)
    assert code == 2 and "distance_m" in err


def test_study_report_carries_the_office_line(line, cli):
    tmp, study = line
    code, _, err = cli("office", study, "--json", tmp / "o.json", "--quiet")
    assert code == 0, err
    code, _, err = cli(
        "analyze", "--study", study, "--json", tmp / "r.json", "--report", tmp / "rep", "--quiet"
    )
    assert code == 0, err
    doc = json.loads((tmp / "r.json").read_text())
    # The same evaluation as the office command's (one computation, two front ends).
    assert doc["office"]["office"] == json.loads((tmp / "o.json").read_text())["office"]
    page = (tmp / "rep" / "report.html").read_text()
    assert "Open-plan office" in page and "distraction distance" in page
