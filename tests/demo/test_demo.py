"""The demo at reduced size: numbers against the synthetic hall's own prediction, every
quality verdict and every output file."""

import json

import numpy as np
import pytest
import soundfile as sf

from roomconv.demo import QUICK, quillmere_hall
from roomconv.synth.room import eyring


@pytest.fixture(scope="module")
def demo(tmp_path_factory):
    from roomconv.cli import main

    out = tmp_path_factory.mktemp("demo") / "out"
    assert main(["demo", "--out", str(out), "--quick", "--quiet"]) == 0
    return out


def test_measured_t30_follows_the_prediction(demo):
    # The comparison: the T30 averaged over the measured positions (ISO 3382-1 backward
    # integration on IEC 61260-1 octave filters, read through the simulated sweep chain)
    # against Eyring's formula for the hall (Eyring 1930), per octave band. It is fair
    # because the synthetic hall's tail is made to decay at exactly that prediction as an
    # octave filter reads it, so what is left to differ is the measuring chain (sweep,
    # distortion, noise, deconvolution) and the randomness of two positions. 10 % in every
    # band: twice the ISO 3382-1 JND of 5 % (Annex A, from memory), for two positions only.
    doc = json.loads((demo / "results.json").read_text())
    pred = eyring(quillmere_hall())
    avg = {r["band_hz"]: r["t30_s"]["mean"] for r in doc["average"]["bands"]}
    for band in (63, 125, 250, 500, 1000, 2000, 4000, 8000):
        assert avg[band] == pytest.approx(pred[band], rel=0.10), band
    assert len(doc["measured_vs_predicted"]) == 8
    for row in doc["measured_vs_predicted"]:
        assert abs(row["deviation_pct"]) < 10, row


def test_every_position_has_a_quality_verdict(demo):
    doc = json.loads((demo / "results.json").read_text())
    names = {f"S1R{i + 1}" for i in range(len(QUICK.receivers))}
    assert set(doc["quality"]) == names
    for v in doc["quality"].values():
        assert v["verdict"].startswith("pass") and v["latency_samples"] == 384


def test_every_output_is_present_readable_and_has_provenance(demo):
    audio = (
        list((demo / "irs").glob("*.wav"))
        + list((demo / "harmonics").glob("*.wav"))
        + list((demo / "renders").glob("*.wav"))
    )
    assert len(list((demo / "harmonics").glob("*.wav"))) == 4
    assert {p.name for p in (demo / "renders").glob("*.wav")} == {
        "plucks__measured.wav",
        "plucks__predicted.wav",
    }
    for p in audio:
        x, rate = sf.read(p)
        assert rate == 48000 and x.size and np.all(np.isfinite(x))
        assert p.with_name(f"{p.stem}.provenance.json").exists(), p
    for name in ("results.json", "results.csv", "report.html"):
        assert (demo / name).stat().st_size > 0
        assert (demo / f"{name.split('.')[0]}.provenance.json").exists(), name
    page = (demo / "report.html").read_text()
    for heading in (
        "The room",
        "Measurement chain",
        "Data quality",
        "Measured against",
        "Cautions",
    ):
        assert heading in page
    prov = json.loads((demo / "renders" / "plucks__measured.provenance.json").read_text())
    assert len(prov["inputs"][0]["sha256"]) == 64


def test_demo_refuses_a_non_empty_folder_without_force(tmp_path, cli):
    (tmp_path / "keep.txt").write_text("mine")
    code, _, err = cli("demo", "--out", tmp_path, "--quick")
    assert code == 2 and "--force" in err
    assert (tmp_path / "keep.txt").read_text() == "mine"


