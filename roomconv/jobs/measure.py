"""Measurement jobs: write a sweep, extract a response from a recording on disk, and measure
a position through a sound card or a simulated room, with the data-quality report.

Channels count from 1 here, as a person counts them; the numerics below index from 0.
"""

from __future__ import annotations

import dataclasses
from collections.abc import Callable, Sequence
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from .. import safety, validate
from ..audio import WriteGuard, read_audio, read_json, sidecar_path, write_provenance
from ..errors import InputError, describe
from ..measure.deconvolve import HARMONIC_ORDERS, Extraction, extract_ir
from ..measure.sweep import Sweep, sweep_signal
from ..signal import db_to_gain
from .guard import guarded
from .naming import harmonic_output
from .progress import ProgressCallback, silent

__all__ = [
    "write_sweep",
    "sweep_inputs",
    "load_sweep",
    "extract_recording",
    "measure_position",
    "level_check",
    "MeasureResult",
    "LEVEL_CHECK_DBFS",
    "LEVEL_CHECK_HZ",
    "LEVEL_CHECK_S",
]

#: The level-check tone: 1 kHz for 2 s at -40 dBFS, well below the sweep's start level
#: (common practice: check the gain structure with a quiet tone before a loud sweep).
LEVEL_CHECK_HZ, LEVEL_CHECK_S, LEVEL_CHECK_DBFS = 1000.0, 2.0, -40.0


def write_sweep(output, sweep: Sweep, *, subtype: str = "FLOAT", force: bool = False) -> Path:
    """Write the playback WAV and its ``.sweep.json`` sidecar (both planned first).

    Examples
    --------
    >>> import tempfile, pathlib, numpy as np, soundfile
    >>> tmp = tempfile.TemporaryDirectory()
    >>> d = pathlib.Path(tmp.name)
    >>> from roomconv.measure.sweep import Sweep
    >>> write_sweep(d / "sweep.wav", Sweep(duration=0.5)).name
    'sweep.wav'
    >>> sorted(p.name for p in d.iterdir())
    ['sweep.sweep.json', 'sweep.wav']
    >>> tmp.cleanup()
    """
    with guarded(force=force) as g:
        side = sidecar_path(output, "sweep")
        g.file(output)
        g.file(side)
        g.write_audio(output, sweep_signal(sweep), sweep.rate, subtype=subtype)
        g.write_json(side, sweep.to_dict())
    return Path(output)


def sweep_inputs(sweep_path) -> list[Path]:
    """The files a job reading ``sweep_path`` reads: the WAV and, when present, its sidecar.

    Examples
    --------
    >>> import tempfile, pathlib, numpy as np, soundfile
    >>> tmp = tempfile.TemporaryDirectory()
    >>> d = pathlib.Path(tmp.name)
    >>> from roomconv.measure.sweep import Sweep, sweep_signal
    >>> s = Sweep(duration=0.5, silence_pre=0.1, silence_post=0.3)
    >>> _ = write_sweep(d / "sweep.wav", s)
    >>> [p.name for p in sweep_inputs(d / "sweep.wav")]
    ['sweep.wav', 'sweep.sweep.json']
    >>> tmp.cleanup()
    """
    return [Path(sweep_path), sidecar_path(sweep_path, "sweep")]


