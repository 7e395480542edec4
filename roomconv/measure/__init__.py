"""Swept-sine measurement: the excitation, its deconvolution and the quality of the result.

Every public name of the submodules is re-exported here (reading and writing files is the
job layer's, :mod:`roomconv.jobs.measure`)::

    from roomconv.measure import Sweep, sweep_signal, extract_ir

``sounddevice`` is still imported only when a sound card is used
(:func:`load_sounddevice`).
"""

from .capture import (
    SimulatedDevice,
    SoundCard,
    list_devices,
    load_sounddevice,
    metered_playrec,
    run_measurement,
)
from .deconvolve import (
    HARMONIC_ORDERS,
    Extraction,
    extract_ir,
)
from .quality import (
    CLIP_LEVEL,
    CLIP_RUN,
    REQUIRED_INR_DB,
    clipped_samples,
    energy_envelope,
    envelope_inr,
    inr_warnings,
    peak_dbfs,
    rms_dbfs,
)
from .sweep import (
    Sweep,
    harmonic_delay,
    instantaneous_frequency,
    inverse_filter,
    sweep_only,
    sweep_signal,
)

__all__ = [
    "Sweep",
    "instantaneous_frequency",
    "harmonic_delay",
    "sweep_only",
    "sweep_signal",
    "inverse_filter",
    "HARMONIC_ORDERS",
    "Extraction",
    "extract_ir",
    "REQUIRED_INR_DB",
    "CLIP_LEVEL",
    "CLIP_RUN",
    "clipped_samples",
    "peak_dbfs",
    "rms_dbfs",
    "energy_envelope",
    "envelope_inr",
    "inr_warnings",
    "load_sounddevice",
    "list_devices",
    "SoundCard",
    "SimulatedDevice",
    "run_measurement",
    "metered_playrec",
]
