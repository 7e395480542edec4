"""The study-file jobs called directly, as the terminal workbench and the demo call them."""

from __future__ import annotations

import pytest

from roomconv.errors import InputError, OutputExistsError
from roomconv.jobs.study import init_study, report_study, save_session_study, write_study_file
from roomconv.study import load_study
from tests.report.conftest import TIMES, write_study


def test_report_study_reads_each_response_s_decay_time(tmp_path):
    # Each response is noise under an exponential envelope whose energy falls 60 dB in the
    # given T (closed form: 20 lg e^(-6.9078 t / T) = -60 dB at t = T). The 1 kHz T30 per
    # position is within 5 % of it: the ISO 3382-1 JND of T (Annex A, from memory).
    res = report_study(write_study(tmp_path), json_path=tmp_path / "r.json")
    assert res.written == [tmp_path / "r.json"] and res.errors == []
    by_pos = {p["position"]: p for p in res.document["positions"]}
    for i, t in enumerate(TIMES, 1):
        band = next(b for b in by_pos[f"S1-R{i}"]["bands"] if b["band_hz"] == 1000)
        assert band["t30_s"] == pytest.approx(t, rel=0.05), i


def test_without_a_pdf_engine_the_html_alone_is_written_and_the_reason_noted(tmp_path, monkeypatch):
    import roomconv.report.pdf as pdf

    monkeypatch.setattr(pdf, "pdf_engine_problem", lambda: "WeasyPrint is not installed")
    path = write_study(tmp_path)
    with pytest.raises(InputError, match="WeasyPrint"):
        report_study(path, report_dir=tmp_path / "strict")
    assert not (tmp_path / "strict").exists()
    res = report_study(path, report_dir=tmp_path / "rep", require_pdf=False)
    assert res.written == [tmp_path / "rep" / "report.html"]
    assert not (tmp_path / "rep" / "report.pdf").exists()
    assert any("report.pdf not written" in n and "WeasyPrint" in n for n in res.notes)


def test_an_existing_report_is_refused_before_the_analysis(tmp_path, monkeypatch):
    path = write_study(tmp_path)
    (tmp_path / "rep").mkdir()
    (tmp_path / "rep" / "report.pdf").write_bytes(b"earlier")
    import roomconv.report as report

    monkeypatch.setattr(
        report,
        "analyse_study",
        lambda *a, **k: pytest.fail("analysed before the outputs were checked"),
    )
    with pytest.raises(OutputExistsError):
        report_study(path, report_dir=tmp_path / "rep")
    assert (tmp_path / "rep" / "report.pdf").read_bytes() == b"earlier"


def test_session_study_loads_back_and_is_never_replaced(tmp_path):
    write_study(tmp_path)
    files = [tmp_path / "irs" / f"S1R{i}.wav" for i in (1, 2)]
    path = save_session_study(
        tmp_path / "new" / "session.toml", [("P1", files[0], None), ("P2", files[1], None)]
    )
    study = load_study(path)
    assert [(r.receiver, r.file) for r in study.responses] == [("P1", files[0]), ("P2", files[1])]
    before = path.read_text()
    with pytest.raises(OutputExistsError):
        save_session_study(path, [("P1", files[0], None)])
    assert path.read_text() == before


def test_study_files_must_be_toml_and_valid_before_they_are_written(tmp_path):
    with pytest.raises(InputError, match=r"\.toml"):
        init_study(tmp_path / "study.txt")
    with pytest.raises(InputError):
        write_study_file(tmp_path / "bad.toml", "[room\n")
    assert not (tmp_path / "bad.toml").exists() and not (tmp_path / "study.txt").exists()
    assert (
        load_study(init_study(tmp_path / "t.toml", title="Our test room")).title == "Our test room"
    )
