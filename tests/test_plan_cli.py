"""The ``plan`` command: JSON fields against the closed forms, the write guard, the study
file path, and one-line refusals that name the option. Rooms and times are our own."""

from __future__ import annotations

import json
import math

import pytest

from roomconv.jobs.plan import plan_treatment
from tests.report.conftest import TIMES, write_study

OCT = (63, 125, 250, 500, 1000, 2000, 4000, 8000)
#: Measured T30 per octave of our own classroom (invented for the test scenario).
MEASURED = dict(zip(OCT, (None, 1.10, 1.20, 1.30, 1.35, 1.30, 1.10, 0.90), strict=True))
V, S = 8 * 9 * 3.2, 2 * (8 * 9 + 8 * 3.2 + 9 * 3.2)


def _results(path, bands="octave"):
    rows = [
        {
            "band_hz": b,
            "t30_s": {"mean": t, "verdict": "ok" if t else "not evaluable", "n": 3},
            "t20_s": {"mean": t, "verdict": "ok" if t else "not evaluable", "n": 3},
            "edt_s": {"mean": t, "verdict": "ok" if t else "not evaluable", "n": 3},
        }
        for b, t in MEASURED.items()
    ]
    rows[4]["t30_s"]["verdict"] = "caution"
    path.write_text(json.dumps({"settings": {"bands": bands}, "average": {"bands": rows}}))
    return path


def _one_line_refusal(code, err, *words):
    assert code == 2
    lines = [x for x in err.strip().splitlines() if x]
    assert len(lines) == 1 and "Traceback" not in err, err
    for w in words:
        assert w in lines[0], (w, lines[0])


def test_results_plan_json_against_closed_forms(tmp_path, cli):
    res = _results(tmp_path / "results.json")
    out_json = tmp_path / "plan.json"
    code, out, err = cli(
        "plan", "--results", res, "--volume", V, "--area", S, "--target", "din18041:A3",
        "--treat", "ceiling=acoustic-tile", "--json", out_json,
    )  # fmt: skip
    assert code == 0, err
    doc = json.loads(out_json.read_text())
    # DIN 18041:2016 A3 (formula seen in a manufacturer's summary): 0.32·lg V − 0.17.
    t_soll = 0.32 * math.log10(V) - 0.17
    by_band = {r["band_hz"]: r for r in doc["bands"]}
    assert set(by_band) == set(OCT)
    for b, tm in MEASURED.items():
        r = by_band[b]
        assert r["target_s"] == pytest.approx(t_soll, abs=1e-4)
        for key in ("target_min_s", "target_max_s", "treatment", "predicted_s"):
            assert key in r
        if tm is None:
            assert r["added_area_sabine_m2"] is None and r["measured_s"] is None
            continue
        # Sabine (ISO 354 constant): ΔA = 0.161·V·(1/T_target − 1/T_measured).
        assert r["added_area_sabine_m2"] == pytest.approx(
            0.161 * V * (1 / t_soll - 1 / tm), abs=1e-3
        )
        assert 0 < r["added_area_eyring_m2"] < r["added_area_sabine_m2"]
    # The installed area at the sizing bands brings the 500 Hz/1 kHz mean close to T_soll.
    assert doc["sizing_bands_hz"] == [500, 1000]
    (inst,) = doc["installed"]
    assert inst["surface"] == "ceiling" and inst["material"] == "acoustic-tile"
    mid = [by_band[b]["predicted_s"] for b in (500, 1000)]
    assert abs(sum(mid) / 2 - t_soll) < 0.02 * t_soll
    assert doc["inputs"]["volume_m3"] == pytest.approx(V) and doc["checked"] == "predicted"
    assert any("licensed professional" in n for n in doc["notes"])
    assert any("caution" in n for n in by_band[1000]["notes"])
    assert "Treatment plan" in out and "ceiling" in out and "acoustic-tile" in out
    # No-clobber: a second run refuses and leaves the file; --force replaces it.
    before = out_json.read_text()
    code, _, err = cli(
        "plan", "--results", res, "--volume", V, "--area", S, "--target", "0.6",
        "--json", out_json,
    )  # fmt: skip
    _one_line_refusal(code, err, str(out_json), "--force")
    assert out_json.read_text() == before
    code, _, err = cli(
        "plan", "--results", res, "--volume", V, "--area", S, "--target", "0.6",
        "--json", out_json, "--force", "--quiet",
    )  # fmt: skip
    assert code == 0, err
    assert json.loads(out_json.read_text())["target"]["name"] == "0.6"


