"""``roomconv analyze --channels / --binaural / --stage``: exit codes, JSON keys, CSV columns
and refusals, end to end."""

import csv
import json

import numpy as np
import pytest
import soundfile as sf

from roomconv.analysis.calibration import StrengthReference, reference_to_dict
from roomconv.jobs.analyze import analyze_study

FS = 48000
ONSET = 480
LATERAL_KEYS = ("jlf", "jlfc", "lj_db")
IACC_KEYS = ("iacc_early", "iacc_late", "iacc_full")
ST_KEYS = ("st_early_db", "st_late_db")
EVERY_KEY = LATERAL_KEYS + IACC_KEYS + ST_KEYS


def _decay(rng, n, t60=0.9, gap_ms=4.0):
    """A diffuse decay of our own that starts ``gap_ms`` after the direct sound."""
    t = np.arange(n) / FS
    x = 0.05 * rng.standard_normal(n) * 10 ** (-3 * t / t60)
    x[: ONSET + int(gap_ms * FS / 1000)] = 0.0
    return x


@pytest.fixture
def files(tmp_path):
    rng = np.random.default_rng(3)
    n = int(1.5 * FS)
    floor = 1e-5 * rng.standard_normal((n, 4))
    omni = _decay(rng, n)
    omni[ONSET] = 1.0
    fig8 = 0.6 * _decay(rng, n)  # nothing of the direct sound: its null faces the source
    of = np.stack([omni, fig8], 1) + floor[:, :2]
    sf.write(tmp_path / "of.wav", of, FS, subtype="FLOAT")
    sf.write(tmp_path / "fo.wav", of[:, ::-1], FS, subtype="FLOAT")
    right = 0.5 * omni + 0.5 * _decay(rng, n)
    right[ONSET + 20] = 0.8
    sf.write(tmp_path / "ears.wav", np.stack([omni, right], 1) + floor[:, :2], FS, subtype="FLOAT")
    sf.write(tmp_path / "mono.wav", omni + floor[:, 0], FS, subtype="FLOAT")
    # First order ACN/SN3D: the direct sound from azimuth 0 (W = X = 1), the diffuse field
    # with a third of W's energy in each of Y, Z, X (SN3D in an isotropic field).
    acn = np.stack([omni, *(_decay(rng, n) / np.sqrt(3) for _ in range(3))], 1)
    acn[ONSET, 3] = 1.0
    sf.write(tmp_path / "foa.wav", acn + floor, FS, subtype="FLOAT")
    return tmp_path


def _run(cli, tmp, *args):
    code, out, err = cli("analyze", *args, "--json", tmp / "r.json", "--csv", tmp / "r.csv")
    doc = json.loads((tmp / "r.json").read_text()) if code == 0 else None
    return code, out, err, doc


def _check_rows(doc, present, absent):
    """Every band row holds the layout's keys (a number or null), a verdict for each, and
    none of the other layouts' keys."""
    for p in doc["positions"]:
        for row in p["bands"]:
            for k in present:
                assert k in row and k in row["verdicts"], (row["band_hz"], k)
                if row[k] is None:
                    assert row["verdicts"][k] == "not evaluable"
            for k in absent:
                assert k not in row
        for k in present:
            assert p["wideband"][k] is None  # per band only


def test_channels_omni_fig8_end_to_end(files, cli):
    code, out, err, doc = _run(cli, files, files / "of.wav", "--channels", "omni,fig8")
    assert code == 0, err
    assert len(doc["positions"]) == 1 and doc["positions"][0]["channel"] == 1
    _check_rows(doc, LATERAL_KEYS, IACC_KEYS + ST_KEYS)
    p = doc["positions"][0]
    by = {r["band_hz"]: r for r in p["bands"]}
    # J_LF lies in [0, 1] by its definition (a share of energy); J_LF ≤ J_LFC·max|p_L/p|
    # is not general, so only the range is checked here; the closed forms are in
    # test_lateral.py.
    for f in (125.0, 250.0, 500.0, 1000.0):
        assert 0.0 < by[f]["jlf"] < 1.0
    assert by[63.0]["jlf"] is None and "lateral_band_outside" in by[63.0]["warning_codes"]
    # No calibration: L_J null with the reason's code.
    assert by[1000.0]["lj_db"] is None
    assert "lj_no_calibration" in by[1000.0]["warning_codes_by_value"]["lj_db"]
    sn = p["layout_single_numbers"]
    # The 125 Hz–1 kHz mean (ISO 3382-1:2009, Annex A — from memory), numpy as reference.
    want = np.mean([by[f]["jlf"] for f in (125.0, 250.0, 500.0, 1000.0)])
    assert sn["jlf_avg"] == pytest.approx(want)
    assert sn["lj_avg_db"] is None and p["layout_single_number_verdicts"]["lj_avg_db"] == (
        "not evaluable"
    )
    assert doc["average"]["layout_single_numbers"]["values"]["jlf_avg"] == pytest.approx(want)
    assert "omni,fig8" in doc["settings"]["channels"]
    assert "J_LF" in out
    # CSV: the lateral columns are there, the others are not.
    with open(files / "r.csv", newline="") as fh:
        header = next(csv.reader(fh))
    assert all(k in header for k in LATERAL_KEYS) and "jlf_verdict" in header
    assert not any(k in header for k in IACC_KEYS + ST_KEYS)


