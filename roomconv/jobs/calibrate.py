"""The calibration job: a strength reference for G from responses of the source, written as
the JSON file the analysis reads."""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass
from pathlib import Path

from ..audio import read_audio
from ..errors import InputError, describe
from .guard import guarded

__all__ = ["calibrate_free_field", "calibrate_reverberation_room", "CalibrationResult"]


@dataclass
class CalibrationResult:
    """What a calibration job wrote and found.

    Attributes
    ----------
    output : Path
        The strength-reference JSON file written.
    reference : StrengthReference
        The reference itself (:class:`roomconv.analysis.calibration.StrengthReference`).
    notes : list of str
        Bands left out and why, and other remarks for the user.

    Examples
    --------
    See :func:`calibrate_free_field`, which returns one.
    """

    output: Path
    reference: object  #: :class:`roomconv.analysis.calibration.StrengthReference`
    notes: list[str]


def _channel_index(channel: int | None, n_channels: int, path) -> int:
    """1-based ``channel`` → 0-based index; a mono file needs none."""
    if channel is None:
        if n_channels == 1:
            return 0
        raise InputError(
            describe(
                path,
                f"has {n_channels} channels",
                f"choose the microphone's channel (1..{n_channels})",
            )
        )
    if not 1 <= channel <= n_channels:
        raise InputError(
            describe(
                path, f"has no channel {channel}; it has 1..{n_channels} (channels count from 1)"
            )
        )
    return channel - 1


def _save(output, reference_files, ref, force: bool) -> CalibrationResult:
    from ..analysis.calibration import reference_to_dict

    with guarded(reference_files, force=force) as g:
        g.file(output)
        g.write_json(output, reference_to_dict(ref))
    return CalibrationResult(Path(output), ref, list(ref.notes))


def calibrate_free_field(
    reference,
    output,
    *,
    distance_m: float,
    channel: int | None = None,
    bands: str = "octave",
    force: bool = False,
) -> CalibrationResult:
    """Strength reference from one free-field response of the source at ``distance_m``.

    References
    ----------
    ISO 3382-1:2009, Annex A (sound strength G and its reference at 10 m in a free field).

    Examples
    --------
    A unit impulse measured at 10 m carries ∫p² dt = 1/rate FS²·s, 10·lg(1/8000) = −39.03 dB:

    >>> import tempfile, pathlib, numpy as np, soundfile
    >>> tmp = tempfile.TemporaryDirectory()
    >>> d = pathlib.Path(tmp.name)
    >>> h = np.zeros(8000)
    >>> h[10] = 1.0
    >>> soundfile.write(d / "ref.wav", h, 8000, subtype="DOUBLE")
    >>> res = calibrate_free_field(d / "ref.wav", d / "cal.json", distance_m=10.0)
    >>> res.output.name, round(res.reference.wideband_db, 2)
    ('cal.json', -39.03)
    >>> tmp.cleanup()
    """
    from ..analysis.calibration import NEAR_FIELD_M, reference_from_response

    with guarded([reference], force=force) as g:
        g.file(output)  # planned before the work
    data, rate = read_audio(reference, what="reference response")
    ch = _channel_index(channel, data.shape[1], reference)
    try:
        ref = reference_from_response(data[:, ch], rate, distance_m=distance_m, bands=bands)
    except InputError as exc:
        raise InputError(describe(reference, str(exc))) from None
    res = _save(output, [reference], ref, force)
    if distance_m < NEAR_FIELD_M:
        res.notes.insert(
            0,
            f"distance {distance_m:g} m: this close the source may not act as "
            "a point source; the scaling to 10 m by the inverse-square law "
            "assumes it does",
        )
    return res


def calibrate_reverberation_room(
    references: Sequence,
    output,
    *,
    volume_m3: float,
    reverberation_s: dict[float, float],
    surface_m2: float | None = None,
    channel: int | None = None,
    bands: str = "octave",
    force: bool = False,
) -> CalibrationResult:
    """Strength reference from responses in a reverberation room of known volume (m³) and
    reverberation time per band (s); ``surface_m2`` adds the Waterhouse correction.

    References
    ----------
    ISO 3382-1:2009, Annex A; ISO 3741 (sound power in a reverberation room).

    Examples
    --------
    See :func:`roomconv.analysis.calibration.reverberation_room_reference` for the method
    and a worked example; this job reads the responses from files and writes the JSON.
    """
    from ..analysis.calibration import reverberation_room_reference

    with guarded(references, force=force) as g:
        g.file(output)
    responses: list = []
    rate: int | None = None
    for path in references:
        data, r = read_audio(path, what="reverberation-room response")
        if rate is not None and r != rate:
            raise InputError(
                describe(
                    path,
                    f"is at {r} Hz but {references[0]} at {rate} Hz",
                    "give responses at one sample rate",
                )
            )
        rate = r
        responses.append(data[:, _channel_index(channel, data.shape[1], path)])
    if rate is None:
        raise InputError("no reverberation-room response given")
    ref = reverberation_room_reference(
        responses,
        rate,
        volume_m3=volume_m3,
        reverberation_s=reverberation_s,
        surface_m2=surface_m2,
        bands=bands,
    )
    return _save(output, references, ref, force)
