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

    Parameters
    ----------
    kind : {"lateral", "ambisonic", "binaural", "stage"}
        What the channels hold.
    omni, fig8 : int
        For "lateral": the channel index (from 0) of the omnidirectional and of the
        figure-of-eight channel.

    References
    ----------
    ISO 3382-1:2009, Annexes A (lateral, figure-of-eight with its null towards the source),
    B (binaural) and C (stage) — from memory. Nachbar, C. et al. (2011). AmbiX — a suggested
    ambisonics format (ACN channel order, SN3D normalization).

    Examples
    --------
    >>> lay = parse_layout("fig8,omni")
    >>> lay.kind, lay.omni, lay.fig8, lay.channels, lay.text
    ('lateral', 1, 0, 2, 'fig8,omni')
    >>> lay.mono_channels(2)  # the ISO 3382 parameters come from the omni
    [1]
    """

    kind: str
    omni: int = 0
    fig8: int = 1

    @property
    def channels(self) -> int | None:
        """Channels a file of this layout must hold; None for "stage" (any number, each
        channel its own position).

        Examples
        --------
        >>> ChannelLayout("ambisonic").channels, ChannelLayout("stage").channels
        (4, None)
        """
        return {"lateral": 2, "ambisonic": 4, "binaural": 2}.get(self.kind)

    @property
    def text(self) -> str:
        """The layout as the short text :func:`parse_layout` accepts (or "left,right" and
        "stage" for the two layouts chosen by a switch).

        Examples
        --------
        >>> ChannelLayout("lateral").text, ChannelLayout("binaural").text
        ('omni,fig8', 'left,right')
        """
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

    Parameters
    ----------
    channels : str, optional
        "omni,fig8", "fig8,omni" (the channel order of a lateral pair) or "acn-sn3d"
        (first-order ambisonic); case and spaces are ignored.
    binaural : bool
        The two channels are the left and right ear.
    stage : bool
        Every channel is a stage response 1 m from the source.

    Returns
    -------
    ChannelLayout or None

    Raises
    ------
    InputError
        More than one layout asked for, or an unknown ``channels`` text.

    Examples
    --------
    >>> parse_layout("ACN-SN3D")
    ChannelLayout(kind='ambisonic', omni=0, fig8=1)
    >>> parse_layout(binaural=True).text
    'left,right'
    >>> parse_layout() is None
    True
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
    with the verdicts and warning codes the other values get) and its single numbers.

    Parameters
    ----------
    position : dict
        One position of the analysis document: ``"bands"`` (rows with ``band_hz``,
        ``warning_codes`` and ``warnings``) and ``"wideband"``. Changed in place.
    layout : ChannelLayout
    data : ndarray, shape (samples, channels)
        The file's channels.
    rate : int
        Sample rate, Hz.
    ch : int
        The channel of this position (used by the "stage" layout).
    calibration : StrengthReference or None
        As for G; without it L_J is null with the reason.

    References
    ----------
    ISO 3382-1:2009, Annexes A–C (from memory), through
    :func:`~roomconv.analysis.lateral.lateral_fractions`,
    :func:`~roomconv.analysis.interaural.interaural_correlation` and
    :func:`~roomconv.analysis.stage.stage_support`.

    Examples
    --------
    Direct sound and one reflection of relative amplitude a = 0.5 from θ = 60° off the
    lateral axis, 20 ms later: J_LF = a²cos²θ/(1 + a²) = 0.0625·0.25/1.25 = 0.05 (closed form,
    Barron & Marshall 1981's definition).

    >>> rate, a, th = 16000, 0.5, np.radians(60)
    >>> p, pl = np.zeros(rate // 2), np.zeros(rate // 2)
    >>> p[100], p[420], pl[420] = 1.0, a, a * np.cos(th)
    >>> pos = {"bands": [{"band_hz": f, "warning_codes": [], "warnings": []}
    ...                  for f in (63.0, 500.0)], "wideband": {}}
    >>> extend_position(pos, parse_layout("omni,fig8"), np.stack([p, pl], 1), rate, 0, None)
    >>> pos["layout"], [b["jlf"] if b["jlf"] is None else round(b["jlf"], 2) for b in pos["bands"]]
    ('omni,fig8', [None, 0.05])
    >>> pos["layout_notes"][0]
    'J_LF, J_LFC and L_J are given in the octaves 125 Hz–4 kHz only'
    """
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
    rows) and the mean of each position single number; None when no position has them.

    Parameters
    ----------
    positions : list of dict
        Positions after :func:`extend_position`.
    average_bands : list of dict
        The average's band rows (``band_hz``); each gets, per layout key, a dict with
        ``mean``, ``std`` (sample standard deviation, None for one value), ``n`` and
        ``verdict`` (a caution when any value averaged had one). Changed in place.

    Returns
    -------
    dict or None
        ``values``, ``verdicts`` and ``n`` of the single numbers, by name.

    Examples
    --------
    Two positions' ST_early, −12 and −14 dB: mean −13 dB, sample standard deviation
    sqrt(((−12+13)² + (−14+13)²)/1) = sqrt(2) dB.

    >>> pos = [{"layout": "stage",
    ...         "bands": [{"band_hz": 500.0, "st_early_db": v, "verdicts": {}}],
    ...         "layout_single_numbers": {"st_early_avg_db": v},
    ...         "layout_single_number_verdicts": {"st_early_avg_db": "ok"}}
    ...        for v in (-12.0, -14.0)]
    >>> avg_bands = [{"band_hz": 500.0}]
    >>> average_layout(pos, avg_bands)["values"]
    {'st_early_avg_db': -13.0}
    >>> s = avg_bands[0]["st_early_db"]
    >>> s["mean"], round(s["std"] ** 2, 12), s["n"], s["verdict"]
    (-13.0, 2.0, 2, 'ok')
    >>> average_layout([{"bands": []}], avg_bands) is None
    True
    """
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
    """The layout parameter keys present in a document's positions, in table order.

    Parameters
    ----------
    doc : dict
        The analysis document (``"positions"``, each with ``"bands"`` rows).

    Returns
    -------
    tuple of str

    Examples
    --------
    >>> keys_of({"positions": [{"bands": [{"band_hz": 500.0, "jlf": 0.2,
    ...                                    "st_early_db": -12.0}]}]})
    ('st_early_db', 'jlf')
    >>> keys_of({})
    ()
    """
    present = {k for p in doc.get("positions", []) for r in p["bands"] for k in r}
    return tuple(k for k in HEADERS if k in present)


def layout_table(position: dict) -> tuple[list[str], list[list[str]]]:
    """(headers, rows) of one position's layout parameters; ``*`` marks a caution, — a value
    not evaluable.

    Parameters
    ----------
    position : dict
        A position with ``"bands"`` rows holding the layout keys and their ``verdicts``.

    Returns
    -------
    headers : list of str
    rows : list of list of str
        One row of text cells per band, the band first.

    Examples
    --------
    >>> pos = {"bands": [
    ...     {"band_hz": 500.0, "st_early_db": -12.04, "verdicts": {"st_early_db": "caution"}},
    ...     {"band_hz": 1000.0, "st_early_db": None, "verdicts": {}}]}
    >>> layout_table(pos)
    (['band', 'ST_early dB'], [['500', '-12.0*'], ['1k', '—']])
    """
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
    """The layout single numbers in words, with units, verdicts and reasons for a null.

    Parameters
    ----------
    values : dict
        Single numbers by name (``jlf_avg``, ``st_early_avg_db``, …); None when not evaluable.
    verdicts : dict
        Their verdicts ("ok", "caution", "not evaluable").
    reasons : dict, optional
        Why a value is None, by name.

    Returns
    -------
    list of str

    Examples
    --------
    >>> for line in single_number_lines({"jlf_avg": 0.2, "lj_avg_db": None},
    ...                                 {"jlf_avg": "caution"}, {"lj_avg_db": "no calibration"}):
    ...     print(line)
    Early lateral energy fraction J_LF, mean of 125 Hz–1 kHz: 0.200
    (caution: see the band warnings)
    Late lateral sound level L_J, mean of 125 Hz–1 kHz: not evaluable (no calibration)
    """
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
