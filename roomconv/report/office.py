"""The open-plan office page (ISO 3382-3): speech level and STI against distance with their
regression lines, the single numbers, the positions and the cautions."""

from __future__ import annotations

import html

import numpy as np

from . import figures as F

e = html.escape

__all__ = ["office_html", "level_figure", "sti_figure", "office_section"]

_CSS = """
html { font-family: "DejaVu Sans", system-ui, sans-serif; color: #1d2b36; font-size: 10pt; }
body { max-width: 60em; margin: 1.5em auto; padding: 0 1em; }
h1, h2 { color: #0f6e74; } h2 { border-bottom: 1px solid #cfd8dc; }
table { border-collapse: collapse; font-size: 8.5pt; margin: 0.4em 0 0.8em; }
td, th { border: 1px solid #cfd8dc; padding: 1px 5px; text-align: right; }
th { background: #e6f0f1; } td:first-child, th:first-child { text-align: left; }
td.na { color: #8a97a3; } .flagtext { color: #8a3a0f; }
figure { margin: 0.6em 0; } figure img { width: 100%; }
figcaption { font-size: 8.5pt; color: #556; }
.caution { border-left: 4px solid #c2571a; padding: 0.3em 0.8em; background: #fbf1ea; }
"""


def _fit_range(doc):
    lo, hi = doc["office"]["fit_range_m"]
    return lo, hi


def level_figure(doc: dict):
    """A-weighted speech level against distance (log axis) with the fitted line."""
    fig, (ax,) = F._figure(6.0, 3.2)
    pos = [p for p in doc["positions"] if p["speech_level_a_db"] is not None]
    used = doc["office"]["level_fit"]
    r = np.array([p["distance_m"] for p in pos])
    L = np.array([p["speech_level_a_db"] for p in pos])
    ax.semilogx(r, L, "o", color=F.POSITION, label="positions")
    o = doc["office"]
    if o["d2s_db"] is not None and used["slope"] is not None:
        lo, hi = _fit_range(doc)
        x = np.geomspace(lo, hi, 50)
        ax.semilogx(
            x,
            used["intercept"] + used["slope"] * np.log10(x),
            color=F.AVERAGE,
            label=f"fit: D2,S {o['d2s_db']:.1f} dB, Lp,A,S,4m {o['lp_a_s_4m_db']:.1f} dB",
        )
    ax.axhline(doc["settings"]["comfort_level_db"], color=F.TARGET_EDGE, ls="--", lw=0.8)
    ticks = [x for x in (1, 2, 4, 8, 16, 32) if r.size and r.min() / 1.5 <= x <= r.max() * 1.5]
    ax.set_xticks(ticks)
    ax.set_xticklabels([f"{x:g}" for x in ticks])
    ax.minorticks_off()
    ax.set_xlabel("distance from the talker, m")
    ax.set_ylabel("speech level, dB(A)")
    ax.legend(fontsize=7)
    return fig


def sti_figure(doc: dict):
    """STI against distance with the fitted line and the 0.50 / 0.20 levels."""
    fig, (ax,) = F._figure(6.0, 3.2)
    pos = [p for p in doc["positions"] if p["sti"]["value"] is not None]
    r = np.array([p["distance_m"] for p in pos])
    s = np.array([p["sti"]["value"] for p in pos])
    ax.plot(r, s, "o", color=F.POSITION, label="positions")
    fit = doc["office"]["sti_fit"]
    if fit["slope"] is not None:
        lo, hi = _fit_range(doc)
        x = np.linspace(lo, hi, 20)
        ax.plot(x, fit["intercept"] + fit["slope"] * x, color=F.AVERAGE, label="fit")
    for level, name in ((0.5, "rD"), (0.2, "rP")):
        ax.axhline(level, color=F.TARGET_EDGE, ls="--", lw=0.8)
        ax.text(ax.get_xlim()[1], level, f" {name}", va="center", fontsize=7)
    ax.set_ylim(0, 1)
    ax.set_xlabel("distance from the talker, m")
    ax.set_ylabel("STI")
    ax.legend(fontsize=7)
    return fig


def _num(v, unit, spec="{:.1f}"):
    return "not evaluable" if v is None else spec.format(v) + unit


