"""The client report from a study file: content, self-containment, the PDF's text (read
with pdftotext from poppler-utils) and the HTML in a headless browser (Debian's chromium)."""

from __future__ import annotations

import base64
import json
import re
import shutil
import struct
import subprocess

import pytest

from roomconv.analysis.report import SINGLE_NUMBER_NAMES
from roomconv.safety import caution_text

from .conftest import TIMES, write_study

#: PNG signature, ISO/IEC 15948:2004 (PNG), 5.2 (from memory).
PNG_SIGNATURE = b"\x89PNG\r\n\x1a\n"


def _png_size(data: bytes) -> tuple[int, int]:
    # IHDR is the first chunk: width and height as big-endian 32-bit integers (PNG, 11.2.2,
    # from memory).
    assert data[:8] == PNG_SIGNATURE
    return struct.unpack(">II", data[16:24])


def _words(text: str) -> str:
    return re.sub(r"\s+", " ", text)


def test_report_files_and_numbers(study_run):
    folder, code = study_run
    assert code == 0
    doc = json.loads((folder / "results.json").read_text())
    # T30 of the synthetic decays: mean of 0.80, 0.85, 0.90 s (closed form: the Schroeder
    # curve of an exponential decay is a line of slope −60/T). Within the ISO 3382-1 JND of
    # 5 % (ISO 3382-1:2009, Table A.1, from memory).
    assert doc["average"]["single_numbers"]["t30_mid_s"] == pytest.approx(sum(TIMES) / 3, rel=0.05)
    assert doc["grade"]["name"] == "survey"  # 1 source × 3 receivers (ISO 3382-2 Table 1)
    assert doc["study"]["room"]["name"] == "Harbour Room"
    assert {p["position"] for p in doc["positions"]} == {"S1-R1", "S1-R2", "S1-R3"}
    pdf = (folder / "report" / "report.pdf").read_bytes()
    assert pdf.startswith(b"%PDF-")  # ISO 32000-1:2008, 7.5.2, from memory


def test_html_is_self_contained_and_ends_with_the_limits_not_a_caution(study_run):
    folder, _ = study_run
    page = (folder / "report" / "report.html").read_text()
    # No reference the browser could fetch: only data: URIs for images, no scripts, no links.
    assert not re.search(r"""(src|href)\s*=\s*['"](?!data:)""", page)
    assert "url(" not in page and "@import" not in page and "<script" not in page
    srcs = re.findall(r"src='data:image/png;base64,([^']+)'", page)
    assert len(srcs) >= 6  # T30, EDT, C80/D50, frequency response, plan, positions
    for s in srcs:
        _png_size(base64.b64decode(s))
    # The playback caution belongs to measurement and playback, not to a results document.
    assert caution_text().strip()[:60] not in page
    limits = page.rindex("Limits of these results")
    assert "licensed professional" in page[limits:]
    assert page.rstrip().endswith("</body></html>")


def test_flagged_values_are_visibly_flagged(study_run):
    folder, _ = study_run
    doc = json.loads((folder / "results.json").read_text())
    page = (folder / "report" / "report.html").read_text()
    flagged = [
        (p["position"], r["band_hz"], m)
        for p in doc["positions"]
        for r in p["bands"]
        for m, v in (r.get("verdicts") or {}).items()
        if v == "caution" and r.get(m) is not None
    ]
    assert flagged, "the scenario has flagged values (single-position statistical uncertainty)"
    assert page.count("class='flag'") >= len(flagged)
    assert "⚠" in page


def test_targets_are_compared(study_run):
    folder, _ = study_run
    doc = json.loads((folder / "results.json").read_text())
    page = _words((folder / "report" / "report.html").read_text())
    avg = {r["band_hz"]: r["t30_s"]["mean"] for r in doc["average"]["bands"]}
    # The study's target at 1 kHz: 0.8 s, −10 %/+10 % → 0.72–0.88 s (plain arithmetic).
    assert "0.72–0.88" in page
    m = avg[1000]
    assert f"<td>{m:.2f}</td>" in page


PDFTOTEXT = shutil.which("pdftotext")


@pytest.mark.skipif(
    PDFTOTEXT is None,
    reason="pdftotext (Debian poppler-utils) is not installed; .ci/run installs it where it can",
)
def test_pdf_text_holds_title_room_grade_and_the_json_single_numbers(study_run):
    folder, _ = study_run
    text = _words(
        subprocess.run(
            [PDFTOTEXT, "-layout", str(folder / "report" / "report.pdf"), "-"],
            capture_output=True,
            text=True,
            check=True,
        ).stdout
    )
    doc = json.loads((folder / "results.json").read_text())
    assert "Harbour Room acceptance test" in text
    assert "Harbour Room" in text and "Quayside Arts Trust" in text
    assert "Survey" in text
    n = 0
    for key, value in doc["average"]["single_numbers"].items():
        name, unit, f = SINGLE_NUMBER_NAMES[key]
        want = "not evaluable" if value is None else f"{f.format(value)} {unit}".strip()
        assert f"{name}, mean of 500 Hz and 1 kHz: {want}" in text, key
        n += 1
    assert n >= 7