def test_swapped_channel_order_gives_the_same_values(files, cli):
    code, _, err, doc = _run(cli, files, files / "of.wav", "--channels", "omni,fig8")
    assert code == 0, err
    code, _, err, swapped = _run(cli, files, files / "fo.wav", "--channels", "fig8,omni", "--force")
    assert code == 0, err
    assert swapped["positions"][0]["channel"] == 2  # the omni, counted from 1
    a = [r["jlf"] for r in doc["positions"][0]["bands"]]
    b = [r["jlf"] for r in swapped["positions"][0]["bands"]]
    assert a == b


def test_wrong_layout_reads_the_omni_as_fig8_and_says_so(files, cli):
    # The omni given as the figure-of-eight: its direct sound is not nulled at all.
    code, _, err, doc = _run(cli, files, files / "of.wav", "--channels", "fig8,omni")
    assert code == 0, err
    row = next(r for r in doc["positions"][0]["bands"] if r["band_hz"] == 1000.0)
    assert "fig8_not_nulled" in row["warning_codes"]
    assert row["jlf"] is None and row["jlfc"] is None


def test_lj_with_a_calibration_file(files, cli):
    ref = StrengthReference(
        None, {f: -10.0 for f in (125.0, 250.0, 500.0, 1000.0, 2000.0, 4000.0)}, "octave", FS, "t"
    )
    (files / "cal.json").write_text(json.dumps(reference_to_dict(ref)))
    code, _, err, doc = _run(
        cli, files, files / "of.wav", "--channels", "omni,fig8", "--calibration", files / "cal.json"
    )
    assert code == 0, err
    p = doc["positions"][0]
    rows = {r["band_hz"]: r for r in p["bands"]}
    assert all(rows[f]["lj_db"] is not None for f in (125.0, 250.0, 500.0, 1000.0))
    want = np.mean([rows[f]["lj_db"] for f in (125.0, 250.0, 500.0, 1000.0)])
    assert p["layout_single_numbers"]["lj_avg_db"] == pytest.approx(want)


def test_ambisonic_input(files, cli):
    code, _, err, doc = _run(cli, files, files / "foa.wav", "--channels", "acn-sn3d")
    assert code == 0, err
    _check_rows(doc, LATERAL_KEYS, IACC_KEYS + ST_KEYS)
    p = doc["positions"][0]
    assert p["channel"] == 1  # W
    assert "ACN" in doc["settings"]["channels"] and "SN3D" in doc["settings"]["channels"]
    # The direct sound comes from azimuth 0 (W = X), so the lateral figure-of-eight at 90°
    # is Y·cos 0 − X·sin 0 = Y (AmbiX/SN3D plane-wave gains, Nachbar et al. 2011): the same
    # response given as omni = W, fig8 = Y must give the same values.
    data, _ = sf.read(files / "foa.wav")
    sf.write(files / "wy.wav", data[:, :2], FS, subtype="FLOAT")
    code, _, err, plain = _run(cli, files, files / "wy.wav", "--channels", "omni,fig8", "--force")
    assert code == 0, err
    for a, b in zip(p["bands"], plain["positions"][0]["bands"], strict=True):
        for k in ("jlf", "jlfc"):
            # The −100 dB floor tilts the direction found by about 1e-5 rad.
            assert a[k] == pytest.approx(b[k], rel=1e-4), (a["band_hz"], k)
    assert p["layout_single_numbers"]["jlf_avg"] is not None


