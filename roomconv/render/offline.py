"""Offline rendering of files of any length: read in blocks, convolve, mix, measure, write
progressively to a temporary file, then scale/dither into the final file and rename.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import asdict, dataclass, field
from pathlib import Path

import numpy as np
import soundfile as sf

from .. import validate
from ..audio import (
    WriteGuard,
    audio_format_for,
    audio_info,
    drop_temp,
    new_temp,
    read_audio,
    write_error,
)
from ..errors import InputError, describe
from ..signal import db_to_gain, resample
from .levels import LoudnessMeter, PeakMeter, TruePeakMeter
from .mix import ir_gain, wet_dry_db
from .partitioned import Routing, offline_convolver, routing_for

__all__ = [
    "NORMALIZE",
    "DEFAULT_TARGET",
    "INTEGER_SUBTYPES",
    "LOUDNESS_TOLERANCE_LU",
    "LOUDNESS_TARGET_MIN",
    "RenderSettings",
    "RenderReport",
    "resample_ir",
    "prepare_ir",
    "dry_routed",
    "render_arrays",
    "render_file",
]

NORMALIZE = ("none", "peak", "truepeak", "loudness")
DEFAULT_TARGET = {"peak": -1.0, "truepeak": -1.0, "loudness": -23.0}
INTEGER_SUBTYPES = {"PCM_16": 16, "PCM_24": 24, "PCM_32": 32, "PCM_S8": 8, "PCM_U8": 8}
#: Loudness normalization stops when the measured loudness is this close to the target, LU.
LOUDNESS_TOLERANCE_LU = 0.05
#: Lowest loudness target: 10 LU above the absolute gate of BS.1770 (−70 LUFS), so that
#: the gated measurement still has blocks to average.
LOUDNESS_TARGET_MIN = -60.0


@dataclass
class RenderSettings:
    """What a render does besides the convolution itself.

    Parameters
    ----------
    mix : float
        Wet share, 0 (dry only) to 1 (wet only).
    predelay_ms : float
        Silence put in front of the response, ms.
    gain_db : float
        Output gain, dB (−100 to +60).
    normalize : str
        ``"none"``, ``"peak"`` (dBFS), ``"truepeak"`` (dBTP, ITU-R BS.1770-4 annex 2) or
        ``"loudness"`` (LUFS, ITU-R BS.1770-4).
    target : float, optional
        The normalization target in the unit ``normalize`` implies; defaults in
        :data:`DEFAULT_TARGET`.
    subtype : str
        soundfile subtype of the output (``"FLOAT"``, ``"DOUBLE"``, ``"PCM_24"``, ...).
    precision : str
        Engine arithmetic: ``"auto"``, ``"float64"`` or ``"float32"``
        (see :meth:`engine_precision`).
    outputs : int, optional
        General matrix routing: outputs per input.
    shared : bool
        Use one response channel for every input.
    keep_tail : bool
        Keep the decay after the dry signal ends (output is dry + response − 1 samples long).
    dither : bool
        TPDF dither when writing integer subtypes.
    seed : int
        Seed of the dither.
    match_ir_level : bool
        Scale the response to unit energy per output before mixing (:mod:`roomconv.render.mix`).
    ir_measurement : int, optional
        The measurement of a SOFA response set to render through, counted from 1 (a set of
        one measurement needs none).

    References
    ----------
    ITU-R BS.1770-4 (2015), loudness and true peak (``normalize``).
    Lipshitz, S. P., Wannamaker, R. A., Vanderkooy, J. (1992). Quantization and dither: a
    theoretical survey. J. Audio Eng. Soc. 40(5), 355–375 (TPDF dither; cited from memory).

    Examples
    --------
    >>> s = RenderSettings(mix=0.3, predelay_ms=12.0).check()
    >>> s.engine_precision()
    'float32'
    """

    mix: float = 1.0  #: 0 = dry only, 1 = wet only
    predelay_ms: float = 0.0
    gain_db: float = 0.0
    normalize: str = "none"  #: none | peak | truepeak | loudness
    target: float | None = None  #: dBFS, dBTP or LUFS depending on ``normalize``
    subtype: str = "FLOAT"
    precision: str = "auto"  #: auto | float64 | float32 (see engine_precision)
    outputs: int | None = None  #: general matrix routing: outputs per input
    shared: bool = False  #: one IR channel for every input
    keep_tail: bool = True
    dither: bool = True
    seed: int = 0
    #: scale the response to unit energy per output before mixing (see render.mix)
    match_ir_level: bool = False
    #: one measurement of a SOFA response set, counted from 1
    ir_measurement: int | None = None

    def check(self) -> RenderSettings:
        """Check every value, raising :class:`~roomconv.errors.InputError` for a bad one.

        Returns
        -------
        RenderSettings
            ``self``, with numbers parsed (so ``mix="0.5"`` becomes 0.5).

        Examples
        --------
        >>> RenderSettings(mix=2.0).check()
        Traceback (most recent call last):
        ...
        roomconv.errors.InputError: ...
        """
        self.mix = validate.in_range(self.mix, "wet/dry mix", 0.0, 1.0)
        self.predelay_ms = validate.non_negative(self.predelay_ms, "pre-delay", unit="ms")
        self.gain_db = validate.in_range(self.gain_db, "output gain", -100.0, 60.0, unit="dB")
        if self.target is not None:
            lo = LOUDNESS_TARGET_MIN if self.normalize == "loudness" else -100.0
            self.target = validate.in_range(self.target, "normalization target", lo, 0.0)
        if self.normalize not in NORMALIZE:
            raise InputError(
                f"normalization '{self.normalize}' must be one of {', '.join(NORMALIZE)}"
            )
        if self.precision not in ("auto", "float64", "float32"):
            raise InputError(
                f"engine precision '{self.precision}' must be auto, float64 or float32"
            )
        if self.ir_measurement is not None and (
            isinstance(self.ir_measurement, bool)
            or not isinstance(self.ir_measurement, int)
            or self.ir_measurement < 1
        ):
            raise InputError(
                f"measurement {self.ir_measurement!r} must be a whole number from 1 up"
            )
        return self

    def engine_precision(self) -> str:
        """The engine's arithmetic: ``auto`` means float32 unless the file keeps doubles.

        The float32 engine's error is about −130 dB relative to the signal (measured against
        fftconvolve in the tests), far below audibility and below what a 16-bit file or a
        24-bit converter resolves; DOUBLE files are computed in float64.

        Returns
        -------
        str
            ``"float32"`` or ``"float64"``.

        Examples
        --------
        >>> RenderSettings(subtype="DOUBLE").engine_precision()
        'float64'
        """
        if self.precision != "auto":
            return self.precision
        return "float64" if self.subtype == "DOUBLE" else "float32"

    def as_dict(self) -> dict:
        """The settings as a JSON-ready dict (for provenance).

        Returns
        -------
        dict

        Examples
        --------
        >>> RenderSettings().as_dict()["mix"]
        1.0
        """
        d = asdict(self)
        if d["ir_measurement"] is None:
            # Left out unless set, so that sidecars written before SOFA sets still match.
            del d["ir_measurement"]
        return d


@dataclass
class RenderReport:
    """What :func:`render_file` did.

    Attributes
    ----------
    output : Path
        The file written.
    frames : int
        Samples per channel written.
    channels : int
        Output channels.
    rate : int
        Sample rate, Hz.
    routing : str
        Name of the routing (e.g. ``"true stereo"``).
    peak_dbfs : float
        Sample peak after gain and normalization, dBFS.
    true_peak_dbtp : float, optional
        True peak, dBTP (with ``normalize="truepeak"``).
    loudness_lufs : float, optional
        Integrated loudness, LUFS (with ``normalize="loudness"``).
    gain_db : float
        Gain applied by normalization, dB.
    ir_resampled_from : int, optional
        The response's own rate, Hz, when it was resampled.
    wet_dry_db : float, optional
        Wet-to-dry balance for broadband input, dB (:func:`~roomconv.render.mix.wet_dry_db`).
    warnings : list of str

    Examples
    --------
    >>> RenderReport("wet.wav", 48000, 2, 48000, "stereo", -6.0).gain_db
    0.0
    """

    output: Path
    frames: int
    channels: int
    rate: int
    routing: str
    peak_dbfs: float  #: after gain/normalization
    true_peak_dbtp: float | None = None
    loudness_lufs: float | None = None
    gain_db: float = 0.0
    ir_resampled_from: int | None = None
    wet_dry_db: float | None = None  #: wet-to-dry balance for broadband input (render.mix)
    warnings: list = field(default_factory=list)


def resample_ir(ir: np.ndarray, rate: int, new_rate: int) -> np.ndarray:
    """Resample an impulse response, keeping its level (gain is preserved in band).

    Uses :func:`roomconv.signal.resample` (soxr, very high quality).

    Parameters
    ----------
    ir : ndarray, shape (taps,) or (taps, channels)
    rate : int
        Its sample rate, Hz.
    new_rate : int
        The wanted sample rate, Hz.

    Returns
    -------
    ndarray, shape (about taps·new_rate/rate, channels)
        float64, always 2-D.

    Examples
    --------
    >>> resample_ir(np.ones(480), 48000, 44100).shape
    (441, 1)
    """
    y = resample(ir, rate, new_rate)
    return y.reshape(y.shape[0], -1)


def prepare_ir(
    ir: np.ndarray, ir_rate: int, rate: int, predelay_ms: float
) -> tuple[np.ndarray, int | None]:
    """Bring a response to the render's rate and put the pre-delay in front of it.

    Parameters
    ----------
    ir : ndarray, shape (taps,) or (taps, channels)
    ir_rate : int
        The response's sample rate, Hz.
    rate : int
        The render's sample rate, Hz.
    predelay_ms : float
        Silence put in front, ms.

    Returns
    -------
    ir : ndarray, shape (taps', channels)
    resampled_from : int or None
        ``ir_rate`` when the response was resampled.

    Examples
    --------
    >>> ir, was = prepare_ir(np.ones(4), 48000, 48000, predelay_ms=0.125)
    >>> ir[:, 0].tolist(), was
    ([0.0, 0.0, 0.0, 0.0, 0.0, 0.0, 1.0, 1.0, 1.0, 1.0], None)
    """
    ir = ir[:, None] if ir.ndim == 1 else ir
    resampled = None
    if ir_rate != rate:
        ir = resample_ir(ir, ir_rate, rate)
        resampled = ir_rate
    d = validate.seconds_budget(predelay_ms / 1000.0, rate, "pre-delay", channels=ir.shape[1])
    if d:
        ir = np.concatenate([np.zeros((d, ir.shape[1])), ir])
    return ir, resampled


def dry_routed(x: np.ndarray, n_out: int) -> np.ndarray:
    """The dry signal laid out on the outputs, for mixing: as it is, or one channel repeated.

    Parameters
    ----------
    x : ndarray, shape (samples, inputs)
    n_out : int
        Output channels.

    Returns
    -------
    ndarray, shape (samples, n_out)

    Raises
    ------
    InputError
        When several inputs cannot be laid out on a different number of outputs.

    Examples
    --------
    >>> dry_routed(np.array([[1.0], [2.0]]), 2).tolist()
    [[1.0, 1.0], [2.0, 2.0]]
    """
    if x.shape[1] == n_out:
        return x
    if x.shape[1] == 1:
        return np.repeat(x, n_out, axis=1)
    raise InputError(
        "the dry signal cannot be mixed in: inputs and outputs differ in count "
        "(use a fully wet mix, 1)"
    )


def _wet_dry(conv, x: np.ndarray, mix: float, n_out: int) -> np.ndarray:
    """The engine's next block for input ``x`` (a short last block is zero-padded by the
    engine), with the dry signal mixed in when ``mix`` < 1."""
    y = conv.process(x)
    if mix < 1.0:
        dry = np.zeros((conv.block, x.shape[1]))
        dry[: x.shape[0]] = x
        y = mix * y + (1 - mix) * dry_routed(dry, n_out)
    return y


def render_arrays(
    dry: np.ndarray, ir: np.ndarray, rate: int, settings: RenderSettings, ir_rate: int | None = None
) -> np.ndarray:
    """In-memory render: convolution, pre-delay, mix and gain (no normalization or dither).

    Parameters
    ----------
    dry : ndarray, shape (samples,) or (samples, inputs)
        The dry signal.
    ir : ndarray, shape (taps,) or (taps, channels)
        The impulse response.
    rate : int
        Sample rate of ``dry``, Hz.
    settings : RenderSettings
    ir_rate : int, optional
        Sample rate of ``ir``, Hz, when it differs (it is resampled).

    Returns
    -------
    ndarray, shape (samples [+ taps − 1], outputs)
        float64.

    Examples
    --------
    >>> y = render_arrays(np.array([1.0, 0.0, 0.0]), np.array([0.5, 0.25]), 48000,
    ...                   RenderSettings(mix=1.0))
    >>> y[:, 0].tolist()
    [0.5, 0.25, 0.0, 0.0]
    """
    s = settings.check()
    dry = dry[:, None] if dry.ndim == 1 else dry
    ir, _ = prepare_ir(ir, ir_rate or rate, rate, s.predelay_ms)
    routing = routing_for(dry.shape[1], ir.shape[1], outputs=s.outputs, shared=s.shared)
    ir = ir * ir_gain(ir, routing, s.match_ir_level)
    n_out = dry.shape[0] + ir.shape[0] - 1 if s.keep_tail else dry.shape[0]
    # In memory the result stays float64, so "auto" computes in float64 here.
    conv = offline_convolver(
        ir, routing, precision="float64" if s.precision == "auto" else s.precision
    )
    B = conv.block
    out = np.empty((n_out, routing.n_out))
    try:
        for start in range(0, n_out, B):
            y = _wet_dry(conv, dry[start : start + B], s.mix, routing.n_out)
            n = min(B, n_out - start)
            out[start : start + n] = y[:n]
    finally:
        conv.close()
    return out * db_to_gain(s.gain_db)


def _audio_rate(rate: int, path) -> None:
    """Refuse a file whose sample rate no audio interface uses (1 Hz, 7 Hz…): rendering
    through it would resample by absurd factors or write an unplayable file."""
    if not validate.RATE_MIN <= rate <= validate.RATE_MAX:
        raise InputError(
            describe(
                path,
                f"its sample rate {rate} Hz is outside {validate.RATE_MIN}–{validate.RATE_MAX} Hz",
            )
        )


def render_file(
    dry_path,
    ir_path,
    out_path,
    settings: RenderSettings,
    *,
    force: bool = False,
    progress: Callable[[float], None] | None = None,
    workers: int | None = None,
    guard: WriteGuard | None = None,
) -> RenderReport:
    """Render ``dry_path`` through ``ir_path`` into ``out_path`` in bounded memory.

    The dry file is read in blocks, convolved, mixed and written to a temporary file; a
    second pass applies normalization and dither, and the result is renamed into place.

    Parameters
    ----------
    dry_path, ir_path : str or Path
        The dry audio and the impulse response (resampled to the dry file's rate if needed).
    out_path : str or Path
        The output audio file.
    settings : RenderSettings
    force : bool
        Replace an existing output (never an input).
    progress : callable, optional
        Called with the fraction done (0–1) as blocks are written.
    workers : int, optional
        FFT threads (default every core; a batch gives each job one).
    guard : WriteGuard, optional
        The command's write guard (it knows all the command's inputs); by default one that
        knows the dry file and the response, with ``force``.

    Returns
    -------
    RenderReport

    Raises
    ------
    InputError
        For an unreadable, empty or silent input, a routing that does not fit, a level the
        output cannot hold, or an output that exists (without ``force``) or is an input.

    References
    ----------
    ITU-R BS.1770-4 (2015): loudness and true-peak measurement (``normalize``).

    Examples
    --------
    >>> import tempfile, pathlib, soundfile
    >>> with tempfile.TemporaryDirectory() as tmp:
    ...     d = pathlib.Path(tmp)
    ...     soundfile.write(d / "dry.wav", np.array([0.5, 0.0, 0.0]), 48000, subtype="DOUBLE")
    ...     soundfile.write(d / "ir.wav", np.array([1.0, 0.5]), 48000, subtype="DOUBLE")
    ...     rep = render_file(d / "dry.wav", d / "ir.wav", d / "wet.wav",
    ...                       RenderSettings(subtype="DOUBLE"))
    ...     soundfile.read(d / "wet.wav")[0].tolist()
    [0.5, 0.25, 0.0, 0.0]
    >>> rep.frames, rep.routing
    (4, 'mono')
    """
    s = settings.check()
    dry_path, ir_path, out_path = Path(dry_path), Path(ir_path), Path(out_path)
    own_guard = guard is None
    guard = guard or WriteGuard([dry_path, ir_path], force=force)
    if not guard.planned(out_path):
        guard.file(out_path)
    job = _prepare_inputs(dry_path, ir_path, s)
    n_out = job.frames + job.ir.shape[0] - 1 if s.keep_tail else job.frames
    conv = offline_convolver(job.ir, job.routing, precision=s.engine_precision(), workers=workers)
    n_ch = job.routing.n_out
    fmt = audio_format_for(out_path, n_out * n_ch * (8 if s.subtype == "DOUBLE" else 4))
    if not sf.check_format(fmt, s.subtype):
        raise InputError(describe(out_path, f"the {fmt} format cannot hold subtype {s.subtype}"))

    folder = out_path.parent if str(out_path.parent) else Path(".")
    stage1 = new_temp(folder, out_path)
    final_tmp = new_temp(folder, out_path)
    try:
        meters = _Meters(job.rate, n_ch, s.normalize)
        stage_max = _stage_format(s.subtype)[1]
        _convolve_to_stage(
            dry_path, stage1, out_path, conv, s, n_out, n_ch, job.rate, meters, progress
        )
        report = RenderReport(
            out_path,
            n_out,
            n_ch,
            job.rate,
            job.routing.name,
            meters.peak.dbfs,
            gain_db=s.gain_db,
            ir_resampled_from=job.resampled,
            wet_dry_db=job.balance_db,
        )
        extra_db = _normalization_gain(report, s, meters, stage1, stage_max, out_path)
        integer = s.subtype in INTEGER_SUBTYPES
        _apply_gain_to_report(report, s.gain_db, meters.peak.dbfs, extra_db, integer)
        if extra_db == 0.0 and not integer:
            stage1.replace(final_tmp)
        else:
            _second_pass(
                stage1, final_tmp, fmt, s, float(db_to_gain(extra_db)), conv.block, progress
            )
        guard.commit(final_tmp, out_path)
        if progress:
            progress(1.0)
        return report
    except (OSError, sf.LibsndfileError) as exc:
        translated = write_error(exc, out_path, folder)
        if translated is None:
            raise
        raise translated from None
    finally:
        conv.close()
        for p in (stage1, final_tmp):
            drop_temp(p)
        if own_guard:
            guard.close()


@dataclass
class _Inputs:
    """A render's inputs, read and checked: the dry file's frames, rate (Hz) and channels,
    the response ready to convolve, its original rate when resampled, the routing and the
    wet/dry balance (dB)."""

    frames: int
    rate: int
    channels: int
    ir: np.ndarray
    resampled: int | None
    routing: Routing
    balance_db: float | None


def _prepare_inputs(dry_path: Path, ir_path: Path, s: RenderSettings) -> _Inputs:
    """Read and check both inputs: the dry file's header, the response (resampled to the dry
    rate, pre-delayed, level-matched when asked) and a routing that fits both.

    Refuses an empty dry file, a silent response, an absurd sample rate and a routing or mix
    that cannot work, naming the file.
    """
    info = audio_info(dry_path)
    if info.frames == 0:
        raise InputError(describe(dry_path, "the dry file holds no samples"))
    rate, n_in = info.samplerate, info.channels
    _audio_rate(rate, dry_path)
    ir, ir_rate = read_audio(
        ir_path, what="impulse response", measurement=s.ir_measurement, single=True
    )
    _audio_rate(ir_rate, ir_path)
    if not np.any(ir):
        raise InputError(describe(ir_path, "the impulse response is silent"))
    ir, resampled = prepare_ir(ir, ir_rate, rate, s.predelay_ms)
    try:
        routing = routing_for(n_in, ir.shape[1], outputs=s.outputs, shared=s.shared)
    except InputError as exc:
        raise InputError(f"{dry_path.name} through {ir_path.name}: {exc}") from None
    if s.mix < 1.0:
        dry_routed(np.zeros((1, n_in)), routing.n_out)  # refuse early if it cannot be mixed
    try:
        ir_scale = ir_gain(ir, routing, s.match_ir_level)
    except InputError as exc:
        raise InputError(describe(ir_path, str(exc))) from None
    if ir_scale != 1.0:
        ir = ir * ir_scale
    balance_db = wet_dry_db(s.mix, ir, routing, 1.0)
    return _Inputs(info.frames, rate, n_in, ir, resampled, routing, balance_db)


def _stage_format(subtype: str) -> tuple[str, float]:
    """The staging file's subtype (DOUBLE for a DOUBLE output, else FLOAT) and the largest
    value it holds."""
    stage_sub = "DOUBLE" if subtype == "DOUBLE" else "FLOAT"
    return stage_sub, float(np.finfo(np.float64 if stage_sub == "DOUBLE" else np.float32).max)


class _Meters:
    """The level meters a render feeds as it writes: sample peak always, true peak and
    loudness (ITU-R BS.1770-4) only when the normalization needs them."""

    def __init__(self, rate: int, channels: int, normalize: str):
        self.peak = PeakMeter()
        self.true_peak = TruePeakMeter(channels) if normalize == "truepeak" else None
        self.loudness = LoudnessMeter(rate, channels) if normalize == "loudness" else None

    def feed(self, y: np.ndarray) -> None:
        """Measure the next block (samples × channels)."""
        self.peak.feed(y)
        if self.true_peak is not None:
            self.true_peak.feed(y)
        if self.loudness is not None:
            self.loudness.feed(y)


def _convolve_to_stage(
    dry_path: Path,
    stage_path: Path,
    out_path: Path,
    conv,
    s: RenderSettings,
    n_out: int,
    n_ch: int,
    rate: int,
    meters: _Meters,
    progress: Callable[[float], None] | None,
) -> None:
    """First pass: read the dry file in blocks, convolve and mix, apply the output gain,
    measure and write ``n_out`` frames to a float staging file.

    Refuses NaN or infinite input, and output beyond what the staging format holds (nothing
    is written to the final file then).
    """
    B = conv.block
    integer = s.subtype in INTEGER_SUBTYPES
    stage_sub, stage_max = _stage_format(s.subtype)
    stage_fmt = audio_format_for(
        out_path.with_suffix(".wav"), n_out * n_ch * (8 if stage_sub == "DOUBLE" else 4)
    )
    with (
        sf.SoundFile(str(dry_path)) as src,
        sf.SoundFile(str(stage_path), "w", rate, n_ch, stage_sub, format=stage_fmt) as dst,
    ):
        written = 0
        while written < n_out:
            x = src.read(B, dtype="float64", always_2d=True)
            if x.size and not np.all(np.isfinite(x)):
                raise InputError(describe(dry_path, "holds NaN or infinite samples"))
            # Overflow shows up as inf/NaN and is refused just below with the file's
            # name; numpy's own warning would only add a line pointing at our source.
            with np.errstate(over="ignore", invalid="ignore"):
                y = _wet_dry(conv, x, s.mix, n_ch)
            n = min(B, n_out - written)
            y = y[:n]
            if s.gain_db:
                y = y * db_to_gain(s.gain_db)
            _check_finite(y, out_path)
            meters.feed(y)
            if meters.peak.peak > stage_max:
                raise InputError(
                    describe(
                        out_path.name,
                        f"the rendered signal reaches "
                        f"{20 * np.log10(meters.peak.peak):.0f} dBFS, beyond "
                        f"what a {stage_sub} file holds (lower the gain); "
                        "nothing written",
                    )
                )
            dst.write(y)
            written += n
            if progress:
                progress(
                    0.8 * written / n_out if integer or s.normalize != "none" else written / n_out
                )


def _normalization_gain(
    report: RenderReport,
    s: RenderSettings,
    meters: _Meters,
    stage_path: Path,
    stage_max: float,
    out_path: Path,
) -> float:
    """The gain (dB) that brings the staged render to the normalization target (0 without
    one), recording the measured true peak and loudness on ``report`` first.

    Loudness is measured again with the gain applied until it lands within
    :data:`LOUDNESS_TOLERANCE_LU` (the gates of ITU-R BS.1770-4 make it non-linear).
    Refuses a render too quiet to measure or a gain that would overflow.
    """
    if meters.true_peak is not None:
        meters.true_peak.finish()
        report.true_peak_dbtp = meters.true_peak.dbtp
    if meters.loudness is not None:
        report.loudness_lufs = meters.loudness.integrated()
    if s.normalize == "none":
        return 0.0
    target = s.target if s.target is not None else DEFAULT_TARGET[s.normalize]
    level = {
        "peak": report.peak_dbfs,
        "truepeak": report.true_peak_dbtp,
        "loudness": report.loudness_lufs,
    }[s.normalize]
    if level is None or not np.isfinite(level):
        why = (
            "stays below the −70 LUFS gate of the loudness measurement (normalize the peak instead)"
            if s.normalize == "loudness"
            else "is silent"
        )
        raise InputError(f"{out_path.name}: the rendered signal {why}; nothing to normalize")
    extra_db = target - level
    if s.normalize == "loudness":
        extra_db, measured = _loudness_to_target(
            stage_path, target, extra_db, report.rate, report.channels
        )
        report.loudness_lufs = measured - extra_db  # shifted back by the caller's +=
        if abs(measured - target) > LOUDNESS_TOLERANCE_LU:
            report.warnings.append(
                f"loudness {measured:.2f} LUFS misses the target {target:g} LUFS by "
                f"more than {LOUDNESS_TOLERANCE_LU} LU (the signal is mostly below "
                "the measurement's −70 LUFS gate)"
            )
    with np.errstate(over="ignore"):
        scaled_peak = meters.peak.peak * db_to_gain(extra_db)
    if not (np.isfinite(extra_db) and scaled_peak <= stage_max):
        raise InputError(
            f"{out_path.name}: normalization would need a gain of "
            f"{extra_db:g} dB, which overflows; nothing written"
        )
    return extra_db


def _apply_gain_to_report(
    report: RenderReport, gain_db: float, peak_dbfs: float, extra_db: float, integer: bool
) -> None:
    """Shift the report's levels by the normalization gain ``extra_db`` (dB) and warn when
    the output peak lands above full scale."""
    report.gain_db = gain_db + extra_db
    report.peak_dbfs = peak_dbfs + extra_db
    if report.true_peak_dbtp is not None:
        report.true_peak_dbtp += extra_db
    if report.loudness_lufs is not None:
        report.loudness_lufs += extra_db
    if report.peak_dbfs > 0:
        msg = f"output peak {report.peak_dbfs:+.1f} dBFS is above full scale"
        msg += (
            ": it will clip in this integer format; lower the gain or normalize the peak"
            if integer
            else "; a later conversion to integer would clip"
        )
        report.warnings.append(msg)


def _second_pass(src_path, dst_path, fmt, s: RenderSettings, gain: float, B: int, progress):
    """Scale, add TPDF dither for integer formats, clip to the format and write."""
    bits = INTEGER_SUBTYPES.get(s.subtype)
    rng = np.random.default_rng(s.seed)
    with (
        sf.SoundFile(str(src_path)) as src,
        sf.SoundFile(
            str(dst_path), "w", src.samplerate, src.channels, s.subtype, format=fmt
        ) as dst,
    ):
        total, done = src.frames, 0
        while True:
            y = src.read(max(B, 65536), dtype="float64", always_2d=True)
            if not y.size:
                break
            y = y * gain
            if bits:
                # Quantize here (round to nearest): libsndfile's own float→int conversion
                # truncates, which would bias the error by half a step.
                scale = 2.0 ** (bits - 1)
                if s.dither:
                    # TPDF: the sum of two independent uniform variables of ±½ LSB.
                    y = y + (rng.random(y.shape) - rng.random(y.shape)) / scale
                q = np.clip(np.round(y * scale), -scale, scale - 1)
                y = (q * 2.0 ** (32 - bits)).astype(np.int32)
            dst.write(y)
            done += y.shape[0]
            if progress:
                progress(0.8 + 0.2 * done / total)


def _check_finite(y: np.ndarray, out_path) -> None:
    """Refuse to write a block holding NaN or ±inf (a file of them plays as silence or as
    a full-scale burst, and is never what was asked for)."""
    if not np.all(np.isfinite(y)):
        raise InputError(
            describe(
                Path(out_path).name,
                "the rendered signal holds NaN or infinite samples (check "
                "the gain and the normalization target); nothing written",
            )
        )


def _measure_loudness(path, gain_db: float, rate: int, channels: int) -> float:
    """Integrated loudness of the staged file scaled by ``gain_db``, block by block."""
    meter = LoudnessMeter(rate, channels)
    g = db_to_gain(gain_db)
    with sf.SoundFile(str(path)) as src:
        while True:
            y = src.read(1 << 16, dtype="float64", always_2d=True)
            if not y.size:
                break
            meter.feed(y * g)
    return meter.integrated()


def _loudness_to_target(
    path, target: float, gain_db: float, rate: int, channels: int, tries: int = 4
) -> tuple[float, float]:
    """Gain (dB) that brings the staged file to ``target`` LUFS, and the loudness measured
    with it.

    Integrated loudness is not scale-invariant: the absolute gate (−70 LUFS) admits more or
    fewer 400 ms blocks as the gain changes, so the one-step gain ``target − measured`` can
    miss. The scaled signal is measured again and the gain corrected until the measurement
    lies within :data:`LOUDNESS_TOLERANCE_LU`.

    References
    ----------
    ITU-R BS.1770-4 (2015), eqs. (4)–(7): gating of 400 ms blocks at −70 LKFS (absolute) and
    −10 LU below the ungated mean (relative).
    """
    measured = _measure_loudness(path, gain_db, rate, channels)
    for _ in range(tries):
        if not np.isfinite(measured) or abs(measured - target) <= LOUDNESS_TOLERANCE_LU:
            break
        gain_db += target - measured
        measured = _measure_loudness(path, gain_db, rate, channels)
    return gain_db, measured
