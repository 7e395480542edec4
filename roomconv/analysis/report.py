"""Writers for analysis results: a terminal table, CSV, and a self-contained HTML report
with decay-curve and per-band plots (matplotlib, embedded as PNG data).
"""

from __future__ import annotations

import base64
import csv
import html
import io

import numpy as np

from ..safety import caution_text
from .parameters import CAUTION, METRICS, NOT_EVALUABLE, OK

HEADERS = {
    "edt_s": "EDT s",
    "t20_s": "T20 s",
    "t30_s": "T30 s",
    "c50_db": "C50 dB",
    "c80_db": "C80 dB",
    "d50": "D50",
    "ts_ms": "Ts ms",
    "inr_db": "INR dB",
    "xi_permille": "ξ ‰",
    "curvature_pct": "Curvature %",
    "g_db": "G dB",
}
#: The single numbers in words (mean of the 500 Hz and 1 kHz octaves, or the six
#: third-octaves 400 Hz–1.25 kHz).
SINGLE_NUMBER_NAMES = {
    "edt_mid_s": ("Early decay time EDT", "s", "{:.2f}"),
    "t20_mid_s": ("Reverberation time T20", "s", "{:.2f}"),
    "t30_mid_s": ("Reverberation time T30", "s", "{:.2f}"),
    "c50_mid_db": ("Clarity C50", "dB", "{:+.1f}"),
    "c80_mid_db": ("Clarity C80", "dB", "{:+.1f}"),
    "d50_mid": ("Definition D50", "", "{:.2f}"),
    "ts_mid_ms": ("Centre time Ts", "ms", "{:.0f}"),
    "g_mid_db": ("Strength G", "dB", "{:+.1f}"),
}
#: Marks beside a value in text tables: flagged values are visibly flagged.
MARK = {OK: "", CAUTION: "*", NOT_EVALUABLE: ""}
LEGEND = (
    "* caution: the value is given but a check failed (see the warnings); — not "
    "evaluable (the warnings say why)"
)
_FMT = {
    "edt_s": "{:.2f}",
    "t20_s": "{:.2f}",
    "t30_s": "{:.2f}",
    "c50_db": "{:+.1f}",
    "c80_db": "{:+.1f}",
    "d50": "{:.2f}",
    "ts_ms": "{:.0f}",
    "inr_db": "{:.0f}",
    "xi_permille": "{:.1f}",
    "curvature_pct": "{:+.1f}",
    "g_db": "{:+.1f}",
}


def fmt(metric: str, value) -> str:
    """A value formatted for tables with the metric's precision; ``"—"`` for a missing one.

    Examples
    --------
    >>> fmt("t30_s", 1.234), fmt("c80_db", -0.46), fmt("d50", None)
    ('1.23', '-0.5', '—')
    """
    return "—" if value is None else _FMT[metric].format(value)


def band_label(band_hz) -> str:
    """A band's short label from its nominal centre in Hz (``None``: the unfiltered row,
    "broadband"; the JSON key stays ``wideband``).

    Examples
    --------
    >>> band_label(125.0), band_label(2000.0), band_label(None)
    ('125', '2k', 'broadband')
    """
    if band_hz is None:
        return "broadband"
    return f"{band_hz / 1000:g}k" if band_hz >= 1000 else f"{band_hz:g}"


_JUDGED = ("edt_s", "t20_s", "t30_s", "c50_db", "c80_db", "d50", "ts_ms", "g_db")


def metrics_of(doc) -> tuple[str, ...]:
    """The metric keys a study document holds, in column order (G only when calibrated).

    Examples
    --------
    >>> "g_db" in metrics_of({"settings": {"calibration": None}})
    False
    """
    return METRICS + (("g_db",) if doc["settings"].get("calibration") is not None else ())


def value_verdict(row: dict, metric: str) -> str:
    """The verdict of one value in a band row (its own, else the band's).

    Examples
    --------
    >>> value_verdict({"t30_s": 1.2, "verdicts": {"t30_s": "caution"}}, "t30_s")
    'caution'
    >>> value_verdict({"t30_s": None}, "t30_s")
    'not evaluable'
    """
    if row.get(metric) is None:
        return NOT_EVALUABLE
    return (row.get("verdicts") or {}).get(metric, OK)


def marked(row: dict, metric: str) -> str:
    """The formatted value with its caution mark.

    Examples
    --------
    >>> marked({"c80_db": 1.26, "verdicts": {"c80_db": "caution"}}, "c80_db")
    '+1.3*'
    """
    return fmt(metric, row.get(metric)) + MARK[value_verdict(row, metric)]