def test_target_above_measured_says_remove_and_gives_a_negative_area(tmp_path, cli):
    res = _results(tmp_path / "results.json")
    code, out, err = cli(
        "plan", "--results", res, "--volume", V, "--area", S, "--target", "500:1.8,1000:1.8",
        "--json", tmp_path / "p.json",
    )  # fmt: skip
    assert code == 0, err
    doc = json.loads((tmp_path / "p.json").read_text())
    for r in doc["bands"]:
        assert r["added_area_sabine_m2"] == pytest.approx(
            0.161 * V * (1 / 1.8 - 1 / MEASURED[r["band_hz"]]), abs=1e-3
        )
        assert r["added_area_sabine_m2"] < 0
    assert "remove about" in out


def test_study_file_plan_uses_its_room_and_target(tmp_path, cli):
    study = write_study(tmp_path)
    code, out, err = cli("plan", "--study", study, "--json", tmp_path / "p.json", "--quiet")
    assert code == 0, err
    doc = json.loads((tmp_path / "p.json").read_text())
    # The study's room: 12 × 8 × 4 m; its targets 250 Hz–2 kHz with ±10 %.
    assert doc["inputs"]["volume_m3"] == pytest.approx(384.0)
    assert doc["inputs"]["area_m2"] == pytest.approx(2 * (96 + 48 + 32))
    assert [r["band_hz"] for r in doc["bands"]] == [250, 500, 1000, 2000]
    mean_t = sum(TIMES) / len(TIMES)
    for r in doc["bands"]:
        # The responses decay with known T (closed form); their mean within the 5 % JND of
        # ISO 3382-1.
        assert r["measured_s"] == pytest.approx(mean_t, rel=0.05)
        assert r["target_max_s"] == pytest.approx(1.1 * r["target_s"])
        assert r["added_area_sabine_m2"] == pytest.approx(
            0.161 * 384 * (1 / r["target_s"] - 1 / r["measured_s"]), abs=1e-3
        )
        assert r["within_tolerance"] == (r["target_min_s"] <= r["measured_s"] <= r["target_max_s"])
    assert doc["checked"] == "measured"


def test_job_returns_a_plan_without_writing(tmp_path):
    res = plan_treatment(
        results_path=_results(tmp_path / "r.json"),
        volume_m3=V,
        area_m2=S,
        target="bb93:primary",
        treatments=["walls=curtain-heavy"],
    )
    assert res.written == [] and res.plan.mean_check is not None
    assert res.plan.mean_check["measured_mean_s"] == pytest.approx(
        (1.30 + 1.35 + 1.30) / 3, abs=1e-4
    )
    assert list(tmp_path.iterdir()) == [tmp_path / "r.json"]


@pytest.mark.parametrize(
    "extra, words",
    [
        (["--target", "din18041:A9"], ["--target", "din18041:A3", "s12.60", "bb93:sen"]),
        (["--target", "0.6", "--volume", "0"], ["--volume", "positive"]),
        (["--target", "0.6", "--volume", "1e308", "--area", "1e308"], ["--volume", "at most"]),
        (["--target", "0.6", "--humidity", "200"], ["--humidity", "0 to 100"]),
        (["--target", "nan"], ["--target", "unknown"]),
        (["--target", "0.6", "--area", "100"], ["--area", "the least any room"]),
        (["--target", "0.6", "--treat", "roof=carpet"], ["--treat", "roof", "ceiling"]),
        (["--target", "0.6", "--treat", "floor=velvet"], ["--treat", "velvet"]),
        (
            ["--target", "0.6", "--treat", "floor=carpet", "--treat", "floor=parquet"],
            ["--treat", "floor", "twice"],
        ),
        (["--target", "s12.60", "--volume", "900", "--area", "800"], ["--target", "566"]),
        (["--target", "0.6", "--tolerance", "10,20"], ["--tolerance"]),
        (["--target", "500:0.6,700:0.6"], ["--target", "700 Hz"]),
    ],
)
def test_refusals_name_the_option(tmp_path, cli, extra, words):
    res = _results(tmp_path / "results.json")
    args = ["plan", "--results", res, "--volume", V, "--area", S]
    # A later --volume or --area overrides the default ones above.
    code, _, err = cli(*args, *extra)
    _one_line_refusal(code, err, *words)


