"""``roomconv analyze``: the JSON contract, CSV/HTML outputs, averaging and refusals."""

import csv
import json

import numpy as np
import pytest
import soundfile as sf

from roomconv.analysis.spatial import decay_time_uncertainty

FS = 48000
LN10 = np.log(10)


def _room(T, seed, channels=1, seconds=2.5):
    rng = np.random.default_rng(seed)
    t = np.arange(int(seconds * FS)) / FS
    env = np.exp(-3 * LN10 * t / T)[:, None]
    return 0.1 * (
        rng.standard_normal((t.size, channels)) * env
        + 1e-4 * rng.standard_normal((t.size, channels))
    )


@pytest.fixture
def irs(tmp_path):
    a, b = tmp_path / "pos1.wav", tmp_path / "pos2.wav"
    sf.write(a, _room(0.8, 1), FS, subtype="FLOAT")
    sf.write(b, _room(0.9, 2, channels=2), FS, subtype="FLOAT")
    return tmp_path, a, b


def test_json_contract_layout(irs, cli):
    tmp, a, b = irs
    code, out, err = cli(
        "analyze", a, b, "--json", tmp / "r.json", "--csv", tmp / "r.csv", "--report", tmp / "rep"
    )
    assert code == 0, err
    doc = json.loads((tmp / "r.json").read_text())
    # Each channel of a multi-channel file is its own position, counted from 1.
    assert [(p["file"], p["channel"]) for p in doc["positions"]] == [
        (str(a), 1),
        (str(b), 1),
        (str(b), 2),
    ]
    keys = {
        "band_hz",
        "edt_s",
        "t20_s",
        "t30_s",
        "c50_db",
        "c80_db",
        "d50",
        "ts_ms",
        "inr_db",
        "xi_permille",
        "xi_range",
        "curvature_pct",
        "verdict",
        "verdicts",
        "warning_codes",
        "warning_codes_by_value",
        "warnings",
    }
    pos = doc["positions"][0]
    assert [r["band_hz"] for r in pos["bands"]] == [31.5, 63, 125, 250, 500, 1000, 2000, 4000, 8000]
    assert all(set(r) == keys for r in pos["bands"])
    assert set(pos["wideband"]) == keys and pos["wideband"]["band_hz"] is None
    avg = {r["band_hz"]: r for r in doc["average"]["bands"]}
    t30 = avg[1000]["t30_s"]
    assert set(t30) >= {"mean", "std", "uncertainty"}
    vals = [p["bands"][5]["t30_s"] for p in doc["positions"]]
    assert t30["mean"] == pytest.approx(np.mean(vals))
    assert t30["std"] == pytest.approx(np.std(vals, ddof=1))
    # ISO 3382-2 A.2 for the impulse-response method (n = 10), N = 3, octave B = 707 Hz.
    assert t30["uncertainty"] == pytest.approx(
        decay_time_uncertainty(t30["mean"], 1000 * (10**0.15 - 10**-0.15), 3, "t30")
    )
    sn = doc["average"]["single_numbers"]
    assert sn["t30_mid_s"] == pytest.approx(
        (avg[500]["t30_s"]["mean"] + avg[1000]["t30_s"]["mean"]) / 2
    )
    assert "roomconv_version" in doc and doc["settings"]["bands"] == "octave"
    rows = list(csv.DictReader((tmp / "r.csv").open()))
    assert rows[0]["file"] == str(a) and rows[0]["band_hz"] == "31.5"
    html = (tmp / "rep" / "report.html").read_text()
    assert html.count("data:image/png;base64,") >= 6
    assert "Reverberation time T30, mean of 500 Hz and 1 kHz" in html
    assert "T30 s" in out


def test_uncertainty_formula_closed_form():
    # ISO 3382-2:2008 A.2: σ(T30) = 0.55·T·sqrt((1 + 1.52/n)/(N·B·T)); hand-evaluated for
    # T = 1 s, B = 100 Hz, N = 4, n = 10: 0.55·sqrt(1.152/400) = 0.029516...
    assert decay_time_uncertainty(1.0, 100.0, 4, "t30") == pytest.approx(0.0295161, rel=1e-5)
    assert decay_time_uncertainty(1.0, 100.0, 4, "t20") == pytest.approx(
        0.88 * np.sqrt(1.19 / 400), rel=1e-9
    )


def test_third_octave_bands(irs, cli):
    tmp, a, _ = irs
    code, _, err = cli("analyze", a, "--bands", "third", "--json", tmp / "t.json")
    assert code == 0, err
    doc = json.loads((tmp / "t.json").read_text())
    bands = [r["band_hz"] for r in doc["positions"][0]["bands"]]
    assert bands[0] == 25 and 12500 in bands and 20000 not in bands
    assert any("20k Hz band skipped" in n for n in doc["notes"])


def test_a_single_calibration_number_gives_wideband_strength_only(irs, cli):
    tmp, a, _ = irs
    code, _, err = cli("analyze", a, "--calibration", "-10", "--json", tmp / "g.json")
    assert code == 0, err
    pos = json.loads((tmp / "g.json").read_text())["positions"][0]
    wide = pos["wideband"]
    data, _ = sf.read(a)
    onset = int(np.flatnonzero(data**2 >= (data**2).max() * 0.01)[0])
    # G = 10·lg(∫p² dt) − L_ref (ISO 3382-1, A.2.2 — from memory), ∫p² dt = Σp²/fs; the
    # noise floor is 58 dB under the start and the tail past it is modelled, so the plain
    # sum from the onset is within 0.2 dB.
    assert wide["g_db"] == pytest.approx(
        10 * np.log10(np.sum(data[onset:] ** 2) / FS) + 10, abs=0.2
    )
    # One broadband number cannot calibrate the bands: G there is null with the reason.
    band = pos["bands"][5]
    assert band["g_db"] is None and band["verdicts"]["g_db"] == "not evaluable"
    assert "g_no_reference" in band["warning_codes"]


def test_bad_files_are_reported_and_the_rest_analysed(irs, cli):
    tmp, a, _ = irs
    silent = tmp / "silent.wav"
    sf.write(silent, np.zeros(FS), FS)
    nan = tmp / "nan.wav"
    x = _room(0.5, 3)
    x[50] = np.nan
    sf.write(nan, x, FS, subtype="FLOAT")
    code, out, err = cli("analyze", a, silent, nan, "--json", tmp / "p.json")
    assert code == 2  # something failed, and we say so
    doc = json.loads((tmp / "p.json").read_text())
    assert len(doc["positions"]) == 1
    assert any("silent" in e for e in doc["errors"]) and any("NaN" in e for e in doc["errors"])
    code, _, err = cli("analyze", silent)
    assert code == 2 and "silent" in err and "Traceback" not in err


def test_existing_outputs_need_force(irs, cli):
    tmp, a, _ = irs
    (tmp / "r.json").write_text("{}")
    code, _, err = cli("analyze", a, "--json", tmp / "r.json")
    assert code == 2 and "--force" in err
    assert (tmp / "r.json").read_text() == "{}"
