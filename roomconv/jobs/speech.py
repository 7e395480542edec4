"""Speech conditions for the STI: the talker's level, the background noise given as numbers
or read from a calibrated recording, the voice and the STIPA choice."""

from __future__ import annotations

from pathlib import Path

import numpy as np

from ..analysis.sti import DEFAULT_SPEECH_LEVEL_DBA, OCTAVES_HZ, SpeechConditions, octave_levels
from ..audio import read_audio
from ..errors import InputError, describe

__all__ = ["parse_octave_levels", "speech_conditions", "noise_from_file"]


def parse_octave_levels(text: str) -> tuple[float, ...]:
    """Seven comma-separated levels, 125 Hz → 8 kHz, dB SPL (``"45,40,35,30,27,25,22"``)."""
    parts = [p.strip() for p in str(text).split(",")]
    if len(parts) != len(OCTAVES_HZ):
        raise InputError(
            f"{text!r}: give seven octave levels 125 Hz to 8 kHz in dB, separated by commas"
        )
    try:
        values = tuple(float(p) for p in parts)
    except ValueError:
        raise InputError(f"{text!r}: every level must be a number in dB") from None
    if not all(np.isfinite(v) and -150 <= v <= 150 for v in values):
        raise InputError(f"{text!r}: levels must be finite numbers within −150…150 dB")
    return values


def noise_from_file(path, full_scale_sine_db: float, channel: int = 1) -> tuple[float, ...]:
    """Octave levels of a background-noise recording (channel counted from 1), dB SPL.

    ``full_scale_sine_db``: the sound pressure level a full-scale sine represents in the
    recording (from a calibrator tone recorded with the same gain).
    """
    if not np.isfinite(full_scale_sine_db) or not 60.0 <= full_scale_sine_db <= 200.0:
        raise InputError(
            f"noise calibration {full_scale_sine_db:g} dB is outside 60…200 dB SPL for a "
            "full-scale sine"
        )
    data, rate = read_audio(path, what="noise recording")
    if not 1 <= channel <= data.shape[1]:
        raise InputError(describe(path, f"has no channel {channel}", "channels count from 1"))
    try:
        return tuple(
            float(x) for x in octave_levels(data[:, channel - 1], rate, full_scale_sine_db)
        )
    except InputError as exc:
        raise InputError(describe(path, str(exc))) from None


def speech_conditions(
    *,
    speech_level_dba: float | None = None,
    noise_db=None,
    noise_file=None,
    noise_calibration_db: float | None = None,
    voice: str = "male",
    stipa: bool = False,
) -> SpeechConditions:
    """Validate the speech settings and read a noise recording when one is given.

    Parameters
    ----------
    speech_level_dba : float, optional
        A-weighted speech level at the listener; default 60 dB(A).
    noise_db : sequence of 7 floats, optional
        Background noise per octave 125 Hz → 8 kHz, dB SPL.
    noise_file : path-like, optional
        A background-noise recording instead of ``noise_db``; needs ``noise_calibration_db``.
    """
    if noise_db is not None and noise_file is not None:
        raise InputError("give the background noise as levels or as a recording, not both")
    if noise_file is not None and noise_calibration_db is None:
        raise InputError(
            f"{noise_file}: a noise recording needs its calibration (the dB SPL of a "
            "full-scale sine)"
        )
    if noise_file is None and noise_calibration_db is not None:
        raise InputError("a noise calibration was given without a noise recording")
    level = DEFAULT_SPEECH_LEVEL_DBA if speech_level_dba is None else float(speech_level_dba)
    origin = f"male speech spectrum at {level:g} dB(A)" + (
        " (default)" if speech_level_dba is None else ""
    )
    if noise_file is not None:
        noise_db = noise_from_file(noise_file, float(noise_calibration_db))  # type: ignore[arg-type]
        origin += f"; noise from {Path(noise_file).name} at {noise_calibration_db:g} dB SPL FS sine"
    elif noise_db is not None:
        origin += "; noise levels as given"
    else:
        origin += "; no background noise"
    return SpeechConditions.from_level(
        level,
        noise_db,
        voice=voice,
        stipa=stipa,
        origin=origin,
        source_files=() if noise_file is None else (str(noise_file),),
    )