def load_sweep(path) -> tuple[np.ndarray, int, Sweep | None, str | None]:
    """Read a sweep WAV and, when present and consistent, its sidecar.

    Returns ``(signal_1d, rate, sweep_or_None, note)``; ``note`` says why a sidecar was ignored.

    Examples
    --------
    >>> import tempfile, pathlib, numpy as np, soundfile
    >>> tmp = tempfile.TemporaryDirectory()
    >>> d = pathlib.Path(tmp.name)
    >>> from roomconv.measure.sweep import Sweep, sweep_signal
    >>> s = Sweep(duration=0.5, silence_pre=0.1, silence_post=0.3)
    >>> _ = write_sweep(d / "sweep.wav", s)
    >>> signal, rate, described, note = load_sweep(d / "sweep.wav")
    >>> rate, described == s, note
    (48000, True, None)
    >>> tmp.cleanup()
    """
    data, rate = read_audio(path, what="sweep file")
    sig = data[:, 0]
    side = sidecar_path(path, "sweep")
    if not side.exists():
        return sig, rate, None, f"no sidecar {side.name}: using regularized spectral division"
    d = read_json(side, what="sweep sidecar")
    sweep = Sweep.from_dict(d, source=side)
    if sweep.rate != rate or sweep.n_total != sig.size:
        return (
            sig,
            rate,
            None,
            (
                f"sidecar {side.name} does not match the WAV (rate or length "
                "differ): using regularized spectral division"
            ),
        )
    return sig, rate, sweep, None


@dataclass
class MeasureResult:
    """What a measurement or extraction job wrote and found.

    Examples
    --------
    See :func:`extract_recording` and :func:`measure_position`, which return one.
    """

    output: Path
    extraction: Extraction
    written: list[Path] = field(default_factory=list)
    notes: list[str] = field(default_factory=list)
    simulated: bool = False

    @property
    def quality(self) -> dict:
        """The extraction's quality figures, JSON-ready (see
        :class:`~roomconv.measure.deconvolve.Extraction`)."""
        return self.extraction.quality


def _reference_index(reference_channel: int | None, n_channels: int, what: str) -> int | None:
    """1-based loopback channel → 0-based index, refused when the recording lacks it."""
    if reference_channel is None:
        return None
    if not 1 <= reference_channel <= n_channels:
        raise InputError(
            f"reference channel {reference_channel} does not exist: {what} has "
            f"{n_channels} channel(s), 1 to {n_channels} (channels count from 1)"
        )
    return reference_channel - 1


def _plan(
    g: WriteGuard,
    output,
    harmonics_dir,
    json_path,
    save_recording=None,
    harmonic_provenance: bool = False,
) -> None:
    g.file(output)
    g.file(sidecar_path(output, "provenance"))
    if json_path is not None:
        g.file(json_path)
    if harmonics_dir is not None:
        hdir = g.folder(harmonics_dir)
        for k in HARMONIC_ORDERS:
            g.file(harmonic_output(hdir, output, k))
            if harmonic_provenance:
                g.file(sidecar_path(harmonic_output(hdir, output, k), "provenance"))
    if save_recording is not None:
        g.file(save_recording)


def _save(
    g: WriteGuard,
    ex: Extraction,
    output,
    harmonics_dir,
    json_path,
    inputs,
    settings: dict,
    harmonic_provenance: bool = False,
) -> list[Path]:
    sources = [p for p in inputs if Path(p).is_file()]
    written = [g.write_audio(output, ex.ir, ex.rate)]
    if harmonics_dir is not None:
        for k in sorted(ex.harmonics):
            path = harmonic_output(harmonics_dir, output, k)
            written.append(g.write_audio(path, ex.harmonics[k], ex.rate))
            if harmonic_provenance:
                written.append(
                    write_provenance(path, sources, {**settings, "harmonic_order": k}, guard=g)
                )
    if json_path is not None:
        written.append(g.write_json(json_path, ex.quality))
    written.append(write_provenance(output, sources, settings, guard=g))
    return written


def add_distortion(ex, sweep: Sweep | None) -> None:
    """Put the harmonic levels of each channel into the extraction's quality report (a
    measurement without a sweep description has no separable harmonics)."""
    from ..measure.distortion import NOISE_MARGIN_DB, harmonic_levels, ideal_responses

    if sweep is None or not ex.harmonics:
        return
    ideal = ideal_responses(sweep, (ex.ir.shape[0] + ex.trimmed_samples) / ex.rate)
    ex.quality["distortion"] = {
        "reference": "dB re the linear response; floor = noise from the response's last "
        "quarter + the method's leak for this sweep",
        "noise_margin_db": NOISE_MARGIN_DB,
        "channels": harmonic_levels(
            ex.ir, ex.harmonics, ex.rate, (sweep.f_low, sweep.f_high), ideal=ideal
        ),
    }


