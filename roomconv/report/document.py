"""The client report as one HTML source: cover, summary, grade, method, results, data
quality and limits. The PDF is printed from the same page (:mod:`roomconv.report.pdf`)."""

from __future__ import annotations

import html
import math

import numpy as np

from ..analysis.report import (
    HEADERS,
    SINGLE_NUMBER_NAMES,
    _html_table,
    band_label,
    layout_section_html,
    metrics_of,
    table_rows,
)
from ..analysis.report import mean_with_spread as _pm
from ..analysis.spatial import SINGLE_NUMBERS
from . import figures as F
from .inputs import StudyResults
from .plan_section import treatment_section

e = html.escape

_CSS = """
@page { size: A4; margin: 18mm 16mm 20mm 16mm;
  @bottom-left { content: string(doctitle); font-size: 8pt; color: #667; }
  @bottom-right { content: counter(page) " / " counter(pages); font-size: 8pt; color: #667; } }
html { font-family: "DejaVu Sans", system-ui, sans-serif; color: #1d2b36; font-size: 10pt; }
body { max-width: 60em; margin: 1.5em auto; padding: 0 1em; }
.cover { border-left: 6px solid #0f6e74; padding: 1em 1.4em; margin-bottom: 2em;
  page-break-after: always; }
.cover h1 { font-size: 22pt; margin: 0.2em 0 0.6em; string-set: doctitle content(); }
.cover dl { grid-template-columns: 11em auto; }
dl { display: grid; grid-template-columns: 11em auto; gap: 0.2em 1em; }
dt { color: #556; } dd { margin: 0; font-weight: 600; }
h2 { color: #0f6e74; border-bottom: 1px solid #cfd8dc; padding-bottom: 0.15em;
  margin-top: 1.6em; page-break-after: avoid; }
h3 { page-break-after: avoid; margin-bottom: 0.3em; }
table { border-collapse: collapse; font-size: 8.5pt; margin: 0.4em 0 0.8em;
  page-break-inside: avoid; }
td, th { border: 1px solid #cfd8dc; padding: 1px 5px; text-align: right; }
th { background: #e6f0f1; } td:first-child, th:first-child { text-align: left; }
td.flag { background: #fbe3d3; font-weight: 600; color: #8a3a0f; }
td.na { color: #8a97a3; }
.flagtext { color: #8a3a0f; }
figure { margin: 0.6em 0; page-break-inside: avoid; }
figure img { width: 100%; } figcaption { font-size: 8.5pt; color: #556; }
figure.narrow img { width: 62%; }
.words td { text-align: left; }
ul.numbers li { margin: 0.2em 0; }
.note { font-size: 9pt; color: #445; }
.grade { font-size: 13pt; font-weight: 700; }
.pos { page-break-inside: avoid; }
"""


def _fmt(x, spec="{:.1f}", none="—"):
    if x is None or (isinstance(x, float) and math.isnan(x)):
        return none
    return spec.format(x)


def _mids(doc) -> tuple[float, ...]:
    return (500, 1000) if doc["settings"]["bands"] == "octave" else (400, 500, 630, 800, 1000, 1250)


def _mid_text(doc) -> str:
    return "500 Hz and 1 kHz" if doc["settings"]["bands"] == "octave" else "400 Hz–1.25 kHz"