def test_second_run_refuses_to_clobber_and_leaves_both_files(study_run, cli):
    folder, _ = study_run
    html_before = (folder / "report" / "report.html").read_bytes()
    pdf_before = (folder / "report" / "report.pdf").read_bytes()
    code, _, err = cli(
        "analyze", "--study", folder / "study.toml", "--report", folder / "report", "--quiet"
    )
    assert code == 2 and "exists already" in err and "--force" in err
    assert (folder / "report" / "report.html").read_bytes() == html_before
    assert (folder / "report" / "report.pdf").read_bytes() == pdf_before


def test_irs_and_study_together_are_refused(tmp_path, cli):
    path = write_study(tmp_path)
    code, _, err = cli("analyze", tmp_path / "irs" / "S1R1.wav", "--study", path)
    assert code == 2 and "--study" in err


CHROMIUM = shutil.which("chromium") or shutil.which("chromium-browser")
needs_browser = pytest.mark.skipif(
    CHROMIUM is None,
    reason="no headless browser (Debian chromium); .ci/run installs it where it can",
)

# Observes the page from inside: errors reported to the console or the window, every image
# decoded (complete with a natural width: HTML Living Standard, the img element, from
# memory), and the resources the page fetched (data: URIs are not fetched, so none is
# expected; W3C Resource Timing lists every fetched URL, from memory).
_PROBE = """<script>
window.__errs=[];window.addEventListener('error',e=>__errs.push(String(e.message||
(e.target&&e.target.src)||'error')),true);
const __ce=console.error;console.error=(...a)=>{__errs.push(a.join(' '));__ce(...a)};
window.addEventListener('load',()=>{const imgs=[...document.images];const bad=[];
for(const i of imgs){if(!(i.complete&&i.naturalWidth>0))bad.push(i.alt)}
const res=performance.getEntriesByType('resource').map(r=>r.name);
const p=document.createElement('pre');p.id='probe';
p.textContent=JSON.stringify({images:imgs.length,bad:bad,res:res,errs:__errs});
document.body.appendChild(p);});</script>"""


def _browse(page_path, tmp_path):
    probed = tmp_path / f"probed-{page_path.name}"
    probed.write_text(page_path.read_text().replace("<head>", "<head>" + _PROBE, 1))
    run = subprocess.run(
        [
            CHROMIUM,
            "--headless",
            "--no-sandbox",
            "--disable-gpu",
            "--no-first-run",
            f"--user-data-dir={tmp_path / 'profile'}",
            "--host-resolver-rules=MAP * ~NOTFOUND",
            "--virtual-time-budget=10000",
            "--dump-dom",
            probed.as_uri(),
        ],
        capture_output=True,
        text=True,
        timeout=120,
    )
    m = re.search(r'<pre id="probe">(.*?)</pre>', run.stdout, flags=re.S)
    assert m, run.stderr[-2000:]
    return json.loads(
        m.group(1)
        .replace("&amp;", "&")
        .replace("&lt;", "<")
        .replace("&gt;", ">")
        .replace("&quot;", '"')
    )


@needs_browser
def test_probe_catches_a_broken_image_and_a_network_request(tmp_path):
    # The check must be able to fail: a page with one bad image and one external image.
    bad = tmp_path / "bad.html"
    bad.write_text(
        "<!doctype html><html><head></head><body>"
        "<img alt='broken' src='data:image/png;base64,AAAA'>"
        "<img alt='remote' src='https://example.invalid/x.png'></body></html>"
    )
    r = _browse(bad, tmp_path)
    assert "broken" in r["bad"] and "remote" in r["bad"]
    assert r["res"] == ["https://example.invalid/x.png"]
    assert r["errs"]


@needs_browser
def test_report_in_a_headless_browser(study_run, tmp_path):
    folder, _ = study_run
    r = _browse(folder / "report" / "report.html", tmp_path)
    assert r["images"] >= 6
    assert r["bad"] == [] and r["errs"] == [] and r["res"] == []
    shot = tmp_path / "shot.png"
    subprocess.run(
        [
            CHROMIUM,
            "--headless",
            "--no-sandbox",
            "--disable-gpu",
            f"--user-data-dir={tmp_path / 'profile2'}",
            "--window-size=1280,900",
            "--hide-scrollbars",
            f"--screenshot={shot}",
            (folder / "report" / "report.html").as_uri(),
        ],
        capture_output=True,
        timeout=120,
        check=True,
    )
    assert _png_size(shot.read_bytes()) == (1280, 900)


def test_without_a_pdf_engine_the_report_is_refused_before_any_work(tmp_path, cli, monkeypatch):
    import roomconv.report.pdf as pdf

    monkeypatch.setattr(pdf, "pdf_engine_problem", lambda: "WeasyPrint is not installed")
    path = write_study(tmp_path)
    code, _, err = cli(
        "analyze", "--study", path, "--report", tmp_path / "rep", "--json", tmp_path / "r.json"
    )
    assert code == 2 and "--report" in err and "WeasyPrint" in err
    assert not (tmp_path / "r.json").exists() and not (tmp_path / "rep").exists()


def test_plain_report_of_results_does_not_end_with_the_playback_caution(tmp_path, cli):
    write_study(tmp_path)
    code, _, _ = cli(
        "analyze",
        tmp_path / "irs" / "S1R1.wav",
        tmp_path / "irs" / "S1R2.wav",
        "--report",
        tmp_path / "rep",
        "--quiet",
    )
    assert code == 0
    page = (tmp_path / "rep" / "report.html").read_text()
    assert "Reverberation time T30, mean of 500 Hz and 1 kHz" in page
    assert caution_text().strip()[:60] not in page and page.rstrip().endswith("</html>")