def extract_recording(
    recording,
    sweep_path,
    output,
    *,
    reference_channel: int | None = None,
    length_s: float | None = None,
    trim: bool = False,
    harmonics_dir=None,
    json_path=None,
    allow_clipped: bool = False,
    force: bool = False,
    settings: dict | None = None,
    progress: ProgressCallback = silent,
) -> MeasureResult:
    """Deconvolve a recorded sweep on disk into an impulse response and save it.

    Parameters
    ----------
    recording, sweep_path, output : path-like
        The recording, the sweep WAV that was played (its ``.sweep.json`` sidecar is used
        when present), the response to write.
    reference_channel : int, optional
        1-based channel of the recording that holds the loopback.
    length_s : float, optional
        Response length, s (default: the silence after the sweep).
    harmonics_dir, json_path : path-like, optional
        Also write harmonic responses into this folder / the quality report as JSON.

    Examples
    --------
    A recording delayed by 100 samples gives a response whose peak is at sample 100:

    >>> import tempfile, pathlib, numpy as np, soundfile
    >>> tmp = tempfile.TemporaryDirectory()
    >>> d = pathlib.Path(tmp.name)
    >>> from roomconv.measure.sweep import Sweep, sweep_signal
    >>> s = Sweep(duration=0.5, silence_pre=0.1, silence_post=0.3)
    >>> _ = write_sweep(d / "sweep.wav", s)
    >>> rec = np.concatenate([np.zeros(100), sweep_signal(s)])
    >>> soundfile.write(d / "rec.wav", rec, s.rate, subtype="DOUBLE")
    >>> res = extract_recording(d / "rec.wav", d / "sweep.wav", d / "ir.wav", length_s=0.1)
    >>> int(np.argmax(np.abs(res.extraction.ir[:, 0]))), [p.name for p in res.written]
    (100, ['ir.wav', 'ir.provenance.json'])
    >>> tmp.cleanup()
    """
    inputs = [Path(recording), *sweep_inputs(sweep_path)]
    with guarded(inputs, force=force) as g:
        _plan(g, output, harmonics_dir, json_path)
        progress("read", 0.0, None)
        rec, rate = read_audio(recording, what="recording")
        sig, s_rate, sweep, note = load_sweep(sweep_path)
        if rate != s_rate:
            raise InputError(
                describe(
                    recording,
                    f"recorded at {rate} Hz but the sweep "
                    f"{Path(sweep_path).name} is at {s_rate} Hz",
                    "record at the sweep's sample rate",
                )
            )
        ref = _reference_index(reference_channel, rec.shape[1], f"{Path(recording).name}")
        progress("extract", 0.3, None)
        try:
            ex = extract_ir(
                rec,
                rate,
                sweep=sweep,
                excitation=None if sweep else sig,
                reference_channel=ref,
                length_s=length_s,
                harmonics=True,
                trim=trim,
                allow_clipped=allow_clipped,
            )
        except InputError as exc:
            raise InputError(describe(recording, str(exc))) from None
        add_distortion(ex, sweep)
        progress("save", 0.9, None)
        written = _save(
            g, ex, output, harmonics_dir, json_path, [recording, sweep_path], settings or {}
        )
    progress("done", 1.0, None)
    return MeasureResult(Path(output), ex, written, [note] if note else [])


