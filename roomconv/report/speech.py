"""The speech-intelligibility section of a report: STI per position and averaged
(IEC 60268-16 indirect method), the conditions assumed, and the cautions."""

from __future__ import annotations

import html

e = html.escape

__all__ = ["speech_section"]

_OCTAVES = ("125", "250", "500", "1k", "2k", "4k", "8k")


def _v(x, spec="{:.2f}"):
    return "—" if x is None else spec.format(x)


def speech_section(doc: dict, heading: str = "Speech intelligibility (STI)") -> str:
    """An HTML fragment with its own ``<h2>``; empty when the document has no STI."""
    avg = doc.get("average", {}).get("sti")
    if avg is None:
        return ""
    st = doc["settings"]["sti"]
    out = [f"<h2>{e(heading)}</h2>"]
    if avg["value"] is None:
        out.append(f"<p>STI not evaluable: {e(avg['reason'] or '')}.</p>")
    else:
        spread = "" if avg["std"] is None else f" (± {avg['std']:.2f}, lowest {avg['min']:.2f})"
        out.append(
            f"<p><b>STI {avg['value']:.2f}</b>{e(spread)} over {avg['n']} position(s); "
            f"qualification band {e(avg['band'])} (IEC 60268-16 Annex F).</p>"
        )
    for w in avg["warnings"]:
        out.append(f"<p class='flagtext'>⚠ {e(w)}</p>")
    rows = []
    for p in doc["positions"]:
        s = p.get("sti")
        if s is None:
            continue
        name = p.get("position") or f"{p['file']} ch{p['channel']}"
        cells = [e(str(name)), _v(s["value"]), e(s["band"] or "—")]
        cells += [_v(m) for m in s["mti"]]
        note = "; ".join(s["warnings"])
        rows.append(
            "<tr>"
            + "".join(f"<td>{c}</td>" for c in cells)
            + f"<td class='flagtext' style='text-align:left'>{e(note)}</td></tr>"
        )
    out.append(
        "<table><tr><th>position</th><th>STI</th><th>band</th>"
        + "".join(f"<th>MTI {b}</th>" for b in _OCTAVES)
        + "<th>note</th></tr>"
        + "".join(rows)
        + "</table>"
    )
    noise = st["noise_octaves_db"]
    out.append(
        "<p class='note'>Method: "
        + e(st["edition"])
        + f"; modulation transfer from each response by Schroeder's formula, "
        f"{'STIPA modulation frequencies' if st['stipa'] else '14 modulation frequencies'}, "
        f"{e(st['voice'])} weighting, auditory masking and reception threshold. Speech: "
        + e(st["origin"])
        + (
            "; background noise "
            + ", ".join(f"{x:g}" for x in noise)
            + f" dB in the octaves 125 Hz–8 kHz ({st['noise_level_dba']:.1f} dB(A))"
            if noise
            else "; no background noise"
        )
        + f". A response needs an INR of {st['min_inr_db']:g} dB in every octave for a "
        "value. A difference of 0.03 is about the smallest a listener notices (Galbrun & "
        "Kitapci 2014).</p>"
    )
    for c in doc.get("cautions", []):
        out.append(f"<p class='flagtext'>{e(c)}</p>")
    return "\n".join(out)
