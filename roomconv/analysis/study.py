"""A room study from files: every channel of every IR file is a position; the results in the
JSON contract's layout, ready for the report writers.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import numpy as np

from .. import __version__
from ..audio import read_audio
from ..errors import InputError, describe
from ..sofa.read import is_sofa, sofa_measurements
from .parameters import room_parameters
from .spatial import single_numbers, spatial_average

#: What each band-filtering choice does, for the document's settings.
FILTERING_TEXT = {
    "auto": "decay times: band filter run backwards in time; C50, C80, D50, Ts: zero-phase "
    "band filter; G: single-pass band energy",
    "forward": "one forward band filter for every parameter",
    "reverse": "one band filter run backwards in time for every parameter",
}
VERDICT_TEXT = (
    "ok: within the ISO 3382-1 just-noticeable difference as far as the checks "
    "can tell; caution: given, but see the warning; not evaluable: no value, the "
    "warning says why"
)


def reference_to_dict(ref) -> dict:
    """The JSON layout of a strength reference, as the study document's settings carry it
    (:func:`roomconv.analysis.calibration.reference_to_dict`).

    Examples
    --------
    >>> reference_to_dict(parse_calibration("-40"))["wideband_db"]
    -40.0
    """
    from .calibration import reference_to_dict as to_dict

    return to_dict(ref)


@dataclass
class Study:
    """Results of :func:`analyse_files`: the contract document plus curves for plotting.

    Examples
    --------
    >>> rate, T = 8000, 0.6
    >>> t = np.arange(int(1.5 * rate)) / rate
    >>> h = np.random.default_rng(0).standard_normal(t.size) * 10 ** (-3 * t / T)
    >>> study = analyse_arrays([("hall.wav", h[:, None], rate)])
    >>> sorted(study.document)
    ['average', 'errors', 'notes', 'positions', 'roomconv_version', 'settings']
    >>> list(study.curves)
    [('hall.wav', 1)]
    """

    document: dict
    #: (file, channel) → (band results, wideband result, sample rate)
    curves: dict = field(default_factory=dict)
    errors: list[str] = field(default_factory=list)


def parse_calibration(text: str | None):
    """The strength calibration option: a number (dB, wideband G only) or a file written by
    ``roomconv calibrate``; ``None`` when not given. See :mod:`roomconv.analysis.calibration`.

    Examples
    --------
    >>> parse_calibration(None) is None, parse_calibration("-40").wideband_db
    (True, -40.0)
    """
    if text is None:
        return None
    from .calibration import parse_strength_reference

    return parse_strength_reference(text)


def analyse_arrays(
    items,
    *,
    bands: str = "octave",
    filtering: str = "auto",
    calibration=None,
    progress=None,
    sti=None,
    layout=None,
) -> Study:
    """Analyse (name, samples×channels array, rate) items; see :func:`analyse_files`.

    ``calibration`` is a :class:`~roomconv.analysis.calibration.StrengthReference` or None.
    ``sti`` is a :class:`~roomconv.analysis.sti.SpeechConditions`: each position and the
    average then get an ``sti`` object (IEC 60268-16).
    Channels are numbered from 1 in the document, as a person counts them. ``layout``
    (:class:`~roomconv.analysis.layouts.ChannelLayout`) says what the channels are and adds
    the stage, lateral or interaural parameters.

    Examples
    --------
    An exponential decay of T = 0.6 s gives T30 near 0.6 s at mid frequencies (within the
    single-position statistical spread, ISO 3382-2 A.2):

    >>> rate, T = 8000, 0.6
    >>> t = np.arange(int(1.5 * rate)) / rate
    >>> h = np.random.default_rng(0).standard_normal(t.size) * 10 ** (-3 * t / T)
    >>> doc = analyse_arrays([("hall.wav", h[:, None], rate)]).document
    >>> doc["positions"][0]["channel"], round(doc["average"]["single_numbers"]["t30_mid_s"], 1)
    (1, 0.6)
    """
    positions, curves, errors, notes = [], {}, [], []
    if layout is not None:
        layout.refuse_unfit(items, bands)
    for name, data, rate in items:
        chans = range(data.shape[1]) if layout is None else layout.mono_channels(data.shape[1])
        for ch in chans:
            try:
                res, wide, n = room_parameters(
                    data[:, ch],
                    rate,
                    bands=bands,
                    filtering=filtering,
                    strength_reference=calibration,
                )
            except InputError as exc:
                errors.append(describe(name, f"channel {ch + 1}: {exc}"))
                continue
            finally:
                if progress is not None:
                    progress.update(1)
            notes += [x for x in n if x not in notes]
            with_g = calibration is not None
            position = {
                "file": str(name),
                "channel": ch + 1,
                "rate": rate,
                "bands": [r.as_dict(with_g) for r in res],
                "wideband": wide.as_dict(with_g),
            }
            if layout is not None:
                from .layouts import extend_position

                try:
                    extend_position(position, layout, data, rate, ch, calibration)
                except InputError as exc:
                    errors.append(describe(name, f"{layout.text}: {exc}"))
                    continue
            positions.append(position)
            curves[(str(name), ch + 1)] = (res, wide, rate)
            if sti is not None:
                from .sti import sti_entry

                positions[-1]["sti"] = sti_entry(data[:, ch], rate, sti)
    if not positions:
        raise InputError("no response could be analysed: " + "; ".join(errors))
    with_g = calibration is not None
    avg = spatial_average([p["bands"] for p in positions], bands, with_g)
    sn, sn_verdicts = single_numbers(avg, bands, with_verdicts=True)
    if layout is not None:
        from .layouts import average_layout

        layout_average = average_layout(positions, avg)
    doc: dict[str, Any] = {
        "positions": positions,
        "average": {
            "bands": avg,
            "single_numbers": sn,
            "single_number_verdicts": sn_verdicts,
            "positions": len(positions),
        },
        "settings": {
            "bands": bands,
            "filtering": filtering,
            "calibration": None if calibration is None else reference_to_dict(calibration),
            "decay_method": "Schroeder integral with Lundeby truncation, noise "
            "subtraction and tail compensation",
            "band_filtering": FILTERING_TEXT[filtering],
            "onset": "first sample of the broadband response within 20 dB of its "
            "peak, for every band",
            "verdicts": VERDICT_TEXT,
        },
        "notes": notes,
        "errors": errors,
        "roomconv_version": __version__,
    }
    if sti is not None:
        _add_sti(doc, sti)
    if layout is not None:
        doc["settings"]["channels"] = layout.settings
        doc["average"]["layout_single_numbers"] = layout_average
    return Study(doc, curves, errors)


def _add_sti(doc: dict, sti) -> None:
    """The STI average, its settings and the cautions that go with any STI value."""
    from .sti import CAUTIONS, average_sti

    doc["average"]["sti"] = average_sti([p["sti"] for p in doc["positions"]])
    doc["settings"]["sti"] = sti.as_dict()
    doc["cautions"] = list(CAUTIONS)


def analyse_files(
    paths,
    *,
    bands: str = "octave",
    filtering: str = "auto",
    calibration=None,
    progress=None,
    sti=None,
    layout=None,
) -> Study:
    """Read each IR file and analyse every channel as its own position.

    A file that cannot be read is reported in ``errors`` and the rest go on; if none can be
    analysed, :class:`InputError` is raised.

    Examples
    --------
    >>> import tempfile, pathlib, soundfile
    >>> rate, T = 8000, 0.6
    >>> t = np.arange(int(1.5 * rate)) / rate
    >>> h = np.random.default_rng(0).standard_normal(t.size) * 10 ** (-3 * t / T)
    >>> with tempfile.TemporaryDirectory() as tmp:
    ...     soundfile.write(pathlib.Path(tmp) / "hall.wav", 0.5 * h, rate, subtype="DOUBLE")
    ...     study = analyse_files([pathlib.Path(tmp) / "hall.wav", pathlib.Path(tmp) / "no.wav"])
    >>> len(study.document["positions"]), len(study.errors)
    (1, 1)
    """
    items, errors = [], []
    for p in paths:
        try:
            # A SOFA set is one response per measurement, named <file>#<m>.
            parts = (
                [(Path(n), d, r) for n, d, r in sofa_measurements(p)]
                if is_sofa(p)
                else [(Path(p), *read_audio(p, what="impulse response"))]
            )
        except InputError as exc:
            errors.append(str(exc))
            continue
        for name, data, rate in parts:
            if not np.any(data):
                errors.append(describe(name, "the impulse response is silent (all zeros)"))
                continue
            items.append((name, data, rate))
    if not items:
        raise InputError("no response could be analysed: " + "; ".join(errors))
    study = analyse_arrays(
        items,
        bands=bands,
        filtering=filtering,
        calibration=calibration,
        progress=progress,
        sti=sti,
        layout=layout,
    )
    study.errors = errors + study.errors
    study.document["errors"] = study.errors
    return study