def measure_position(
    output,
    sweep: Sweep,
    *,
    simulate=None,
    simulated_device=None,
    confirm: Callable[[], None] | None = None,
    device=None,
    output_channel: int = 1,
    input_channels: Sequence[int] = (1,),
    reference_channel: int | None = None,
    sim_latency_samples: int = 0,
    sim_noise_dbfs: float = -90.0,
    seed: int = 0,
    match_simulated_rate: bool = False,
    length_s: float | None = None,
    trim: bool = False,
    harmonics_dir=None,
    json_path=None,
    save_recording=None,
    allow_clipped: bool = False,
    harmonic_provenance: bool = False,
    force: bool = False,
    settings: dict | None = None,
    progress: ProgressCallback = silent,
    on_level: Callable[[float, float], None] | None = None,
) -> MeasureResult:
    """Play ``sweep`` and record it (sound card or simulated room), extract and save.

    Parameters
    ----------
    output : path-like
        The response to write (with its provenance sidecar).
    sweep : Sweep
        The sweep; its level is checked against the output cap before anything plays.
    simulate : path-like, optional
        Rehearse on this room response instead of a sound card (nothing is played).
    simulated_device : SimulatedDevice, optional
        A simulated chain prepared by the caller (the demo's), used as it is.
    confirm : callable, optional
        Called once before any sound is played, after every check: it shows the hearing
        and equipment caution and raises to refuse. Required for a sound card.
    device, output_channel, input_channels
        Sound card (index or part of a name) and 1-based channels.
    reference_channel : int, optional
        1-based recorded channel holding the loopback; with ``simulate``, the simulated
        card adds the loopback after the room's channels.
    sim_latency_samples, sim_noise_dbfs, seed
        The simulated card's latency, noise level and noise seed.
    match_simulated_rate : bool
        Measure a simulated room at its own sample rate (otherwise a different rate is
        refused).
    harmonic_provenance : bool
        Also write a provenance sidecar beside each harmonic response.
    on_level : callable, optional
        ``on_level(peak_dbfs, fraction)`` about every 0.1 s while the sweep plays: the input
        level for a meter.

    Examples
    --------
    A simulated room that only delays by 50 samples (no sound is played):

    >>> import tempfile, pathlib, numpy as np, soundfile
    >>> tmp = tempfile.TemporaryDirectory()
    >>> d = pathlib.Path(tmp.name)
    >>> from roomconv.measure.sweep import Sweep
    >>> room = np.zeros(2000)
    >>> room[50] = 0.5
    >>> soundfile.write(d / "room.wav", room, 48000)
    >>> res = measure_position(d / "ir.wav", Sweep(duration=0.5, silence_post=0.3),
    ...                        simulate=d / "room.wav", length_s=0.1)
    >>> res.simulated, int(np.argmax(np.abs(res.extraction.ir[:, 0])))
    (True, 50)
    >>> tmp.cleanup()
    """
    from ..measure.capture import SimulatedDevice, SoundCard, metered_playrec, run_measurement

    safety.check_level(sweep.level_dbfs)
    validate.memory_budget(sim_latency_samples, "this simulated latency")
    simulated = simulate is not None or simulated_device is not None
    if not simulated and confirm is None:
        raise InputError(
            "sound would be played without the hearing caution being shown and confirmed"
        )
    if not simulated:
        _reference_index(reference_channel, len(input_channels), "the recording")
    inputs = [simulate] if simulate is not None else []
    with guarded(inputs, force=force) as g:
        # Every output is planned before any sound.
        _plan(g, output, harmonics_dir, json_path, save_recording, harmonic_provenance)
        if simulated_device is not None:
            dev = simulated_device
            n_rec = np.atleast_2d(np.asarray(dev.ir).T).shape[0] + bool(dev.loopback)
            ref = _reference_index(reference_channel, n_rec, "the simulated recording")
        elif simulate is not None:
            ir, ir_rate = read_audio(simulate, what="simulated room IR")
            if ir_rate != sweep.rate:
                if not match_simulated_rate:
                    raise InputError(
                        describe(
                            simulate,
                            f"the simulated room is at {ir_rate} "
                            f"Hz but the sweep at {sweep.rate} Hz",
                            f"measure at {ir_rate} Hz",
                        )
                    )
                sweep = dataclasses.replace(sweep, rate=ir_rate)
            n_rec = ir.shape[1] + (reference_channel is not None)
            ref = _reference_index(reference_channel, n_rec, "the simulated recording")
            dev = SimulatedDevice(
                ir,
                latency_samples=sim_latency_samples,
                noise_dbfs=sim_noise_dbfs,
                loopback=reference_channel is not None,
                seed=seed,
            )
        else:
            ref = _reference_index(reference_channel, len(input_channels), "the recording")
            dev = SoundCard(
                device=device, output_channel=output_channel, input_channels=tuple(input_channels)
            )
            assert confirm is not None
            confirm()
        progress(
            "play and record",
            0.0,
            "simulated device: no sound will be played" if simulated else None,
        )
        if on_level is not None:
            # run_measurement keeps its level check and tail; the device reports as it goes.
            dev = _Metered(dev, on_level, metered_playrec)
        rec = run_measurement(dev, sweep_signal(sweep), sweep.rate, tail_s=0.5)
        progress("extract", 0.7, None)
        # Extract before writing anything, so a failed extraction leaves no recording behind.
        ex = extract_ir(
            rec,
            sweep.rate,
            sweep=sweep,
            reference_channel=ref,
            length_s=length_s,
            harmonics=True,
            trim=trim,
            allow_clipped=allow_clipped,
        )
        add_distortion(ex, sweep)
        written = []
        if save_recording is not None:
            written.append(g.write_audio(save_recording, rec, sweep.rate))
        written += _save(
            g,
            ex,
            output,
            harmonics_dir,
            json_path,
            inputs,
            {**(settings or {}), "sweep": sweep.to_dict()},
            harmonic_provenance,
        )
    progress("done", 1.0, None)
    return MeasureResult(Path(output), ex, written, simulated=simulated)


