"""Which channel is what: the channel layouts the analysis accepts (omni + figure-of-eight,
first-order ambisonic, binaural, stage), and their parameters merged into a position's rows.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

import numpy as np

from ..errors import InputError, describe
from .bands import bands_for_rate
from .parameters import CAUTION, NOT_EVALUABLE, OK
from .windowed import JudgedRow

__all__ = [
    "ChannelLayout",
    "LATERAL_ORDERS",
    "AMBISONIC",
    "parse_layout",
    "extend_position",
    "average_layout",
    "LAYOUT_KEYS",
]

LATERAL_ORDERS = ("omni,fig8", "fig8,omni")
#: First-order ambisonic input: ACN channel order (W, Y, Z, X), SN3D normalization.
AMBISONIC = "acn-sn3d"
_RANK = {OK: 0, CAUTION: 1, NOT_EVALUABLE: 2}
#: Keys a position's band rows get, by layout kind.
LAYOUT_KEYS = {
    "lateral": ("jlf", "jlfc", "lj_db"),
    "ambisonic": ("jlf", "jlfc", "lj_db"),
    "binaural": ("iacc_early", "iacc_late", "iacc_full"),
    "stage": ("st_early_db", "st_late_db"),
}
#: Codes that say a band lies outside the parameter's range: the reason is the same for
#: every position, so it goes once into the notes, not into every band's warnings.
_OUTSIDE = ("st_band_outside", "lateral_band_outside", "iacc_band_outside", "lj_no_calibration")


@dataclass(frozen=True)
class ChannelLayout:
    """What the channels of each response file are.

    ``kind``: "lateral" (omni and figure-of-eight; ``omni``/``fig8`` their indices),
    "ambisonic" (ACN/SN3D first order), "binaural" (left, right) or "stage" (every channel
    a response 1 m from the source on stage, each its own position).
    """

    kind: str
    omni: int = 0
    fig8: int = 1

    @property
    def channels(self) -> int | None:
        return {"lateral": 2, "ambisonic": 4, "binaural": 2}.get(self.kind)

    @property
    def text(self) -> str:
        if self.kind == "lateral":
            return LATERAL_ORDERS[0] if self.omni == 0 else LATERAL_ORDERS[1]
        return {"ambisonic": AMBISONIC, "binaural": "left,right", "stage": "stage"}[self.kind]

    @property
    def settings(self) -> str:
        """The layout in words, for the document's settings."""
        return {
            "lateral": f"channels {self.text}: the figure-of-eight's null towards the source and "
            "its on-axis gain the omni's; the ISO 3382 parameters from the omni",
            "ambisonic": "first-order ambisonic, ACN order (W, Y, Z, X), SN3D normalization; "
            "the figure-of-eight is the horizontal one at 90° to the direct sound's direction "
            "(Y·cos φ − X·sin φ); the ISO 3382 parameters from W",
            "binaural": "binaural (left, right); time zero the earlier ear's direct sound; "
            "the ISO 3382 parameters from the left ear",
            "stage": "stage: each channel a response 1 m from the source on stage",
        }[self.kind]

    def mono_channels(self, count: int) -> list[int]:
        """Channels (from 0) analysed as positions for the ISO 3382 parameters."""
        if self.kind == "stage":
            return list(range(count))
        return [self.omni]

    def refuse_unfit(self, items, bands: str) -> None:
        """Refuse third-octave bands and any (name, data, rate) item with the wrong channel
        count, before any analysis."""
        if bands != "octave":
            raise InputError(
                f"the {self.text} parameters are defined in octave bands (ISO 3382-1); "
                f"analyse them in octave bands, not {bands}"
            )
        for name, data, _ in items:
            self.check(name, data.shape[1])

    def check(self, name, count: int) -> None:
        """Refuse a file whose channel count does not fit the layout (naming the file)."""
        need = self.channels
        if need is not None and count != need:
            raise InputError(
                describe(
                    name,
                    f"the {self.text} layout needs {need} channels; this file has {count}",
                    "give one file per position holding exactly those channels",
                )
            )


def parse_layout(
    channels: str | None = None, binaural: bool = False, stage: bool = False
) -> ChannelLayout | None:
    """The layout asked for, or None (every channel its own position).

    ``channels``: "omni,fig8", "fig8,omni" or "acn-sn3d".
    """
    asked = [x for x in (channels is not None, binaural, stage) if x]
    if len(asked) > 1:
        raise InputError("give one channel layout: channels, binaural or stage")
    if binaural:
        return ChannelLayout("binaural")
    if stage:
        return ChannelLayout("stage")
    if channels is None:
        return None
    c = channels.replace(" ", "").lower()
    if c == AMBISONIC:
        return ChannelLayout("ambisonic")
    if c in LATERAL_ORDERS:
        return ChannelLayout(
            "lateral",
            omni=0 if c == LATERAL_ORDERS[0] else 1,
            fig8=1 if c == LATERAL_ORDERS[0] else 0,
        )
    raise InputError(
        f"unknown channel layout '{channels}' (use {', '.join(LATERAL_ORDERS)} or {AMBISONIC})"
    )


