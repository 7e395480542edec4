"""A room study from files: every channel of every IR file is a position; the results in the
JSON contract's layout, ready for the report writers.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from .. import __version__
from ..audio import read_audio, read_json
from ..errors import InputError, describe
from .parameters import room_parameters
from .spatial import single_numbers, spatial_average


@dataclass
class Study:
    """Results of :func:`analyse_files`: the contract document plus curves for plotting."""

    document: dict
    #: (file, channel) → (band results, wideband result, sample rate)
    curves: dict = field(default_factory=dict)
    errors: list[str] = field(default_factory=list)


def parse_calibration(text: str | None):
    """``--calibration``: a number (dB, all bands) or a JSON file {band: dB, "wideband": dB}."""
    if text is None:
        return None
    try:
        return float(text)
    except ValueError:
        pass
    d = read_json(text, what="calibration file")
    try:
        return {(k if k == "wideband" else float(k)): float(v) for k, v in d.items()}
    except (TypeError, ValueError):
        raise InputError(describe(text, "calibration values must be numbers keyed by band "
                                        "(e.g. {\"500\": 72.5, \"wideband\": 80.1})")) from None


def analyse_arrays(items, *, bands: str = "octave", reverse_filter: bool = False,
                   calibration=None, progress=None) -> Study:
    """Analyse (name, samples×channels array, rate) items; see :func:`analyse_files`."""
    positions, curves, errors, notes = [], {}, [], []
    for name, data, rate in items:
        for ch in range(data.shape[1]):
            try:
                res, wide, n = room_parameters(data[:, ch], rate, bands=bands,
                                               reverse_filter=reverse_filter,
                                               calibration_db=calibration)
            except InputError as exc:
                errors.append(describe(name, f"channel {ch}: {exc}"))
                continue
            finally:
                if progress is not None:
                    progress.update(1)
            notes += [x for x in n if x not in notes]
            with_g = calibration is not None
            positions.append({"file": str(name), "channel": ch, "rate": rate,
                              "bands": [r.as_dict(with_g) for r in res],
                              "wideband": wide.as_dict(with_g)})
            curves[(str(name), ch)] = (res, wide, rate)
    if not positions:
        raise InputError("no response could be analysed: " + "; ".join(errors))
    avg = spatial_average([p["bands"] for p in positions], bands, calibration is not None)
    doc = {
        "positions": positions,
        "average": {"bands": avg, "single_numbers": single_numbers(avg, bands),
                    "positions": len(positions)},
        "settings": {"bands": bands, "reverse_filter": reverse_filter,
                     "calibration": calibration if not isinstance(calibration, dict)
                     else {str(k): v for k, v in calibration.items()},
                     "decay_method": "Schroeder integral with Lundeby truncation, noise "
                                     "subtraction and tail compensation",
                     "onset": "first sample within 20 dB of the band's peak"},
        "notes": notes,
        "errors": errors,
        "roomconv_version": __version__,
    }
    return Study(doc, curves, errors)


def analyse_files(paths, *, bands: str = "octave", reverse_filter: bool = False,
                  calibration=None, progress=None) -> Study:
    """Read each IR file and analyse every channel as its own position.

    A file that cannot be read is reported in ``errors`` and the rest go on; if none can be
    analysed, :class:`InputError` is raised.
    """
    items, errors = [], []
    for p in paths:
        try:
            data, rate = read_audio(p, what="impulse response")
        except InputError as exc:
            errors.append(str(exc))
            continue
        if not np.any(data):
            errors.append(describe(p, "the impulse response is silent (all zeros)"))
            continue
        items.append((Path(p), data, rate))
    if not items:
        raise InputError("no response could be analysed: " + "; ".join(errors))
    study = analyse_arrays(items, bands=bands, reverse_filter=reverse_filter,
                           calibration=calibration, progress=progress)
    study.errors = errors + study.errors
    study.document["errors"] = study.errors
    return study

