"""Live convolution: sound-card input → non-uniform partitioned convolution → limiter →
output, with a level meter, a fade-in, counted dropouts and a clean stop.

The processing object (:class:`LiveProcessor`) is independent of sounddevice so it can be
driven by tests and benchmarks; :func:`run_live` wires it to a PortAudio stream.
"""

from __future__ import annotations

import threading
import time
from dataclasses import dataclass, field

import numpy as np

from .. import safety, validate
from ..errors import InputError
from ..signal import cosine_step, db_to_gain, gain_to_db
from .mix import ir_gain, wet_dry_db
from .partitioned import NonUniformConvolver, live_block_size, routing_for

__all__ = [
    "ComputeLog",
    "LiveStats",
    "LiveProcessor",
    "run_live",
]


class ComputeLog:
    """Callback compute times in a fixed ring (no growth over hours of live use).

    The mean covers the whole run, percentiles the most recent ``size`` callbacks.

    Parameters
    ----------
    size : int
        Callbacks kept for percentiles.

    Examples
    --------
    >>> log = ComputeLog(size=4)
    >>> for t in (1.0, 2.0, 3.0, 4.0, 5.0):
    ...     log.add(t)
    >>> log.recent().tolist(), log.mean_s
    ([2.0, 3.0, 4.0, 5.0], 3.0)
    """

    def __init__(self, size: int = 1 << 16):
        self._ring = np.zeros(size)
        self.count = 0
        self.total_s = 0.0

    def add(self, seconds: float) -> None:
        """Record one callback's compute time.

        Parameters
        ----------
        seconds : float
            Compute time, s.

        Examples
        --------
        >>> log = ComputeLog()
        >>> log.add(0.001)
        >>> log.count
        1
        """
        self._ring[self.count % self._ring.size] = seconds
        self.count += 1
        self.total_s += seconds

    def recent(self, skip: int = 0) -> np.ndarray:
        """The kept times in order, without the first ``skip`` callbacks of the run.

        Parameters
        ----------
        skip : int
            Callbacks at the start of the run to leave out (warm-up).

        Returns
        -------
        ndarray
            Times, s.

        Examples
        --------
        >>> log = ComputeLog()
        >>> for t in (9.0, 1.0, 2.0):
        ...     log.add(t)
        >>> log.recent(skip=1).tolist()
        [1.0, 2.0]
        """
        n, size = self.count, self._ring.size
        if n <= size:
            return self._ring[skip:n].copy()
        start = n % size
        kept = np.concatenate([self._ring[start:], self._ring[:start]])
        return kept[max(0, skip - (n - size)) :]

    @property
    def mean_s(self) -> float:
        """Mean compute time over the whole run, s (0 before the first callback)."""
        return self.total_s / self.count if self.count else 0.0

    def percentile_s(self, q: float) -> float:
        """A percentile of the recent compute times, s (0 before the first callback).

        Parameters
        ----------
        q : float
            Percentile, 0–100.

        Returns
        -------
        float

        Examples
        --------
        >>> log = ComputeLog()
        >>> for t in (1.0, 2.0, 3.0):
        ...     log.add(t)
        >>> log.percentile_s(50)
        2.0
        """
        return float(np.percentile(self.recent(), q)) if self.count else 0.0


@dataclass
class LiveStats:
    """Running figures of a live session.

    Attributes
    ----------
    callbacks : int
        Blocks processed.
    frames : int
        Samples per channel processed.
    dropouts : int
        PortAudio over/underflow flags seen.
    in_peak, out_peak : float
        Linear sample peaks since the start (full scale = 1).
    limiter_db : float
        Largest gain reduction of the limiter so far, dB.
    nonfinite : int
        Blocks in which NaN/inf were replaced by silence.
    compute : ComputeLog
        Compute time per callback.

    Examples
    --------
    >>> LiveStats(in_peak=0.5).in_peak_dbfs
    -6.020599913279624
    """

    callbacks: int = 0
    frames: int = 0
    dropouts: int = 0  #: PortAudio over/underflow flags seen
    in_peak: float = 0.0  #: linear sample peaks since the start
    out_peak: float = 0.0
    limiter_db: float = 0.0
    nonfinite: int = 0  #: blocks in which NaN/inf were replaced by silence
    compute: ComputeLog = field(default_factory=ComputeLog)

    @property
    def in_peak_dbfs(self) -> float:
        """Input sample peak since the start, dBFS (−inf for silence)."""
        return float(gain_to_db(self.in_peak))

    @property
    def out_peak_dbfs(self) -> float:
        """Output sample peak since the start, dBFS (−inf for silence)."""
        return float(gain_to_db(self.out_peak))