def office_section(doc: dict) -> str:
    """The office results as an HTML fragment (heading level 2)."""
    o = doc["office"]
    good = o["good_office"]
    rows = [
        ("D2,S, spatial decay of speech per distance doubling", _num(o["d2s_db"], " dB"),
         f"≥ {good['d2s_db']:g} dB", "d2s_db"),
        ("Lp,A,S,4m, speech level at 4 m", _num(o["lp_a_s_4m_db"], " dB(A)"),
         f"≤ {good['lp_a_s_4m_db']:g} dB(A)", "lp_a_s_4m_db"),
        ("rD, distraction distance (STI 0.50)", _num(o["r_d_m"], " m"),
         f"≤ {good['r_d_m']:g} m", "r_d_m"),
        ("rC, comfort distance (45 dB(A))", _num(o["r_c_m"], " m"), "", "r_c_m"),
        ("rP, privacy distance (STI 0.20; 2012 edition)", _num(o["r_p_m"], " m"), "", "r_p_m"),
    ]  # fmt: skip
    out = [
        f"<h2>Open-plan office ({e(o['edition'])})</h2>",
        "<table><tr><th>single number</th><th>value</th>"
        "<th>good office (ISO 3382-3 Annex A)</th><th>why none</th></tr>",
    ]
    for name, value, good_text, key in rows:
        why = o["reasons"].get(key, "")
        out.append(
            f"<tr><td>{e(name)}</td><td>{e(value)}</td><td>{e(good_text)}</td>"
            f"<td class='na'>{e(why)}</td></tr>"
        )
    out.append("</table>")
    for w in o["warnings"]:
        out.append(f"<p class='flagtext'>{e(w)}</p>")
    out.append(
        f"<figure><img alt='speech level against distance' src='{F.png_uri(level_figure(doc))}'>"
        "<figcaption>A-weighted speech level (normal effort) against distance; the line is "
        f"the regression over {o['fit_range_m'][0]:g}–{o['fit_range_m'][1]:g} m, the dashed "
        "line 45 dB(A) (comfort distance).</figcaption></figure>"
    )
    out.append(
        f"<figure><img alt='STI against distance' src='{F.png_uri(sti_figure(doc))}'>"
        "<figcaption>STI against distance with the regression line; dashed: 0.50 (rD) and "
        "0.20 (rP).</figcaption></figure>"
    )
    out.append(
        "<table><tr><th>position</th><th>distance m</th><th>speech dB(A)</th><th>STI</th>"
        "<th>band</th><th>note</th></tr>"
    )
    for p in doc["positions"]:
        s = p["sti"]
        lvl = p["speech_level_a_db"]
        sti_text = "—" if s["value"] is None else f"{s['value']:.2f}"
        out.append(
            f"<tr><td>{e(p['source'])}–{e(p['receiver'])}</td><td>{p['distance_m']:.2f}</td>"
            f"<td>{'—' if lvl is None else f'{lvl:.1f}'}</td>"
            f"<td>{sti_text}</td>"
            f"<td>{e(s['band'] or '—')}</td>"
            f"<td class='na'>{e('; '.join(s['warnings']))}</td></tr>"
        )
    out.append("</table>")
    st = doc["settings"]
    noise = st["background_noise_octaves_db"]
    out.append(
        "<p>Speech levels: " + e(st["speech_1m_source"]) + ", moved to each position by "
        + e(st["speech_level_from"]) + ". STI: " + e(st["sti_edition"]) + ", "
        + e(st["voice"]) + " weighting, "
        + ("background noise " + ", ".join(f"{x:g}" for x in noise) + " dB (125 Hz–8 kHz)"
           if noise else "no background noise given")
        + ".</p>"
    )  # fmt: skip
    for n in doc.get("notes", []):
        out.append(f"<p class='flagtext'>{e(n)}</p>")
    for c in doc.get("cautions", []):
        out.append(f"<p class='caution'>{e(c)}</p>")
    return "\n".join(out)


def office_html(doc: dict) -> str:
    """A self-contained page (no external requests)."""
    return (
        "<!doctype html><html lang='en'><head><meta charset='utf-8'>"
        f"<title>{e(doc['title'])}: open-plan office</title><style>{_CSS}</style></head><body>"
        f"<h1>{e(doc['title'])}</h1><p>{e(doc['room'])}</p>"
        + office_section(doc)
        + f"<p class='na'>roomconv {e(doc['roomconv_version'])}</p></body></html>"
    )
