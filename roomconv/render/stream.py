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
from ..signal import cosine_step, db_to_gain
from .mix import ir_gain, wet_dry_db
from .partitioned import NonUniformConvolver, live_block_size, routing_for


class ComputeLog:
    """Callback compute times in a fixed ring (no growth over hours of live use), with the
    mean over the whole run and percentiles over the most recent ``size`` callbacks."""

    def __init__(self, size: int = 1 << 16):
        self._ring = np.zeros(size)
        self.count = 0
        self.total_s = 0.0

    def add(self, seconds: float) -> None:
        self._ring[self.count % self._ring.size] = seconds
        self.count += 1
        self.total_s += seconds

    def recent(self, skip: int = 0) -> np.ndarray:
        """The kept times in order, without the first ``skip`` callbacks of the run."""
        n, size = self.count, self._ring.size
        if n <= size:
            return self._ring[skip:n].copy()
        start = n % size
        kept = np.concatenate([self._ring[start:], self._ring[:start]])
        return kept[max(0, skip - (n - size)):]

    @property
    def mean_s(self) -> float:
        return self.total_s / self.count if self.count else 0.0

    def percentile_s(self, q: float) -> float:
        return float(np.percentile(self.recent(), q)) if self.count else 0.0


@dataclass
class LiveStats:
    callbacks: int = 0
    frames: int = 0
    dropouts: int = 0                   #: PortAudio over/underflow flags seen
    in_peak: float = 0.0                #: linear sample peaks since the start
    out_peak: float = 0.0
    limiter_db: float = 0.0
    nonfinite: int = 0                  #: blocks in which NaN/inf were replaced by silence
    compute: ComputeLog = field(default_factory=ComputeLog)

    @property
    def in_peak_dbfs(self) -> float:
        return 20 * np.log10(self.in_peak) if self.in_peak > 0 else float("-inf")

    @property
    def out_peak_dbfs(self) -> float:
        return 20 * np.log10(self.out_peak) if self.out_peak > 0 else float("-inf")


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
    """

    def __init__(self, ir: np.ndarray, rate: int, *, block: int = 128, n_in: int = 1,
                 mix: float = 1.0, gain_db: float = 0.0, ceiling_dbfs: float = -1.0,
                 fade_in_s: float = 0.5, precision: str = "auto", match_ir_level: bool = False):
        ir = np.asarray(ir, dtype=np.float64)
        ir = ir[:, None] if ir.ndim == 1 else ir
        rate = validate.sample_rate(rate)
        mix = validate.in_range(mix, "wet/dry mix", 0.0, 1.0)
        gain_db = validate.in_range(gain_db, "output gain", -100.0, 20.0, unit="dB")
        ceiling_dbfs = validate.in_range(ceiling_dbfs, "limiter ceiling", -60.0,
                                         safety.OUTPUT_CAP_DBFS, unit="dBFS")
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
        self.engine = NonUniformConvolver(ir, self.routing, self.block, precision=self.precision,
                                          ratio=ratio, max_block=ratio * self.block)
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
                g *= np.linspace(k / self._fade_out_blocks, (k - 1) / self._fade_out_blocks,
                                 x.shape[0])
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
        """Fade out over about 50 ms; the stream stops when the fade has run."""
        self._stop_requested = True
        self._stopping = self._fade_out_blocks


def run_live(proc: LiveProcessor, rate: int, *, device=None, input_channels=(1,),
             output_channels=(1,), duration_s: float | None = None, on_meter=None,
             stop_event: threading.Event | None = None) -> LiveStats:
    """Run ``proc`` on a duplex PortAudio stream until ``duration_s`` worth of frames, the
    event, or Ctrl-C. Returns the statistics (dropouts counted from PortAudio's flags)."""
    from ..measure.capture import load_sounddevice
    from ..errors import DeviceError
    sd = load_sounddevice()
    stop_event = stop_event or threading.Event()
    if duration_s is not None:
        duration_s = validate.positive(duration_s, "live duration", unit="s")
    limit = None if duration_s is None else int(duration_s * rate)
    n_out = len(output_channels)
    if proc.n_out != n_out:
        from ..errors import InputError
        raise InputError(f"the routing gives {proc.n_out} output channel(s) but "
                         f"{n_out} were asked for")
    done = threading.Event()

    def callback(indata, outdata, frames, _time, status):
        if status.input_overflow or status.output_underflow or status.input_underflow \
                or status.output_overflow:
            proc.stats.dropouts += 1
        x = np.asarray(indata, dtype=np.float64)
        y = proc.process(x)
        # process() has replaced NaN/inf and limited; the cap is applied once more here so
        # that nothing above it can reach the device whatever happened upstream.
        outdata[:] = safety.hard_cap(y, proc.limiter_ceiling_dbfs).astype(np.float32)
        if proc._stopping == 0 and proc._stop_requested:
            raise sd.CallbackStop
        if (limit is not None and proc.stats.frames >= limit) or stop_event.is_set():
            if not proc._stop_requested:
                proc.begin_stop()

    try:
        stream = sd.Stream(samplerate=rate, blocksize=proc.block, device=device,
                           channels=(max(input_channels), max(output_channels)),
                           dtype="float32", callback=_mapped(callback, input_channels,
                                                             output_channels),
                           latency=4 * proc.block / rate, finished_callback=done.set)
    except Exception as exc:  # PortAudio errors are not one stable type
        raise DeviceError(f"cannot open the sound card for live use: {exc} (check the device, "
                          "the channels and the sample rate)") from None
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