def table_rows(position: dict, metrics) -> list[list[str]]:
    """One table row per band of a position (and its wideband row): the band label,
    each metric's value with its caution mark, and the band's verdict.

    Parameters
    ----------
    position : dict
        One entry of the study document's ``positions``.
    metrics : sequence of str
        Metric keys, in column order.

    Returns
    -------
    list of list of str

    Examples
    --------
    >>> row = {"band_hz": 1000.0, "t30_s": 1.23, "verdicts": {"t30_s": "caution"},
    ...        "verdict": "caution"}
    >>> table_rows({"bands": [row], "wideband": dict(row, band_hz=None)}, ["t30_s"])
    [['1k', '1.23*', 'caution'], ['broadband', '1.23*', 'caution']]
    """
    rows = []
    for r in position["bands"] + [position["wideband"]]:
        rows.append(
            [band_label(r["band_hz"])] + [marked(r, m) for m in metrics] + [r.get("verdict", "")]
        )
    return rows


def single_number_lines(doc: dict) -> list[str]:
    """The mid-frequency single numbers in words, with units and verdicts.

    Examples
    --------
    >>> doc = {"settings": {"bands": "octave"}, "average": {"single_numbers": {
    ...     "t30_mid_s": 1.234}, "single_number_verdicts": {"t30_mid_s": "ok"}}}
    >>> single_number_lines(doc)
    ['Reverberation time T30, mean of 500 Hz and 1 kHz: 1.23 s']
    """
    sn = doc["average"]["single_numbers"]
    verdicts = doc["average"].get("single_number_verdicts", {})
    mids = "500 Hz and 1 kHz" if doc["settings"]["bands"] == "octave" else "400 Hz–1.25 kHz"
    out = []
    for key, v in sn.items():
        name, unit, f = SINGLE_NUMBER_NAMES[key]
        text = "not evaluable" if v is None else f"{f.format(v)} {unit}".strip()
        verdict = verdicts.get(key, OK)
        note = " (caution: see the band warnings)" if verdict == CAUTION and v is not None else ""
        out.append(f"{name}, mean of {mids}: {text}{note}")
    return out


def mean_with_spread(metric, row) -> str:
    """An averaged value as ``mean±std`` with its caution mark (— when not evaluable).

    Examples
    --------
    >>> mean_with_spread("t30_s", {"t30_s": {"mean": 1.25, "std": 0.04, "verdict": "ok"}})
    '1.25±0.04'
    """
    s = row[metric]
    if s["mean"] is None:
        return "—"
    txt = fmt(metric, s["mean"])
    txt += f"±{_FMT[metric].format(s['std']).lstrip('+')}" if s["std"] is not None else ""
    return txt + MARK.get(s.get("verdict") or OK, "")


def csv_text(doc: dict) -> str:
    """One row per position × band (wideband as band 'wideband'), then the averages.

    The stage, lateral and interaural columns appear only when the document holds them.

    Examples
    --------
    >>> from roomconv.analysis.study import analyse_arrays
    >>> rate, T = 8000, 0.6
    >>> t = np.arange(int(1.5 * rate)) / rate
    >>> h = np.random.default_rng(0).standard_normal(t.size) * 10 ** (-3 * t / T)
    >>> lines = csv_text(analyse_arrays([("hall.wav", h[:, None], rate)]).document).splitlines()
    >>> lines[0].split(",")[:6]
    ['file', 'channel', 'band_hz', 'edt_s', 't20_s', 't30_s']
    >>> lines[1].split(",")[:3]
    ['hall.wav', '1', '31.5']
    """
    from .layouts import keys_of

    extra = keys_of(doc)
    metrics = metrics_of(doc) + extra
    buf = io.StringIO()
    w = csv.writer(buf, lineterminator="\n")
    judged = [m for m in metrics if m in _JUDGED or m in extra]
    w.writerow(
        ["file", "channel", "band_hz"]
        + list(metrics)
        + ["verdict"]
        + [f"{m}_verdict" for m in judged]
        + ["warning_codes", "warnings"]
    )
    for p in doc["positions"]:
        for r in p["bands"] + [p["wideband"]]:
            w.writerow(
                [p["file"], p["channel"], "wideband" if r["band_hz"] is None else r["band_hz"]]
                + ["" if r.get(m) is None else f"{r[m]:.6g}" for m in metrics]
                + [r.get("verdict", "")]
                + [value_verdict(r, m) for m in judged]
                + [" ".join(r.get("warning_codes", [])), " | ".join(r["warnings"])]
            )
    for r in doc["average"]["bands"]:
        row = ["average", "", r["band_hz"]]
        row += [
            "" if (r.get(m) or {}).get("mean") is None else f"{r[m]['mean']:.6g}" for m in metrics
        ]
        row.append("")
        row += [(r.get(m) or {}).get("verdict") or "" for m in judged]
        row += ["", ""]
        w.writerow(row)
    return buf.getvalue()