class LiveProcessor:
    """One block in, one block out: convolution, wet/dry, gain, fade-in, limiter, cap.

    ``precision='auto'`` computes in float32: the sound card stream is float32 anyway, and
    the engine's error (about −135 dB relative to the signal for a 5 s response in
    128-sample blocks) lies below what a 24-bit converter resolves. Ask for 'float64' to
    get the exact (about −300 dB) engine.

    Every number is checked before a stream can open (the response finite and not silent,
    mix, gain and ceiling finite and in range), and the output is guarded: NaN or ±inf in
    a block (from the input or the arithmetic) is replaced by silence and counted in
    ``stats.nonfinite``, so it never reaches the sound card, and the limiter keeps every
    sample at or below the ceiling, itself at most :data:`safety.OUTPUT_CAP_DBFS`.
    With ``match_ir_level`` the response is scaled to unit energy per output first, as for
    offline renders (:mod:`roomconv.render.mix`).

    Parameters
    ----------
    ir : ndarray, shape (taps,) or (taps, channels)
        The impulse response, at ``rate``.
    rate : int
        Sample rate, Hz.
    block : int
        Wanted callback size, samples (rounded by
        :func:`~roomconv.render.partitioned.live_block_size`; see ``self.block``).
    n_in : int
        Input channels.
    mix : float
        Wet share, 0 (dry only) to 1 (wet only).
    gain_db : float
        Output gain, dB (−100 to +20).
    ceiling_dbfs : float
        Limiter ceiling, dBFS (−60 up to the output cap).
    fade_in_s : float
        Raised-cosine fade-in at the start, s.
    precision : str
        ``"auto"`` (float32), ``"float32"`` or ``"float64"``.
    match_ir_level : bool
        Scale the response to unit energy per output.

    Raises
    ------
    InputError
        For an empty, silent or non-finite response, or a value out of range.

    References
    ----------
    Gardner, W. G. (1995). Efficient convolution without input-output delay. J. Audio Eng.
    Soc. 43(3), 127–136 (non-uniform partitions; cited from memory).

    Examples
    --------
    >>> proc = LiveProcessor(np.array([1.0, 0.5]), 48000, block=64, fade_in_s=0.0)
    >>> proc.block, proc.n_out
    (64, 1)
    """

    def __init__(
        self,
        ir: np.ndarray,
        rate: int,
        *,
        block: int = 128,
        n_in: int = 1,
        mix: float = 1.0,
        gain_db: float = 0.0,
        ceiling_dbfs: float = -1.0,
        fade_in_s: float = 0.5,
        precision: str = "auto",
        match_ir_level: bool = False,
    ):
        ir = np.asarray(ir, dtype=np.float64)
        ir = ir[:, None] if ir.ndim == 1 else ir
        rate = validate.sample_rate(rate)
        mix = validate.in_range(mix, "wet/dry mix", 0.0, 1.0)
        gain_db = validate.in_range(gain_db, "output gain", -100.0, 20.0, unit="dB")
        ceiling_dbfs = validate.in_range(
            ceiling_dbfs, "limiter ceiling", -60.0, safety.OUTPUT_CAP_DBFS, unit="dBFS"
        )
        fade_in_s = validate.in_range(fade_in_s, "fade-in", 0.0, 60.0, unit="s")
        if ir.size == 0 or not np.all(np.isfinite(ir)):
            raise InputError("the impulse response is empty or holds NaN or infinite samples")
        if not np.any(ir):
            raise InputError("the impulse response is silent")
        self.block = live_block_size(block)
        self.routing = routing_for(n_in, ir.shape[1])
        ir = ir * ir_gain(ir, self.routing, match_ir_level)
        #: wet-to-dry balance for broadband input, dB (render.mix)
        self.wet_dry_db = wet_dry_db(mix, ir, self.routing, 1.0)
        self.precision = "float32" if precision == "auto" else precision
        # Two stages: the callback's block, then one of about 2048 samples (4-32 callbacks)
        # for the rest. Each extra stage costs a fixed dozen numpy calls per callback, which
        # outweighs its arithmetic saving at these sizes (`make bench` prints the figures).
        ratio = max(4, min(32, 2048 // self.block))
        self.engine = NonUniformConvolver(
            ir,
            self.routing,
            self.block,
            precision=self.precision,
            ratio=ratio,
            max_block=ratio * self.block,
        )
        self.mix = float(mix)
        self.gain = float(db_to_gain(gain_db))
        self.limiter_ceiling_dbfs = min(ceiling_dbfs, safety.OUTPUT_CAP_DBFS)
        self.limiter = safety.OutputLimiter(rate, self.limiter_ceiling_dbfs)
        self.fade_len = max(1, int(fade_in_s * rate))
        self.fade_pos = 0
        self.stats = LiveStats()
        self.n_out = self.routing.n_out
        self._stopping = 0  # blocks of fade-out left once a stop is asked for
        self._fade_out_blocks = max(1, int(0.05 * rate / self.block))
        self._stop_requested = False

    def process(self, x: np.ndarray) -> np.ndarray:
        """Process the next block: the exact linear convolution's next samples, mixed, faded,
        limited.

        Parameters
        ----------
        x : ndarray, shape (block, n_in)
            The next input block, full scale = 1 (NaN and ±inf are replaced by silence).

        Returns
        -------
        ndarray, shape (block, n_out)
            The output block, every sample at or below the limiter ceiling.

        Examples
        --------
        A unit impulse comes out as the response (float64 engine; the shortest fade-in,
        one sample, has passed after the first block):

        >>> proc = LiveProcessor(np.array([0.5, 0.25]), 48000, block=32, fade_in_s=0.0,
        ...                      precision="float64")
        >>> x = np.zeros((32, 1))
        >>> _ = proc.process(x)
        >>> x[0] = 1.0
        >>> proc.process(x)[:3, 0].tolist()
        [0.5, 0.25, 0.0]
        >>> proc.stats.callbacks
        2
        """
        t0 = time.perf_counter()
        if not np.isfinite(x).all():
            # Keep the engine's history clean: one bad input block would otherwise turn
            # every later output block into NaN.
            x = np.where(np.isfinite(x), x, 0.0)
            self.stats.nonfinite += 1
        y = self.engine.process(x)
        if self.mix < 1.0:
            dry = x if x.shape[1] == self.n_out else np.repeat(x[:, :1], self.n_out, axis=1)
            y = self.mix * y + (1 - self.mix) * dry
        if self.fade_pos < self.fade_len or self._stopping:
            g = np.full(x.shape[0], self.gain)
            if self.fade_pos < self.fade_len:
                ramp = np.minimum(1.0, (self.fade_pos + np.arange(x.shape[0])) / self.fade_len)
                g *= cosine_step(ramp)
                self.fade_pos += x.shape[0]
            if self._stopping:
                k = self._stopping
                g *= np.linspace(
                    k / self._fade_out_blocks, (k - 1) / self._fade_out_blocks, x.shape[0]
                )
                self._stopping -= 1
            y *= g[:, None]
        elif self.gain != 1.0:
            y *= self.gain
        if not np.isfinite(y).all():
            y = np.zeros_like(y)
            self.stats.nonfinite += 1
        # y is this call's own array (the engine returns a new one), so limit it in place.
        y = self.limiter.process(y, in_place=True)
        st = self.stats
        st.callbacks += 1
        st.frames += x.shape[0]
        # Peaks kept linear here; the meter converts to dB when it draws.
        if x.size:
            st.in_peak = max(st.in_peak, float(np.abs(x).max()))
            st.out_peak = max(st.out_peak, self.limiter.last_peak)
        st.limiter_db = self.limiter.max_reduction_db
        st.compute.add(time.perf_counter() - t0)
        return y

    def begin_stop(self) -> None:
        """Fade out over about 50 ms; the stream stops when the fade has run.

        Examples
        --------
        >>> proc = LiveProcessor(np.array([1.0]), 48000, block=1024, fade_in_s=0.0)
        >>> proc.begin_stop()
        >>> x = np.full((1024, 1), 0.1)
        >>> ends = [float(proc.process(x)[-1, 0]) for _ in range(2)]  # 50 ms: 2 blocks
        >>> abs(ends[-1]) < 1e-4  # the fade ends in silence
        True
        """
        self._stop_requested = True
        self._stopping = self._fade_out_blocks


def run_live(
    proc: LiveProcessor,
    rate: int,
    *,
    device=None,
    input_channels=(1,),
    output_channels=(1,),
    duration_s: float | None = None,
    on_meter=None,
    stop_event: threading.Event | None = None,
) -> LiveStats:
    """Run ``proc`` on a duplex PortAudio stream until ``duration_s`` worth of frames, the
    event, or Ctrl-C.

    Sound reaches loudspeakers or headphones: show
    :func:`roomconv.safety.caution_text` and have it confirmed first, start at a low monitor
    volume, and follow local regulations. The output is limited and capped by ``proc``, and
    faded in and out.

    Parameters
    ----------
    proc : LiveProcessor
    rate : int
        Sample rate, Hz (the processor's).
    device : int or str, optional
        PortAudio device index or name.
    input_channels, output_channels : tuple of int
        1-based channel numbers on the device.
    duration_s : float, optional
        Stop after this long, s (default: until the event or Ctrl-C).
    on_meter : callable, optional
        Called with the :class:`LiveStats` about five times a second, from the calling thread.
    stop_event : threading.Event, optional
        Set it to stop (with the fade-out).

    Returns
    -------
    LiveStats
        The statistics (dropouts counted from PortAudio's flags).

    Raises
    ------
    DeviceError
        When PortAudio is missing or refuses the stream.
    InputError
        When the routing's outputs differ from ``output_channels``.

    Examples
    --------
    >>> proc = LiveProcessor(np.array([1.0]), 48000)
    >>> stats = run_live(proc, 48000, duration_s=5.0)  # doctest: +SKIP
    """
    from ..errors import DeviceError
    from ..measure.capture import load_sounddevice

    sd = load_sounddevice()
    stop_event = stop_event or threading.Event()
    if duration_s is not None:
        duration_s = validate.positive(duration_s, "live duration", unit="s")
    limit = None if duration_s is None else int(duration_s * rate)
    n_out = len(output_channels)
    if proc.n_out != n_out:
        from ..errors import InputError

        raise InputError(
            f"the routing gives {proc.n_out} output channel(s) but {n_out} were asked for"
        )
    done = threading.Event()

    def callback(indata, outdata, frames, _time, status):
        if (
            status.input_overflow
            or status.output_underflow
            or status.input_underflow
            or status.output_overflow
        ):
            proc.stats.dropouts += 1
        x = np.asarray(indata, dtype=np.float64)
        y = proc.process(x)
        # process() has replaced NaN/inf and limited; the cap is applied once more here so
        # that nothing above it can reach the device whatever happened upstream.
        outdata[:] = safety.hard_cap(y, proc.limiter_ceiling_dbfs).astype(np.float32)
        if proc._stopping == 0 and proc._stop_requested:
            raise sd.CallbackStop
        stop_due = (limit is not None and proc.stats.frames >= limit) or stop_event.is_set()
        if stop_due and not proc._stop_requested:
            proc.begin_stop()

    try:
        stream = sd.Stream(
            samplerate=rate,
            blocksize=proc.block,
            device=device,
            channels=(max(input_channels), max(output_channels)),
            dtype="float32",
            callback=_mapped(callback, input_channels, output_channels),
            latency=4 * proc.block / rate,
            finished_callback=done.set,
        )
    except Exception as exc:  # PortAudio errors are not one stable type
        raise DeviceError(
            f"cannot open the sound card for live use: {exc} (check the device, "
            "the channels and the sample rate)"
        ) from None
    try:
        with stream:
            while not done.wait(0.2):
                if on_meter:
                    on_meter(proc.stats)
    except KeyboardInterrupt:
        proc.begin_stop()
        done.wait(1.0)
    return proc.stats


def _mapped(callback, ins, outs):
    """Select 1-based input/output channels around ``callback``."""
    ins0 = [c - 1 for c in ins]
    outs0 = [c - 1 for c in outs]

    def wrapped(indata, outdata, frames, t, status):
        buf = np.zeros((frames, len(outs0)), dtype=np.float32)
        callback(indata[:, ins0], buf, frames, t, status)
        outdata[:] = 0
        outdata[:, outs0] = buf

    return wrapped