def single_number_rows(doc: dict) -> list[dict]:
    """Each single number with its uncertainty (T20, T30) and spread over positions.

    The uncertainty of a mean of band values is the root-sum-square of the bands'
    uncertainties divided by their count, the bands' decays being independent (JCGM 100:2008,
    5.1.2, propagation for uncorrelated inputs; from memory). The spread is the standard
    deviation of the positions' own mid-frequency values.

    Examples
    --------
    Two positions of a T = 0.5 s decay:

    >>> import tempfile, pathlib, numpy as np, soundfile
    >>> from roomconv.study import parse_study, template_text
    >>> tmp = tempfile.TemporaryDirectory()
    >>> d = pathlib.Path(tmp.name)
    >>> rate, T = 8000, 0.5
    >>> t = np.arange(2 * rate) / rate
    >>> for i in (1, 2):
    ...     h = np.random.default_rng(i).standard_normal(t.size) * 10 ** (-3 * t / T)
    ...     soundfile.write(d / f"S1R{i}.wav", 0.5 * h, rate, subtype="DOUBLE")
    >>> study = parse_study(template_text("Hall B"), d / "study.toml")
    >>> from roomconv.report.inputs import analyse_study
    >>> res = analyse_study(study)
    >>> doc = res.analysis.document
    >>> row = [r for r in single_number_rows(doc) if r["key"] == "t30_mid_s"][0]
    >>> row["text"], row["positions"]
    ('0.49', 2)
    >>> tmp.cleanup()
    """
    mids = _mids(doc)
    avg = {r["band_hz"]: r for r in doc["average"]["bands"]}
    verdicts = doc["average"].get("single_number_verdicts", {})
    out = []
    for key, value in doc["average"]["single_numbers"].items():
        metric = SINGLE_NUMBERS[key]
        name, unit, f = SINGLE_NUMBER_NAMES[key]
        u = None
        if value is not None and metric in ("t20_s", "t30_s"):
            us = [avg[b][metric].get("uncertainty") for b in mids if b in avg]
            if us and all(x is not None for x in us):
                u = math.sqrt(sum(x * x for x in us)) / len(us)
        per_pos = []
        for p in doc["positions"]:
            vals = [r.get(metric) for r in p["bands"] if r["band_hz"] in mids]
            if len(vals) == len(mids) and all(v is not None for v in vals):
                per_pos.append(float(np.mean(vals)))
        spread = float(np.std(per_pos, ddof=1)) if len(per_pos) > 1 else None
        out.append(
            {
                "key": key,
                "name": name,
                "unit": unit,
                "value": value,
                "text": None if value is None else f.format(value),
                "uncertainty": u,
                "spread": spread,
                "positions": len(per_pos),
                "verdict": verdicts.get(key, "ok" if value is not None else "not evaluable"),
                "fmt": f,
            }
        )
    return out


def _number_line(row: dict, mids: str) -> str:
    unit = f" {row['unit']}" if row["unit"] else ""
    head = f"{e(row['name'])}, mean of {mids}: "
    if row["value"] is None:
        return head + "<span class='flagtext'>not evaluable</span> (see section 5)"
    txt = f"<b>{e(row['text'])}{unit}</b>"
    if row["uncertainty"] is not None:
        txt += f" ± {row['uncertainty']:.2f}{unit} (standard uncertainty)"
    if row["spread"] is not None:
        spread = row["fmt"].format(row["spread"]).lstrip("+")
        txt += f"; spread over {row['positions']} positions {spread}{unit}"
    if row["verdict"] == "caution":
        txt += " <span class='flagtext'>⚠ caution: a check failed in a band behind it</span>"
    return head + txt


def _evaluation_notes(doc: dict) -> list[str]:
    """What could not be evaluated or carries a caution, and why, in a few lines."""
    mids = _mids(doc)
    lines = []
    counts = {"caution": 0, "not evaluable": 0, "total": 0}
    judged = [m for m in metrics_of(doc) if m in SINGLE_NUMBERS.values()]
    for p in doc["positions"]:
        for r in p["bands"]:
            for m in judged:
                v = (
                    (r.get("verdicts") or {}).get(m, "ok")
                    if r.get(m) is not None
                    else ("not evaluable")
                )
                counts["total"] += 1
                if v in counts:
                    counts[v] += 1
    lines.append(
        f"Of {counts['total']} band values ({len(doc['positions'])} positions × bands "
        f"× parameters), {counts['caution']} carry a caution and "
        f"{counts['not evaluable']} could not be evaluated; each is marked in the "
        "tables and explained in section 5."
    )
    # One line per kind of warning in the mid bands, naming where it occurs.
    where: dict[str, set[str]] = {}
    for p in doc["positions"]:
        for r in p["bands"]:
            if r["band_hz"] in mids:
                for code in r.get("warning_codes", []):
                    where.setdefault(code, set()).add(f"{p['position']} {band_label(r['band_hz'])}")
    for code, places in sorted(where.items()):
        lines.append(f"In the mid bands, {code.replace('_', ' ')}: {', '.join(sorted(places))}.")
    for err in doc.get("errors", []):
        lines.append(f"Not analysed: {err}")
    return lines