# --- HTML ----------------------------------------------------------------------------------
def _png(fig) -> str:
    buf = io.BytesIO()
    fig.savefig(buf, format="png", dpi=96, bbox_inches="tight")
    return "data:image/png;base64," + base64.b64encode(buf.getvalue()).decode("ascii")


def decay_figure(results, rate: int, title: str):
    """A matplotlib figure of the decay curves (dB from the onset) of a position's bands.

    Parameters
    ----------
    results : sequence of BandResult
        Band results with their ``curve_db``.
    rate : int
        Sample rate of the curves, Hz.
    title : str
        The figure's title.

    Returns
    -------
    matplotlib.figure.Figure

    Examples
    --------
    >>> from roomconv.analysis.parameters import BandResult
    >>> r = BandResult(1000.0, curve_db=-60 * np.arange(800) / 800)
    >>> decay_figure([r], 1000, "one band").axes[0].get_title()
    'one band'
    """
    from matplotlib.figure import Figure  # lazy: only reports need matplotlib

    fig = Figure(figsize=(8, 4.2))
    ax = fig.add_subplot(111)
    import matplotlib

    cmap = matplotlib.colormaps["viridis"]
    for i, r in enumerate(results):
        if r.curve_db is None:
            continue
        t = np.arange(r.curve_db.size) / rate
        ax.plot(
            t,
            r.curve_db,
            lw=1.2,
            color=cmap(i / max(1, len(results) - 1)),
            label=band_label(r.band_hz),
        )
    ax.set_ylim(-70, 2)
    ax.set_xlabel("time after onset (s)")
    ax.set_ylabel("decay (dB)")
    ax.set_title(title)
    ax.grid(alpha=0.3)
    if ax.get_legend_handles_labels()[0]:
        ax.legend(ncol=5, fontsize=7, loc="upper right")
    return fig


def band_figure(doc: dict, metric: str, ylabel: str, extra: dict | None = None):
    """Per-band values of ``metric`` at every position, the average with error bars, and
    optional extra series {label: {band_hz: value}} (e.g. a prediction).

    Examples
    --------
    >>> doc = {"positions": [], "average": {"bands": [{"band_hz": 1000.0,
    ...     "t30_s": {"mean": 1.2, "std": 0.05}}]}}
    >>> band_figure(doc, "t30_s", "T30 (s)").axes[0].get_ylabel()
    'T30 (s)'
    """
    from matplotlib.figure import Figure

    fig = Figure(figsize=(8, 3.6))
    ax = fig.add_subplot(111)
    for p in doc["positions"]:
        xs = [r["band_hz"] for r in p["bands"] if r.get(metric) is not None]
        ys = [r[metric] for r in p["bands"] if r.get(metric) is not None]
        ax.plot(xs, ys, "o", ms=3, alpha=0.4, color="tab:gray")
    avg = [r for r in doc["average"]["bands"] if r[metric]["mean"] is not None]
    if avg:
        err = [r[metric].get("uncertainty") or r[metric]["std"] or 0 for r in avg]
        ax.errorbar(
            [r["band_hz"] for r in avg],
            [r[metric]["mean"] for r in avg],
            yerr=err,
            fmt="-o",
            color="tab:blue",
            capsize=3,
            label="average",
        )
    colours = ("tab:green", "tab:orange", "tab:red", "tab:purple")
    # One colour each: series beyond the fourth are not drawn.
    for (label, series), colour in zip((extra or {}).items(), colours, strict=False):
        ks = sorted(series)
        ax.plot(ks, [series[k] for k in ks], "--s", ms=4, color=colour, label=label)
    ax.set_xscale("log")
    bands = sorted({r["band_hz"] for r in doc["average"]["bands"]})
    ax.set_xticks(bands)
    ax.set_xticklabels([band_label(b) for b in bands], fontsize=7)
    ax.minorticks_off()
    ax.set_xlabel("band (Hz)")
    ax.set_ylabel(ylabel)
    ax.grid(alpha=0.3)
    if ax.get_legend_handles_labels()[0]:
        ax.legend(fontsize=8)
    return fig