def _compute(layout: ChannelLayout, data: np.ndarray, rate: int, ch: int, calibration):
    """(rows, single numbers, cautions applying to every row)."""
    bands, _ = bands_for_rate("octave", rate)
    cautions: list[tuple[str, str]] = []
    if layout.kind == "stage":
        from .stage import stage_single_numbers, stage_support

        rows = stage_support(data[:, ch], rate, bands=bands)
        return rows, stage_single_numbers(rows), cautions
    if layout.kind == "binaural":
        from .interaural import interaural_correlation, interaural_single_numbers

        rows = interaural_correlation(data[:, 0], data[:, 1], rate, bands=bands)
        return rows, interaural_single_numbers(rows), cautions
    from .lateral import fig8_from_ambisonic, lateral_fractions, lateral_single_numbers

    if layout.kind == "ambisonic":
        split = fig8_from_ambisonic(data, rate)
        omni, fig8, cautions = split.omni, split.fig8, split.cautions
    else:
        omni, fig8 = data[:, layout.omni], data[:, layout.fig8]
    rows = lateral_fractions(
        omni, fig8, rate, bands=bands, strength_reference=calibration, band_set="octave"
    )
    for code, text in cautions:
        for r in rows:
            given = [k for k in LAYOUT_KEYS["lateral"] if r.values.get(k) is not None]
            if given:
                r.flag(given, CAUTION, code, text)
    return rows, lateral_single_numbers(rows), cautions


def extend_position(
    position: dict, layout: ChannelLayout, data: np.ndarray, rate: int, ch: int, calibration
) -> None:
    """Add the layout's parameters to a position's band rows (null where they do not apply,
    with the verdicts and warning codes the other values get) and its single numbers."""
    rows, single, cautions = _compute(layout, data, rate, ch, calibration)
    keys = LAYOUT_KEYS[layout.kind]
    by_band = {r.band_hz: r for r in rows}
    notes: list[str] = []
    for d in position["bands"]:
        r = by_band.get(d["band_hz"]) or JudgedRow(d["band_hz"]).finish(keys)
        _merge(d, r, keys, notes)
    for k in keys:  # the wideband row: these parameters are per band only
        position["wideband"][k] = None
    position["layout"] = layout.text
    position["layout_single_numbers"] = single["values"]
    position["layout_single_number_verdicts"] = single["verdicts"]
    position["layout_single_number_reasons"] = single["reasons"]
    if layout.kind == "ambisonic":
        position["layout_notes"] = notes + [t for _, t in cautions if t not in notes]
    else:
        position["layout_notes"] = notes


def _merge(d: dict, r: JudgedRow, keys, notes: list[str]) -> None:
    for k in keys:
        d[k] = r.values.get(k)
        d.setdefault("verdicts", {})[k] = r.verdicts.get(k, NOT_EVALUABLE)
        if r.codes.get(k):
            d.setdefault("warning_codes_by_value", {})[k] = list(r.codes[k])
    for code in r.warning_codes:
        if code not in d["warning_codes"]:
            d["warning_codes"].append(code)
    for code, texts in r.texts.items():
        for text in texts:
            if code in _OUTSIDE:
                # "<band>: … only": the same for every band and position, said once.
                generic = text.split(": ", 1)[-1]
                if generic not in notes:
                    notes.append(generic)
            elif text not in d["warnings"]:
                d["warnings"].append(text)
    given = [v for k, v in d["verdicts"].items() if d.get(k) is not None]
    d["verdict"] = max(given, key=_RANK.__getitem__) if given else NOT_EVALUABLE