def target_rows(doc: dict, targets) -> list[list[str]]:
    """Measured average against the target range per band, honest about the uncertainty.

    Examples
    --------
    >>> import tempfile, pathlib, numpy as np, soundfile
    >>> from roomconv.study import parse_study, template_text
    >>> tmp = tempfile.TemporaryDirectory()
    >>> d = pathlib.Path(tmp.name)
    >>> rate, T = 8000, 0.5
    >>> t = np.arange(2 * rate) / rate
    >>> for i in (1, 2):
    ...     h = np.random.default_rng(i).standard_normal(t.size) * 10 ** (-3 * t / T)
    ...     soundfile.write(d / f"S1R{i}.wav", 0.5 * h, rate, subtype="DOUBLE")
    >>> study = parse_study(template_text("Hall B"), d / "study.toml")
    >>> from roomconv.report.inputs import analyse_study
    >>> res = analyse_study(study)
    >>> doc = res.analysis.document
    >>> from roomconv.study import Targets
    >>> rows = target_rows(doc, Targets(reverberation_s={500.0: 0.5, 1000.0: 0.5}))
    >>> [r[:3] for r in rows]
    [['500', '0.50', '0.40–0.60'], ['1k', '0.50', '0.40–0.60']]
    >>> tmp.cleanup()
    """
    metric = f"{targets.basis}_s"
    avg = {r["band_hz"]: r for r in doc["average"]["bands"]}
    lo, hi = targets.tolerance_pct
    rows = []
    for band, t in targets.reverberation_s.items():
        low, high = t * (1 + lo / 100), t * (1 + hi / 100)
        stat = (avg.get(band) or {}).get(metric)
        if stat is None or stat["mean"] is None:
            rows.append(
                [band_label(band), f"{t:.2f}", f"{low:.2f}–{high:.2f}", "—", "—", "not evaluated"]
            )
            continue
        m = stat["mean"]
        u = stat.get("uncertainty") or 0.0
        if low <= m <= high:
            verdict = "within"
            if m - u < low or m + u > high:
                verdict = "within (at the limit, within its uncertainty)"
        else:
            verdict = "below" if m < low else "above"
            if m + u >= low and m - u <= high:
                verdict += " (at the limit, within its uncertainty)"
        if stat.get("verdict") == "caution":
            verdict += " — caution"
        rows.append(
            [
                band_label(band),
                f"{t:.2f}",
                f"{low:.2f}–{high:.2f}",
                f"{m:.2f}",
                "—" if not u else f"{u:.2f}",
                verdict,
            ]
        )
    return rows


def _dl(pairs) -> str:
    return "<dl>" + "".join(f"<dt>{e(k)}</dt><dd>{e(v)}</dd>" for k, v in pairs if v) + "</dl>"


def _figure(fig, alt: str, caption: str, narrow: bool = False) -> str:
    cls = " class='narrow'" if narrow else ""
    return (
        f"<figure{cls}><img alt='{e(alt)}' src='{F.png_uri(fig)}'>"
        f"<figcaption>{e(caption)}</figcaption></figure>"
    )


def distortion_html(doc: dict) -> str:
    """The harmonic-distortion table of the data-quality section: per position, each order's
    level re the linear response, or its noise bound where it does not rise 3 dB above the
    noise; empty when no position has harmonic figures."""
    rows = []
    orders = ("2", "3", "4", "5")
    for p in doc["positions"]:
        d = (doc["quality"].get(p["position"]) or {}).get("distortion")
        if not d:
            continue
        by_k = {str(k): v for k, v in d["orders"].items()}
        cells = []
        for k in orders:
            o = by_k.get(k)
            if o is None or (o["level_db"] is None and not o["below_floor"]):
                cells.append("—")
            elif o["below_floor"]:
                cells.append(f"< {o['floor_db']:.0f} (noise)")
            else:
                cells.append(f"{o['level_db']:.1f}")
        total = (
            f"{d['total_db']:.1f} dB ({d['total_percent']:.2g} %)"
            if d.get("total_orders")
            else "all below noise"
        )
        rows.append([p["position"], *cells, total])
    if not rows:
        return ""
    return (
        "<h3>Harmonic distortion</h3>"
        + _html_table(
            ["position", *(f"H{k} dB" for k in orders), "total of orders above noise"], rows
        )
        + "<p class='note'>Harmonic orders 2–5 of the exponential sweep, each as the energy "
        "of its separated response at k·f relative to the linear response at f, in dB "
        "(Farina 2000). An order that does not rise 3 dB (common practice) above the "
        "deconvolved noise at the same frequencies, plus the method's own leak for the "
        "sweep used, reads as a bound: below the noise floor, &lt; that level. The total "
        "sums the orders above the floor in power.</p>"
    )