def test_demo_writes_the_study_report_as_html_and_pdf(demo):
    # The demo's study file loads and names every position; the report comes as both files.
    from roomconv.study import load_study

    study = load_study(demo / "study.toml")
    assert len(study.responses) == len(QUICK.sources) * len(QUICK.receivers)
    # ISO 32000-1:2008, 7.5.2 (from memory): a PDF file begins with "%PDF-".
    assert (demo / "report" / "report.pdf").read_bytes().startswith(b"%PDF-")
    page = (demo / "report" / "report.html").read_text()
    assert "Quillmere Hall" in page and "Measurement grade (ISO 3382-2)" in page
    # 1 source × 2 receivers: survey grade (ISO 3382-2:2008, Table 1, from memory).
    assert "<p class='grade'>Survey</p>" in page
    # The data-quality section carries the loudspeaker's harmonic levels per position: the
    # simulated chain's 2nd harmonic as a level, its (absent) 4th and 5th as noise bounds.
    import re

    rows = re.findall(r"<tr><td>(S1-R\d)</td>((?:<td>[^<]*</td>){5})</tr>", page)
    assert len(rows) == len(QUICK.receivers)
    for _, cells in rows:
        h2, _h3, h4, h5, _total = re.findall(r"<td>([^<]*)</td>", cells)
        assert float(h2) < 0 and "(noise)" in h4 and "(noise)" in h5


def test_stage_support_example(demo):
    # The stage response 1 m from source 1, analysed with --stage: ST_early and ST_late in
    # 250 Hz–2 kHz only (ISO 3382-1:2009, Annex C — from memory). Reference: the same
    # response band-filtered in the frequency domain (|H|² of the scipy design of the
    # IEC 61260-1 octave, zero phase), time zero where the level first comes within 20 dB of
    # its peak (ISO 3382-1, A.3.2 — from memory), energies summed with numpy; the 0–10 ms
    # window reaches back 10 ms for the filter's spread of the direct sound.
    from scipy.signal import butter, sosfreqz

    doc = json.loads((demo / "stage.json").read_text())
    (p,) = doc["positions"]
    rows = {r["band_hz"]: r for r in p["bands"]}
    assert [f for f, r in rows.items() if r["st_early_db"] is not None] == [
        250.0,
        500.0,
        1000.0,
        2000.0,
    ]
    h, rate = sf.read(demo / "irs" / "stage_1m.wav")
    onset = int(np.flatnonzero(h**2 >= np.max(h**2) / 100)[0])
    m = 1 << int(np.ceil(np.log2(h.size + rate)))
    g = 10**0.3
    for fm, nominal in ((g**-1 * 1000, 500.0), (1000.0, 1000.0), (g * 1000, 2000.0)):
        sos = butter(3, [fm * g**-0.5, fm * g**0.5], btype="bandpass", fs=rate, output="sos")
        _, H = sosfreqz(sos, worN=m, whole=True)
        x = np.real(np.fft.ifft(np.fft.fft(h, m) * np.abs(H) ** 2))

        def e(a_ms, b_ms, x=x):
            i0 = onset + int(round(a_ms * rate / 1000))
            return float(np.sum(x[max(i0, 0) : onset + int(round(b_ms * rate / 1000))] ** 2))

        direct = e(-10, 10)
        assert rows[nominal]["st_early_db"] == pytest.approx(
            10 * np.log10(e(20, 100) / direct), abs=0.3
        )
        assert rows[nominal]["st_late_db"] == pytest.approx(
            10 * np.log10(e(100, 1000) / direct), abs=0.3
        )


def test_demo_exports_its_study_as_sofa_and_reads_it_back(demo):
    # AES69-2022 SingleRoomSRIR 1.1 (seen): one measurement per source–receiver pair of the
    # study, the hall's box from RoomCornerA to RoomCornerB. Read back, the same samples give
    # the same single numbers as the WAV files did.
    from roomconv.sofa import read_sofa

    summary = json.loads((demo / "summary.json").read_text())
    assert summary["sofa"]["same_numbers_as_wav"] is True
    rs = read_sofa(demo / "quillmere.sofa")
    hall = quillmere_hall()
    assert rs.convention == "SingleRoomSRIR"
    assert rs.measurements == len(QUICK.sources) * len(QUICK.receivers)
    assert rs.room_dimensions_m == (hall.length, hall.width, hall.height)
    x, _ = sf.read(demo / "irs" / "S1R2.wav")
    np.testing.assert_array_equal(rs.ir[1, 0, : x.shape[0]], x)
    page = (demo / "report" / "report.html").read_text()
    assert "quillmere.sofa" in page