def _cell(c: str) -> str:
    if c.endswith("*"):
        return (
            f"<td class='flag' title='caution: see the warnings below'>"
            f"{html.escape(c[:-1])}&nbsp;⚠</td>"
        )
    if c == "—":
        return "<td class='na' title='not evaluable: see the warnings below'>—</td>"
    if c == CAUTION:
        return f"<td class='flag'>{html.escape(c)}</td>"
    return f"<td>{html.escape(c)}</td>"


def _html_table(header, rows) -> str:
    h = "".join(f"<th>{html.escape(c)}</th>" for c in header)
    body = "".join("<tr>" + "".join(_cell(c) for c in r) + "</tr>" for r in rows)
    return f"<table><thead><tr>{h}</tr></thead><tbody>{body}</tbody></table>"


_CSS = """body{font-family:system-ui,sans-serif;max-width:1000px;margin:2em auto;color:#222}
table{border-collapse:collapse;font-size:13px;margin:0.5em 0}td,th{border:1px solid #ccc;
padding:2px 6px;text-align:right}th{background:#eef}h1{font-size:1.5em}h2{margin-top:1.6em}
.warn{color:#a40}td.flag{background:#ffe2b8;font-weight:600}td.na{color:#999}\
.caution{background:#fff4e0;border:1px solid #e0a040;padding:0.6em;
white-space:pre-wrap;font-size:12px}img{max-width:100%}"""


def html_report(
    study,
    *,
    title: str = "Room acoustic parameters",
    sections=(),
    extra_series: dict | None = None,
    cautions: bool = True,
) -> str:
    """A self-contained HTML page: ``sections`` are (heading, trusted HTML) placed first.

    ``cautions`` ends the page with the playback caution, for pages that also offer sound
    (the demo's renders); a page of results alone leaves it out.

    Examples
    --------
    >>> from roomconv.analysis.study import analyse_arrays
    >>> rate, T = 8000, 0.6
    >>> t = np.arange(int(1.5 * rate)) / rate
    >>> h = np.random.default_rng(0).standard_normal(t.size) * 10 ** (-3 * t / T)
    >>> page = html_report(analyse_arrays([("hall.wav", h[:, None], rate)]), title="Hall")
    >>> "<title>Hall</title>" in page, "data:image/png;base64," in page
    (True, True)
    """
    doc = study.document
    metrics = metrics_of(doc)
    header = ["band"] + [HEADERS[m] for m in metrics] + ["verdict"]
    out = [
        f"<!doctype html><html><head><meta charset='utf-8'><title>{html.escape(title)}"
        f"</title><style>{_CSS}</style></head><body><h1>{html.escape(title)}</h1>",
        f"<p>roomconv {html.escape(doc['roomconv_version'])}; {doc['settings']['bands']} "
        f"bands; {html.escape(doc['settings']['decay_method'])}.</p>",
    ]
    for heading, body in sections:
        out.append(f"<h2>{html.escape(heading)}</h2>{body}")
    out.append(
        "<h2>Headline figures</h2><ul>"
        + "".join(f"<li>{html.escape(line)}</li>" for line in single_number_lines(doc))
        + "</ul>"
    )
    out.append(f"<p>{html.escape(LEGEND.replace('*', '⚠'))}</p>")
    if "sti" in doc["average"]:
        from ..report.speech import speech_section

        out.append(speech_section(doc))
    if len(doc["positions"]) > 1:
        rows = []
        for r in doc["average"]["bands"]:
            u = r["t30_s"].get("uncertainty")
            rows.append(
                [
                    band_label(r["band_hz"]),
                    mean_with_spread("edt_s", r),
                    mean_with_spread("t20_s", r),
                    mean_with_spread("t30_s", r),
                    "—" if u is None else f"{u:.3f}",
                    mean_with_spread("c80_db", r),
                    mean_with_spread("d50", r),
                    mean_with_spread("ts_ms", r),
                    str(r["t30_s"]["n"]),
                ]
            )
        out.append(f"<h2>Average over {len(doc['positions'])} positions</h2>")
        out.append(
            _html_table(
                ["band", "EDT s", "T20 s", "T30 s", "u(T30) s", "C80 dB", "D50", "Ts ms", "n"], rows
            )
        )
    t30_png = _png(band_figure(doc, "t30_s", "T30 (s)", extra_series))
    out.append(f"<img alt='T30 per band' src='{t30_png}'>")
    out.append(f"<img alt='EDT per band' src='{_png(band_figure(doc, 'edt_s', 'EDT (s)'))}'>")
    out.append(f"<img alt='C80 per band' src='{_png(band_figure(doc, 'c80_db', 'C80 (dB)'))}'>")
    for p in doc["positions"]:
        out.append(f"<h2>{html.escape(str(p['file']))} — channel {p['channel']}</h2>")
        out.append(_html_table(header, table_rows(p, metrics)))
        ws = [w for r in p["bands"] + [p["wideband"]] for w in r["warnings"]]
        out += [f"<p class='warn'>⚠ {html.escape(w)}</p>" for w in ws]
        res, _wide, rate = study.curves[(str(p["file"]), p["channel"])]
        fig = decay_figure(res, rate, f"Decay curves, {p['file']} ch {p['channel']}")
        out.append(f"<img alt='decay curves' src='{_png(fig)}'>")
    out.append(layout_section_html(doc))
    for n in doc.get("notes", []):
        out.append(f"<p>note: {html.escape(n)}</p>")
    for e in doc.get("errors", []):
        out.append(f"<p class='warn'>error: {html.escape(e)}</p>")
    if cautions:
        out.append(f"<h2>Cautions</h2><div class='caution'>{html.escape(caution_text())}</div>")
    out.append("</body></html>")
    return "\n".join(out)