def test_refusals_of_the_source(tmp_path, cli):
    res = _results(tmp_path / "third.json", bands="third")
    code, _, err = cli("plan", "--results", res, "--volume", V, "--area", S, "--target", "0.6")
    _one_line_refusal(code, err, "third.json", "octave")
    code, _, err = cli("plan", "--results", tmp_path / "none.json", "--volume", V, "--area", S,
                       "--target", "0.6")  # fmt: skip
    _one_line_refusal(code, err, "none.json", "not found")
    code, _, err = cli("plan", "--results", res, "--target", "0.6")
    _one_line_refusal(code, err, "--volume", "--area")
    (tmp_path / "junk.json").write_text('{"a": 1}')
    code, _, err = cli("plan", "--results", tmp_path / "junk.json", "--volume", V, "--area", S,
                       "--target", "0.6")  # fmt: skip
    _one_line_refusal(code, err, "junk.json", "not an analysis document")


def test_study_without_targets_needs_a_target(tmp_path, cli):
    from tests.report.conftest import STUDY

    text = STUDY[: STUDY.index("[targets]")]
    study = write_study(tmp_path, text)
    code, _, err = cli("plan", "--study", study)
    _one_line_refusal(code, err, "--study", "[targets]", "give a target")


def test_report_section_of_the_treatment_estimate(tmp_path):
    # The report's section alone (the whole page is exercised by tests/report).
    from roomconv.report import analyse_study
    from roomconv.report.plan_section import treatment_section
    from roomconv.study import load_study

    study = load_study(write_study(tmp_path))
    doc = analyse_study(study).analysis.document
    figures = []
    html = treatment_section(study, doc, lambda fig, alt, cap: figures.append(fig) or "<fig>")
    assert "Absorption to reach the target (estimate)" in html
    assert "licensed professional" in html and len(figures) == 1
    # The 1 kHz row: Sabine ΔA = 0.161·V·(1/T_target − 1/T_measured) (closed form) from the
    # analysis' own mean T30, V = 384 m³, target 0.8 s.
    t = next(r for r in doc["average"]["bands"] if r["band_hz"] == 1000)
    expected = 0.161 * 384 * (1 / 0.8 - 1 / t["t30_s"]["mean"])
    assert f"<td>{expected:+.1f}</td>" in html
    # No target in the study: no section.
    from dataclasses import replace

    assert treatment_section(replace(study, targets=None), doc, None) == ""


def test_demo_plan_step(tmp_path):
    # The demo's hall planned for talks: DIN 18041 A2 (speech), T_soll = 0.37·lg V − 0.14
    # (formula seen in a manufacturer's summary of the standard), V = 2340 m³.
    from roomconv.demo import quillmere_hall
    from roomconv.demo.plan_step import plan_demo

    _results(tmp_path / "results.json")
    room = quillmere_hall()
    res = plan_demo(tmp_path, room)
    doc = json.loads((tmp_path / "plan.json").read_text())
    assert res.written == [tmp_path / "plan.json"]
    assert doc["target"]["name"] == "din18041:A2"
    t_soll = 0.37 * math.log10(room.volume) - 0.14
    assert doc["bands"][3]["target_s"] == pytest.approx(t_soll, abs=1e-4)
    assert [a["surface"] for a in doc["installed"]] == ["back", "ceiling"]


def test_a_material_from_a_materials_file(tmp_path, cli):
    # A user material of our own (felt, 0.9 everywhere): the installed area is the Eyring
    # area at the sizing bands over α (closed form, one material).
    (tmp_path / "mats.json").write_text(json.dumps({"felt": {"alpha": [0.9] * 8}}))
    res = _results(tmp_path / "results.json")
    code, _, err = cli(
        "plan", "--results", res, "--volume", V, "--area", S, "--target", "0.6",
        "--treat", "walls=felt", "--materials-file", tmp_path / "mats.json",
        "--json", tmp_path / "p.json",
    )  # fmt: skip
    assert code == 0, err
    doc = json.loads((tmp_path / "p.json").read_text())
    by_band = {r["band_hz"]: r for r in doc["bands"]}
    need = (by_band[500]["added_area_eyring_m2"] + by_band[1000]["added_area_eyring_m2"]) / 2
    assert doc["installed"][0]["area_m2"] == pytest.approx(need / 0.9, abs=1e-3)
