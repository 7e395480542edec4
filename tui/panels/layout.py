"""Channel-layout panel: what the channels of each response file are, and the spatial and
stage parameters an analysis found (ST_early, ST_late, J_LF, J_LFC, L_J, IACC)."""

from __future__ import annotations

from pathlib import Path

from rich.table import Table
from rich.text import Text
from textual import on
from textual.app import ComposeResult
from textual.containers import Horizontal, Vertical
from textual.widgets import Label, Select, Static

from roomconv.analysis.layouts import (
    AMBISONIC,
    HEADERS,
    LATERAL_ORDERS,
    SINGLE_NAMES,
    layout_table,
    parse_layout,
    single_number_lines,
)
from roomconv.analysis.parameters import CAUTION
from tui.panels._text import plain

__all__ = ["ChannelLayoutPanel", "LAYOUT_CHOICES"]

#: (label shown, value) of the layouts offered; "plain" leaves every channel a position.
LAYOUT_CHOICES = (
    ("plain: every channel its own position", "plain"),
    ("omni + figure-of-eight (ch1 omni)", LATERAL_ORDERS[0]),
    ("figure-of-eight + omni (ch1 figure-of-eight)", LATERAL_ORDERS[1]),
    ("first-order ambisonic, ACN/SN3D", AMBISONIC),
    ("binaural: left ear, right ear", "binaural"),
    ("stage: each channel 1 m from the source", "stage"),
)
#: Words that mark a band warning as one about the layout parameters (the others concern the
#: ISO 3382 decay parameters, which the analysis table shows).
_LAYOUT_WORDS = ("ST_", "ST is", "IACC", "J_LF", "L_J", "ears", "figure-of-eight", "ambisonic")
_LEGEND = "* caution (see the warnings below)   — not evaluable"


class ChannelLayoutPanel(Vertical):
    """Choose the channel layout and show the layout parameters of an analysis.

    ``analysis_kwargs()`` gives ``channels``, ``binaural`` and ``stage`` for
    :func:`roomconv.jobs.analyze.analyze_study`; ``show(document)`` the per-band values and
    the averaged single numbers with their verdict marks.
    """

    #: The last results shown, as plain text.
    shown_text: str = ""
    #: The status line's text.
    status_text: str = ""

    DEFAULT_CSS = """
    ChannelLayoutPanel { height: auto; }
    ChannelLayoutPanel Horizontal { height: auto; }
    ChannelLayoutPanel Label { padding: 1 1 0 0; }
    ChannelLayoutPanel Select { width: 1fr; }
    ChannelLayoutPanel Static { height: auto; }
    """

    def compose(self) -> ComposeResult:
        with Horizontal():
            yield Label("Channels are")
            yield Select(
                [(label, value) for label, value in LAYOUT_CHOICES],
                value="plain",
                allow_blank=False,
                id="ly-kind",
            )
        yield Static("", id="ly-status")
        yield Static("", id="ly-result")

    def set_status(self, text: str, error: bool = False) -> None:
        """One line inside the panel: the layout chosen, or what is wrong."""
        self.status_text = text
        self.query_one("#ly-status", Static).update(Text(text, style="bold red" if error else ""))

    @property
    def choice(self) -> str:
        """The layout chosen: "plain", a channel order, "binaural" or "stage"."""
        return str(self.query_one("#ly-kind", Select).value)

    @choice.setter
    def choice(self, value: str) -> None:
        self.query_one("#ly-kind", Select).value = value

    @on(Select.Changed, "#ly-kind")
    def _changed(self) -> None:
        kw = self.analysis_kwargs()
        layout = parse_layout(**kw)
        self.set_status(
            "every channel is analysed as its own position" if layout is None else layout.settings
        )

    def analysis_kwargs(self) -> dict:
        """``channels``, ``binaural`` and ``stage`` for the analysis job."""
        c = self.choice
        return {
            "channels": c if c in (*LATERAL_ORDERS, AMBISONIC) else None,
            "binaural": c == "binaural",
            "stage": c == "stage",
        }

    def show(self, document: dict | None) -> None:
        """Per-band layout parameters of each position and the averaged single numbers."""
        result = self.query_one("#ly-result", Static)
        positions = [p for p in (document or {}).get("positions", []) if "layout" in p]
        if not positions:
            self.shown_text = (
                "This analysis has no spatial or stage parameters: choose what the channels "
                "are and analyse again."
            )
            result.update(self.shown_text)
            return
        parts: list = []
        for p in positions:
            name = f"{Path(str(p.get('file', '?'))).name} ch{p.get('channel', '?')}"
            headers, rows = layout_table(p)
            t = Table(title=f"{name} ({p['layout']})", pad_edge=False)
            for i, h in enumerate(headers):
                t.add_column(h, justify="left" if i == 0 else "right")
            for r in rows:
                t.add_row(*r)
            parts.append(t)
            for line in single_number_lines(
                p.get("layout_single_numbers", {}),
                p.get("layout_single_number_verdicts", {}),
                p.get("layout_single_number_reasons", {}),
            ):
                parts.append(Text("  " + line))
            seen: set[str] = set()
            other = 0
            for band in p["bands"]:
                for w in band.get("warnings", []):
                    if not _about_layout(w):
                        other += 1
                    elif w not in seen:
                        seen.add(w)
                        parts.append(Text(f"  ! {w}", style="yellow"))
            if other:
                parts.append(
                    Text(
                        f"  ({other} warning(s) on the decay parameters: see the analysis table)",
                        style="dim",
                    )
                )
            for n in p.get("layout_notes", []):
                parts.append(Text(f"  note: {n}", style="italic"))
        avg = (document or {}).get("average", {})
        parts += self._average(avg)
        parts.append(Text(_LEGEND, style="dim"))
        result.update(_group(parts))
        self.shown_text = plain(*parts)

    def _average(self, avg: dict) -> list:
        keys = [k for k in HEADERS if any(k in r for r in avg.get("bands", []))]
        out: list = []
        if keys and len(avg.get("bands", [])):
            t = Table(title="average over positions", pad_edge=False)
            t.add_column("band")
            for k in keys:
                t.add_column(HEADERS[k][0], justify="right")
            for r in avg["bands"]:
                b = r["band_hz"]
                cells = [f"{b / 1000:g}k" if b >= 1000 else f"{b:g}"]
                for k in keys:
                    s = r.get(k) or {}
                    m = s.get("mean")
                    mark = "*" if m is not None and s.get("verdict") == CAUTION else ""
                    cells.append("—" if m is None else HEADERS[k][1].format(m) + mark)
                t.add_row(*cells)
            out.append(t)
        single = avg.get("layout_single_numbers")
        if single:
            for key, v in single["values"].items():
                name, unit, f = SINGLE_NAMES[key]
                n = single.get("n", {}).get(key, 0)
                if v is None:
                    out.append(Text(f"Average {name}: not evaluable (no position has it)"))
                    continue
                mark = (
                    " (caution: see the band warnings)"
                    if single["verdicts"].get(key) == CAUTION
                    else ""
                )
                out.append(
                    Text(
                        f"Average {name}: {f.format(v)} {unit}".rstrip()
                        + f" over {n} position(s){mark}",
                        style="bold",
                    )
                )
        return out


def _about_layout(warning: str) -> bool:
    return any(w in warning for w in _LAYOUT_WORDS)


def _group(parts):
    from rich.console import Group

    return Group(*parts)