def layout_section_html(doc: dict, level: int = 2) -> str:
    """An HTML section with each position's stage, lateral or interaural parameters, their
    single numbers and notes; empty when the document holds none.

    Parameters
    ----------
    doc : dict
        The analysis document: ``settings`` (its ``channels`` text), ``positions`` (after
        :func:`~roomconv.analysis.layouts.extend_position`) and optionally ``average``.
    level : int
        Heading level of the section (positions get ``level + 1``).

    Returns
    -------
    str
        HTML, every text escaped; "" without layout parameters.

    Examples
    --------
    >>> doc = {"settings": {"channels": "stage"}, "positions": [{
    ...     "file": "stage_a.wav", "layout": "stage",
    ...     "bands": [{"band_hz": 500.0, "st_early_db": -12.04, "verdicts": {}}],
    ...     "layout_single_numbers": {"st_early_avg_db": -12.0},
    ...     "layout_single_number_verdicts": {"st_early_avg_db": "ok"}}]}
    >>> lines = layout_section_html(doc).splitlines()
    >>> for line in lines[:3]:
    ...     print(line)
    <h2>Stage, lateral and interaural parameters (ISO 3382-1)</h2>
    <p>stage</p>
    <h3>stage_a.wav — stage</h3>
    >>> "<tr><td>500</td><td>-12.0</td></tr>" in lines[3], lines[4]
    (True, '<ul><li>Early support ST_early, mean of 250 Hz–2 kHz: -12.0 dB</li></ul>')
    >>> layout_section_html({"positions": []})
    ''
    """
    from .layouts import keys_of, layout_table
    from .layouts import single_number_lines as layout_lines

    if not keys_of(doc):
        return ""
    e = html.escape
    out = [
        f"<h{level}>Stage, lateral and interaural parameters (ISO 3382-1)</h{level}>",
        f"<p>{e(doc['settings'].get('channels', ''))}</p>",
    ]
    for p in doc["positions"]:
        if "layout" not in p:
            continue
        header, rows = layout_table(p)
        out.append(f"<h{level + 1}>{e(str(p['file']))} — {e(p['layout'])}</h{level + 1}>")
        out.append(_html_table(header, rows))
        lines = layout_lines(
            p["layout_single_numbers"],
            p["layout_single_number_verdicts"],
            p.get("layout_single_number_reasons"),
        )
        out.append("<ul>" + "".join(f"<li>{e(x)}</li>" for x in lines) + "</ul>")
        out += [f"<p class='note'>note: {e(n)}</p>" for n in p.get("layout_notes", [])]
    avg = doc.get("average", {}).get("layout_single_numbers")
    if avg and len([p for p in doc["positions"] if "layout" in p]) > 1:
        lines = layout_lines(avg["values"], avg["verdicts"])
        out.append(
            f"<p>Mean over positions:</p><ul>{''.join(f'<li>{e(x)}</li>' for x in lines)}</ul>"
        )
    return "\n".join(out)