class _Metered:
    """A device whose ``playrec`` reports the input level while it plays."""

    def __init__(self, device, on_level, metered_playrec):
        self.device, self.on_level, self._run = device, on_level, metered_playrec

    def playrec(self, signal, rate):
        return self._run(self.device, signal, rate, self.on_level)


def level_check(
    *,
    simulate=None,
    confirm: Callable[[], None] | None = None,
    device=None,
    output_channel: int = 1,
    input_channels: Sequence[int] = (1,),
    rate_hz: int = 48000,
    on_level=None,
) -> float:
    """Play a quiet ramped tone and return the input peak in dBFS.

    ``on_level(peak_dbfs, fraction)`` is called about every 0.1 s for a live meter. A sound
    card needs ``confirm`` (see :func:`measure_position`).

    Examples
    --------
    Through a simulated room of gain 0.5 (no sound is played), the −40 dBFS tone arrives at
    about 20·lg(0.5) − 40 = −46 dBFS:

    >>> import tempfile, pathlib, numpy as np, soundfile
    >>> tmp = tempfile.TemporaryDirectory()
    >>> d = pathlib.Path(tmp.name)
    >>> room = np.zeros(2000)
    >>> room[50] = 0.5
    >>> soundfile.write(d / "room.wav", room, 48000)
    >>> round(level_check(simulate=d / "room.wav"))
    -46
    >>> tmp.cleanup()
    """
    from ..measure.capture import SimulatedDevice, SoundCard, metered_playrec

    if simulate is not None:
        ir, rate_hz = read_audio(simulate, what="simulated room IR")
        dev: object = SimulatedDevice(ir, noise_dbfs=-90.0)
    else:
        if confirm is None:
            raise InputError(
                "sound would be played without the hearing caution being shown and confirmed"
            )
        dev = SoundCard(
            device=device, output_channel=output_channel, input_channels=tuple(input_channels)
        )
        confirm()
    t = np.arange(int(LEVEL_CHECK_S * rate_hz)) / rate_hz
    tone = safety.apply_ramps(
        db_to_gain(LEVEL_CHECK_DBFS) * np.sin(2 * np.pi * LEVEL_CHECK_HZ * t), rate_hz
    )
    peaks: list[float] = []

    def meter(peak_db, frac):
        peaks.append(peak_db)
        if on_level is not None:
            on_level(peak_db, frac)

    metered_playrec(dev, tone, rate_hz, meter)
    return max(peaks) if peaks else float("-inf")