def report_html(res: StudyResults) -> str:
    """The whole report as one self-contained HTML page (no external requests).

    Examples
    --------
    Not run here (the figures take several seconds); ``tests/report/`` checks the page. With
    ``res`` from :func:`roomconv.report.inputs.analyse_study`::

        page = report_html(res)     # '<!doctype html>…', images as data URIs
    """
    sections = (
        _page_head,
        _cover,
        _summary,
        _grade,
        _method,
        _results,
        _data_quality,
        _limits,
    )
    out = [part for section in sections for part in section(res)]
    out.append("</body></html>")
    return "\n".join(out)


def _furnished_text(room) -> str:
    """', furnished', ', unfurnished' or nothing where the study does not say."""
    return "" if room.furnished is None else ", furnished" if room.furnished else ", unfurnished"


def _page_head(res: StudyResults) -> list[str]:
    """The document head: title and style sheet."""
    st = res.study
    return [
        f"<!doctype html><html lang='en'><head><meta charset='utf-8'>"
        f"<title>{e(st.title)}</title><style>{_CSS}</style></head><body>"
    ]


def _cover(res: StudyResults) -> list[str]:
    """The cover: title, client, room, dates, author and the program's version."""
    st, doc = res.study, res.analysis.document
    room = st.room
    return [
        "<section class='cover'><p class='note'>Room acoustic measurement report</p>"
        f"<h1>{e(st.title)}</h1>",
        _dl(
            [
                ("Client", st.client),
                ("Project number", st.project_number),
                ("Room", room.name + (f" ({room.use})" if room.use else "")),
                ("Measured on", ", ".join(st.dates)),
                ("Author", st.author),
                ("Prepared with", f"roomconv {doc['roomconv_version']}"),
            ]
        ),
        "</section>",
    ]


def _summary(res: StudyResults) -> list[str]:
    """Section 1: the single numbers, their notes, and the target and treatment if any."""
    st, doc = res.study, res.analysis.document
    mids = _mid_text(doc)
    rows = single_number_rows(doc)
    out = [
        "<h2>1. Summary</h2><ul class='numbers'>"
        + "".join(f"<li>{_number_line(r, mids)}</li>" for r in rows)
        + "</ul>",
        "".join(f"<p class='note'>{e(x)}</p>" for x in _evaluation_notes(doc)),
    ]
    if st.targets is not None:
        t = st.targets
        src = f" ({e(t.source)})" if t.source else ""
        out.append(f"<h3>Against the reverberation-time target{src}</h3>")
        out.append(
            _html_table(
                ["band", f"target {t.basis.upper()} s", "range s", "measured s", "u s", "result"],
                target_rows(doc, t),
            )
        )
        out.append(treatment_section(st, doc, _figure))
    return out


def _grade(res: StudyResults) -> list[str]:
    """Section 2: the ISO 3382-2 grade the positions reach and what the next one needs."""
    g = res.analysis.document["grade"]
    name = g["name"] or "below survey grade"
    out = [
        "<h2>2. Measurement grade (ISO 3382-2)</h2>",
        f"<p class='grade'>{e(name.capitalize())}</p><p>{g['sources']} source "
        f"position(s), {g['receivers']} receiver position(s), {g['combinations']} "
        "source–receiver combination(s) that gave a decay time in the mid-frequency "
        "bands.</p>",
    ]
    if g["next"]:
        out.append(f"<p>For the {e(g['next'])} grade: {e(', '.join(g['needed_for_next']))}.</p>")
    out.append(
        "<p class='note'>Least numbers per grade (ISO 3382-2:2008, Table 1, from "
        "memory): survey 1 source, 2 receivers, 2 combinations; engineering 2 sources, "
        "2 receivers, 6 combinations; precision 2 sources, 3 receivers, 12 "
        "combinations. A grade also assumes the standard's positions and distances "
        "(from walls, between microphones, from the source), which this count does "
        "not check.</p>"
    )
    return out


def _method(res: StudyResults) -> list[str]:
    """Section 3: how the responses were measured and evaluated, equipment and room."""
    return _method_list(res) + _equipment(res) + _conditions(res)