def average_layout(positions: list[dict], average_bands: list[dict]) -> dict | None:
    """Per-band means of the layout's parameters over positions (added to the average's band
    rows) and the mean of each position single number; None when no position has them."""
    with_layout = [p for p in positions if "layout" in p]
    if not with_layout:
        return None
    kind_keys = sorted({k for p in with_layout for r in p["bands"] for k in _layout_keys(r)})
    for row in average_bands:
        for k in kind_keys:
            found = [
                r
                for p in with_layout
                for r in p["bands"]
                if r["band_hz"] == row["band_hz"] and k in r
            ]
            row[k] = _stat([r[k] for r in found], [r["verdicts"].get(k, OK) for r in found])
    names = sorted({k for p in with_layout for k in p["layout_single_numbers"]})
    out: dict[str, Any] = {"values": {}, "verdicts": {}, "n": {}}
    for name in names:
        vals = [p["layout_single_numbers"].get(name) for p in with_layout]
        marks = [p["layout_single_number_verdicts"].get(name, NOT_EVALUABLE) for p in with_layout]
        s = _stat(vals, marks)
        out["values"][name] = s["mean"]
        out["verdicts"][name] = s["verdict"]
        out["n"][name] = s["n"]
    return out


def _layout_keys(row: dict) -> list[str]:
    every = {k for keys in LAYOUT_KEYS.values() for k in keys}
    return [k for k in row if k in every]


def _stat(values, verdicts) -> dict:
    given = [(float(v), m) for v, m in zip(values, verdicts, strict=True) if v is not None]
    if not given:
        return {"mean": None, "std": None, "n": 0, "verdict": NOT_EVALUABLE}
    vals = np.array([v for v, _ in given])
    flagged = any(m != OK for _, m in given)
    return {
        "mean": float(vals.mean()),
        "std": float(vals.std(ddof=1)) if vals.size > 1 else None,
        "n": int(vals.size),
        "verdict": CAUTION if flagged else OK,
    }


#: Column headers and number formats of the layout parameters in text tables.
HEADERS = {
    "st_early_db": ("ST_early dB", "{:+.1f}"),
    "st_late_db": ("ST_late dB", "{:+.1f}"),
    "jlf": ("J_LF", "{:.3f}"),
    "jlfc": ("J_LFC", "{:.3f}"),
    "lj_db": ("L_J dB", "{:+.1f}"),
    "iacc_early": ("IACC_E", "{:.2f}"),
    "iacc_late": ("IACC_L", "{:.2f}"),
    "iacc_full": ("IACC_A", "{:.2f}"),
}
#: The band-averaged single numbers in words.
SINGLE_NAMES = {
    "st_early_avg_db": ("Early support ST_early, mean of 250 Hz–2 kHz", "dB", "{:+.1f}"),
    "st_late_avg_db": ("Late support ST_late, mean of 250 Hz–2 kHz", "dB", "{:+.1f}"),
    "jlf_avg": ("Early lateral energy fraction J_LF, mean of 125 Hz–1 kHz", "", "{:.3f}"),
    "jlfc_avg": ("Early lateral fraction J_LFC, mean of 125 Hz–1 kHz", "", "{:.3f}"),
    "lj_avg_db": ("Late lateral sound level L_J, mean of 125 Hz–1 kHz", "dB", "{:+.1f}"),
    "one_minus_iacc_e3": ("1 − IACC_E3, early IACC of 500 Hz–2 kHz", "", "{:.2f}"),
}


def keys_of(doc: dict) -> tuple[str, ...]:
    """The layout parameter keys present in a document's positions, in table order."""
    present = {k for p in doc.get("positions", []) for r in p["bands"] for k in r}
    return tuple(k for k in HEADERS if k in present)


def layout_table(position: dict) -> tuple[list[str], list[list[str]]]:
    """(headers, rows) of one position's layout parameters; ``*`` marks a caution, — a value
    not evaluable."""
    keys = [k for k in HEADERS if any(k in r for r in position["bands"])]
    rows = []
    for r in position["bands"]:
        cells = [f"{r['band_hz'] / 1000:g}k" if r["band_hz"] >= 1000 else f"{r['band_hz']:g}"]
        for k in keys:
            v = r.get(k)
            mark = "*" if v is not None and r["verdicts"].get(k) == CAUTION else ""
            cells.append("—" if v is None else HEADERS[k][1].format(v) + mark)
        rows.append(cells)
    return ["band"] + [HEADERS[k][0] for k in keys], rows


def single_number_lines(values: dict, verdicts: dict, reasons: dict | None = None) -> list[str]:
    """The layout single numbers in words, with units, verdicts and reasons for a null."""
    out = []
    for key, v in values.items():
        name, unit, f = SINGLE_NAMES[key]
        if v is None:
            why = (reasons or {}).get(key)
            out.append(f"{name}: not evaluable" + (f" ({why})" if why else ""))
            continue
        note = " (caution: see the band warnings)" if verdicts.get(key) == CAUTION else ""
        out.append(f"{name}: {f.format(v)} {unit}".rstrip() + note)
    return out