def test_binaural_end_to_end(files, cli):
    code, out, err, doc = _run(cli, files, files / "ears.wav", "--binaural")
    assert code == 0, err
    _check_rows(doc, IACC_KEYS, LATERAL_KEYS + ST_KEYS)
    p = doc["positions"][0]
    rows = {r["band_hz"]: r for r in p["bands"]}
    for f in (500.0, 1000.0, 2000.0):
        assert 0.0 <= rows[f]["iacc_early"] <= 1.0
    # 1 − IACC_E3 = 1 − mean of the 500, 1k, 2k early values (Hidaka, Beranek & Okano 1995).
    want = 1 - np.mean([rows[f]["iacc_early"] for f in (500.0, 1000.0, 2000.0)])
    assert p["layout_single_numbers"]["one_minus_iacc_e3"] == pytest.approx(want)
    assert "IACC_E" in out


def test_stage_end_to_end(files, cli):
    code, _, err, doc = _run(cli, files, files / "mono.wav", files / "of.wav", "--stage")
    assert code == 0, err
    # Stage: every channel is its own position.
    assert [(p["file"].rsplit("/", 1)[-1], p["channel"]) for p in doc["positions"]] == [
        ("mono.wav", 1),
        ("of.wav", 1),
        ("of.wav", 2),
    ]
    _check_rows(doc, ST_KEYS, LATERAL_KEYS + IACC_KEYS)
    p = doc["positions"][0]
    given = [r["band_hz"] for r in p["bands"] if r["st_early_db"] is not None]
    assert given == [250.0, 500.0, 1000.0, 2000.0]  # ISO 3382-1 Annex C octaves (from memory)
    avg = doc["average"]["bands"]
    row = next(r for r in avg if r["band_hz"] == 1000.0)
    assert row["st_early_db"]["n"] >= 1 and "mean" in row["st_early_db"]


def test_plain_analysis_has_none_of_the_new_keys(files, cli):
    code, _, err, doc = _run(cli, files, files / "mono.wav")
    assert code == 0, err
    _check_rows(doc, (), EVERY_KEY)
    assert "layout" not in doc["positions"][0] and "channels" not in doc["settings"]
    with open(files / "r.csv", newline="") as fh:
        header = next(csv.reader(fh))
    assert not any(k in header for k in EVERY_KEY)


@pytest.mark.parametrize(
    "args, words",
    [
        (("mono.wav", "--binaural"), ["mono.wav", "2 channels", "has 1"]),
        (("of.wav", "--channels", "acn-sn3d"), ["of.wav", "4 channels", "has 2"]),
        (("foa.wav", "--channels", "omni,fig8"), ["foa.wav", "2 channels", "has 4"]),
        (("ears.wav", "--binaural", "--stage"), ["--binaural", "--stage"]),
        (("mono.wav", "--stage", "--bands", "third"), ["--stage", "octave"]),
        (("ears.wav", "--channels", "omni,left"), ["--channels", "omni,left"]),
    ],
)
def test_refusals_exit_2_with_one_line(files, cli, args, words):
    argv = [files / a if a.endswith(".wav") else a for a in args]
    code, _, err = cli("analyze", *argv, "--json", files / "r.json")
    assert code == 2
    assert "Traceback" not in err and len(err.strip().splitlines()) == 1
    for w in words:
        assert w in err
    assert not (files / "r.json").exists()  # refused before any output


def test_job_refuses_layout_with_third_octaves(files):
    from roomconv.errors import InputError

    with pytest.raises(InputError, match="octave bands"):
        analyze_study([files / "ears.wav"], bands="third", binaural=True)


def test_html_report_section_only_when_present(files, cli):
    code, _, err = cli("analyze", files / "ears.wav", "--binaural", "--report", files / "a")
    assert code == 0, err
    page = (files / "a" / "report.html").read_text()
    assert "Stage, lateral and interaural parameters" in page
    assert "IACC_E" in page and "1 − IACC_E3" in page
    code, _, err = cli("analyze", files / "mono.wav", "--report", files / "b")
    assert code == 0, err
    assert "Stage, lateral and interaural" not in (files / "b" / "report.html").read_text()


def test_client_report_section_from_the_same_builder(files):
    # The study report (report/document.py) shows the same section when the analysis holds
    # these parameters; built here from an analysed document.
    from roomconv.analysis.report import layout_section_html as section_html

    res = analyze_study([files / "mono.wav"], stage=True)
    page = section_html(res.study.document, level=3)
    assert page.startswith("<h3>") and "ST_early dB" in page and "250 Hz–2 kHz" in page
    plain = analyze_study([files / "mono.wav"])
    assert section_html(plain.study.document) == ""