def _sweep_words(sw) -> list[str]:
    """The sweep settings the study gives, each as a short phrase."""
    return [
        x
        for x in (
            sw.f_low_hz and sw.f_high_hz and f"{sw.f_low_hz:g} Hz–{sw.f_high_hz:g} Hz",
            sw.duration_s and f"{sw.duration_s:g} s",
            sw.level_dbfs is not None and f"{sw.level_dbfs:g} dBFS",
            sw.repeats and f"{sw.repeats} repeat(s)",
            sw.silence_s is not None and f"{sw.silence_s:g} s silence after each",
            sw.rate_hz and f"{sw.rate_hz} Hz sampling",
        )
        if x
    ]


def _method_list(res: StudyResults) -> list[str]:
    """The method as a list: sweep, filters, decay evaluation, averages, calibration."""
    st, doc = res.study, res.analysis.document
    s = doc["settings"]
    mids = _mid_text(doc)
    sweep_bits = _sweep_words(st.sweep)
    out = ["<h2>3. Method</h2><ul>"]
    out.append(
        "<li>Impulse responses measured with an exponential swept sine and "
        "deconvolution (integrated impulse response method, ISO 3382-1 and "
        "ISO 3382-2)" + (f": {e(', '.join(sweep_bits))}" if sweep_bits else "") + ".</li>"
    )
    out.append(
        f"<li>{e(s['bands'].capitalize())} band filters per IEC 61260-1; "
        f"{e(s['band_filtering'])}.</li>"
    )
    # Evaluation ranges and time limits: ISO 3382-1:2009, A.2 and A.3 (from memory).
    out.append(
        f"<li>Decay curves: {e(s['decay_method'])}. Evaluation ranges (ISO 3382-1): "
        "EDT 0 to −10 dB, T20 −5 to −25 dB, T30 −5 to −35 dB; C50, C80 and D50 at 50 ms "
        "and 80 ms; onset: " + e(s["onset"]) + ".</li>"
    )
    out.append(
        "<li>Averages are arithmetic means over the positions; the uncertainty of T20 "
        "and T30 follows ISO 3382-2 from the bandwidth, the decay time and the number of "
        "positions. Single numbers are means of the " + e(mids) + " bands "
        "(ISO 3382-1, from memory).</li>"
    )
    if s.get("calibration"):
        out.append("<li>Strength G from a reference written by 'roomconv calibrate'.</li>")
    if s.get("sofa_file"):
        out.append(
            "<li>The responses are also delivered as one file in the open SOFA format "
            f"(AES69-2022): {e(s['sofa_file'])}.</li>"
        )
    out.append("<li>Verdicts: " + e(s["verdicts"]) + ".</li></ul>")
    return out


def _equipment(res: StudyResults) -> list[str]:
    """The equipment table: source, microphone and interface with their serials."""
    eq = res.study.equipment
    eq_rows = [
        [what, name_ or "—", serial or "—"]
        for what, name_, serial in (
            ("source", eq.source, eq.source_serial),
            ("microphone", eq.microphone, eq.microphone_serial),
            ("interface", eq.interface, eq.interface_serial),
        )
    ]
    return [
        "<h3>Equipment</h3><div class='words'>"
        + _html_table(["item", "type", "serial"], eq_rows)
        + "</div>"
    ]


def _conditions(res: StudyResults) -> list[str]:
    """The room and its conditions during the measurement, and the study's notes."""
    st = res.study
    room = st.room
    cond = [
        ("Room", room.name),
        ("Use", room.use),
        ("Volume", _fmt(room.volume, "{:.0f} m³", "")),
        ("Surface area", _fmt(room.surface, "{:.0f} m²", "")),
        (
            "Dimensions",
            " × ".join(f"{d:g}" for d in room.dimensions_m) + " m" if room.dimensions_m else "",
        ),
        ("State", room.state + _furnished_text(room)),
        ("Temperature", _fmt(room.temperature_c, "{:.1f} °C", "")),
        ("Relative humidity", _fmt(room.humidity_pct, "{:.0f} %", "")),
    ]
    out = ["<h3>Room and conditions</h3>" + _dl(cond)]
    if st.notes:
        out.append(f"<p>{e(st.notes)}</p>")
    return out


def _results(res: StudyResults) -> list[str]:
    """Section 4: averages, figures, positions, each position's table, further sections."""
    return (
        ["<h2>4. Results</h2>"]
        + _average_table(res)
        + _summary_figures(res)
        + _positions_table(res)
        + _position_details(res)
        + _further_sections(res)
    )


def _average_table(res: StudyResults) -> list[str]:
    """The band table averaged over the positions, mean ± standard deviation."""
    doc = res.analysis.document
    metrics = metrics_of(doc)
    n = len(doc["positions"])
    avg_rows = []
    for r in doc["average"]["bands"]:
        u = r["t30_s"].get("uncertainty")
        avg_rows.append(
            [
                band_label(r["band_hz"]),
                _pm("edt_s", r),
                _pm("t20_s", r),
                _pm("t30_s", r),
                "—" if u is None else f"{u:.3f}",
                _pm("c50_db", r),
                _pm("c80_db", r),
                _pm("d50", r),
                _pm("ts_ms", r),
            ]
            + ([_pm("g_db", r)] if "g_db" in metrics else [])
            + [str(r["t30_s"]["n"])]
        )
    return [
        f"<h3>Average over {n} position(s): mean ± standard deviation</h3>",
        _html_table(
            ["band", "EDT s", "T20 s", "T30 s", "u(T30) s", "C50 dB", "C80 dB", "D50", "Ts ms"]
            + (["G dB"] if "g_db" in metrics else [])
            + ["n"],
            avg_rows,
        ),
        "<p class='note'>⚠ caution: the value is given but a check failed (section 5); "
        "— not evaluable. n: positions with a T30.</p>",
    ]


def _summary_figures(res: StudyResults) -> list[str]:
    """Decay times, C80/D50 and frequency responses per band, and the plan of positions."""
    st, doc = res.study, res.analysis.document
    out = []
    basis = st.targets.basis if st.targets is not None else "t30"
    for m in dict.fromkeys((basis, "t30", "edt")):
        out.append(
            _figure(
                F.decay_time_figure(doc, f"{m}_s", st.targets if m == basis else None),
                f"{m.upper()} per band",
                f"{m.upper()} per band: average "
                "with its uncertainty, single positions in grey"
                + (", target range shaded" if st.targets is not None and m == basis else "")
                + ".",
            )
        )
    out.append(
        _figure(
            F.ratio_figure(doc),
            "C80 and D50 per band",
            "Clarity C80 and definition D50 per band: average ± standard deviation "
            "over positions, single positions in grey.",
        )
    )
    out.append(
        _figure(
            F.frequency_response_figure(res.irs),
            "frequency responses",
            "Magnitude of each response, 1/6-octave smoothed, relative to the loudest position.",
        )
    )
    plan = F.plan_figure(st)
    if plan is not None:
        out.append(
            _figure(plan, "plan of positions", "Source and receiver positions.", narrow=True)
        )
    return out


def _positions_table(res: StudyResults) -> list[str]:
    """Sources and receivers with their coordinates and notes."""
    st = res.study
    pos_rows = [
        [
            p.id,
            kind,
            _fmt(p.x_m, "{:.2f}"),
            _fmt(p.y_m, "{:.2f}"),
            _fmt(p.height_m, "{:.2f}"),
            p.note,
        ]
        for kind, points in (("source", st.sources), ("receiver", st.receivers))
        for p in points
    ]
    return [_html_table(["id", "kind", "x m", "y m", "height m", "note"], pos_rows)]


def _position_details(res: StudyResults) -> list[str]:
    """Each position's band table and its energy–time and decay curves."""
    doc = res.analysis.document
    metrics = metrics_of(doc)
    header = ["band"] + [HEADERS[m] for m in metrics] + ["verdict"]
    out = []
    for p in doc["positions"]:
        out.append(
            f"<div class='pos'><h3>Position {e(p['position'])}: source "
            f"{e(p['source'])}, receiver {e(p['receiver'])} ({e(p['file'])}, channel "
            f"{p['channel']})</h3>"
        )
        out.append(_html_table(header, table_rows(p, metrics)) + "</div>")
        band_res, _wide, rate = res.analysis.curves[(p["file"], p["channel"])]
        h, _ = res.irs[p["position"]]
        out.append(
            _figure(
                F.position_figure(h, rate, band_res, p["position"]),
                f"energy-time and decay curves {p['position']}",
                f"{p['position']}: energy–time curve (2 ms average in colour) and "
                "band decay curves (band marks as in the terminal workbench).",
            )
        )
    return out


def _further_sections(res: StudyResults) -> list[str]:
    """Speech intelligibility, the office line, and stage, lateral and interaural values."""
    doc = res.analysis.document
    from .speech import speech_section

    out = [speech_section(doc, "Speech intelligibility (STI)")]
    if "office" in doc:
        from .office import office_section

        out.append(office_section(doc["office"]))
    # Stage, lateral and interaural parameters, when the analysis holds them.
    out.append(layout_section_html(doc, level=3))
    return out


def _data_quality(res: StudyResults) -> list[str]:
    """Section 5: INR, flags, peak and clipping per position, distortion, warnings, notes."""
    doc = res.analysis.document
    out = ["<h2>5. Data quality per position</h2>"]
    out += _quality_table(doc)
    out.append(distortion_html(doc))
    out += _position_warnings(doc)
    for n_ in doc.get("notes", []):
        out.append(f"<p class='note'>Note: {e(n_)}</p>")
    return out


def _quality_table(doc: dict) -> list[str]:
    """One row per position: INR, flagged bands, peak, clipping and repeat mismatch."""
    q_rows = []
    for p in doc["positions"]:
        inrs = [
            r["inr_db"]
            for r in p["bands"]
            if r.get("inr_db") is not None and 125 <= r["band_hz"] <= 4000
        ]
        bad = sum(1 for r in p["bands"] if r.get("verdict") == "caution")
        na = sum(1 for r in p["bands"] if r.get("verdict") == "not evaluable")
        q = doc["quality"].get(p["position"], {})
        q_rows.append(
            [
                p["position"],
                _fmt(p["wideband"].get("inr_db"), "{:.0f}"),
                _fmt(min(inrs) if inrs else None, "{:.0f}"),
                str(bad),
                str(na),
                _fmt(q.get("peak_dbfs"), "{:+.1f}"),
                "—" if not q else str(q.get("clipped_samples")),
                _fmt(q.get("repeat_mismatch_db"), "{:.1f}"),
            ]
        )
    return [
        _html_table(
            [
                "position",
                "INR wideband dB",
                "lowest INR 125–4k dB",
                "bands with caution",
                "bands not evaluable",
                "peak dBFS",
                "clipped samples",
                "repeat mismatch dB",
            ],
            q_rows,
        ),
        "<p class='note'>INR: impulse-to-noise ratio. Peak, clipping and repeat mismatch "
        "come from the measurement's quality file where the study names one. Needed "
        "INR (common practice, after ISO 3382-1 evaluation ranges): EDT 20 dB, "
        "T20 35 dB, T30 45 dB.</p>",
    ]


def _position_warnings(doc: dict) -> list[str]:
    """The analysis' and the measurement's warnings, listed under each position."""
    out = []
    for p in doc["positions"]:
        ws = [w for r in p["bands"] + [p["wideband"]] for w in r["warnings"]]
        ws += [
            f"measurement: {w}" for w in doc["quality"].get(p["position"], {}).get("warnings", [])
        ]
        if ws:
            out.append(
                f"<h3>{e(p['position'])}</h3><ul>"
                + "".join(f"<li class='flagtext'>⚠ {e(w)}</li>" for w in ws)
                + "</ul>"
            )
    return out


def _limits(res: StudyResults) -> list[str]:
    """Section 6: what the results do not say, ending with licensed practice and codes."""
    room = res.study.room
    return [
        "<h2>6. Limits of these results</h2><ul>"
        f"<li>The values describe the room in the state measured ({e(room.state)}"
        + _furnished_text(room)
        + ") at the positions listed, on the dates given; "
        "another occupancy, furnishing or temperature changes them.</li>"
        "<li>Values marked ⚠ are given with a caution and values shown as — could not "
        "be evaluated; neither should be used without reading section 5.</li>"
        "<li>The measurement grade counts positions only; it does not confirm that the "
        "positions, the source or the microphone meet every requirement of "
        "ISO 3382-2.</li>"
        "<li>These are measured results, not a design; decisions on treatment, "
        "compliance or use rest with the responsible licensed professional and the "
        "local codes and regulations.</li></ul>"
    ]
