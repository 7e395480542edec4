"""Partitioned convolution: uniformly partitioned overlap-save with a frequency-domain delay
line, and a non-uniform partition of such stages for low latency with long responses.

Both engines take a set of *paths* (input channel → output channel through one IR) and run
all of them in one vectorized pass per block. Output block i is exactly y[iB:(i+1)B] of the
full linear convolution, so a stream of blocks reproduces ``scipy.signal.fftconvolve``.
"""

from __future__ import annotations

import os
from concurrent.futures import ThreadPoolExecutor
from dataclasses import dataclass

import numpy as np
from scipy import fft as sfft

from ..errors import InputError

__all__ = [
    "Routing",
    "routing_for",
    "UniformPartitionedConvolver",
    "OverlapSaveConvolver",
    "NonUniformConvolver",
    "overlap_save_size",
    "offline_convolver",
    "plan_partition",
    "live_block_size",
    "MAX_OVERLAP_SAVE",
]


@dataclass(frozen=True)
class Routing:
    """Which input feeds which output through which IR channel.

    Channels are numbered from 0 here (array indices); front ends show them from 1.

    Attributes
    ----------
    n_in, n_out : int
        Number of input and output channels.
    path_in, path_out, path_ir : tuple of int
        For each path: its input channel, output channel and IR channel.
    name : str
        A short description ("mono", "per-channel", "true stereo", ...).

    Examples
    --------
    >>> r = routing_for(2, 4)
    >>> r.name, r.n_paths
    ('true stereo', 4)
    """

    n_in: int
    n_out: int
    path_in: tuple[int, ...]
    path_out: tuple[int, ...]
    path_ir: tuple[int, ...]
    name: str = "custom"

    @property
    def n_paths(self) -> int:
        """Number of (input, IR channel, output) paths."""
        return len(self.path_in)

    def mix_matrix(self) -> np.ndarray:
        """(paths × outputs) 0/1 matrix that sums path results into outputs.

        Examples
        --------
        >>> routing_for(2, 4).mix_matrix()
        array([[1., 0.],
               [0., 1.],
               [1., 0.],
               [0., 1.]])
        """
        m = np.zeros((self.n_paths, self.n_out))
        m[np.arange(self.n_paths), list(self.path_out)] = 1.0
        return m


def routing_for(
    n_in: int, n_ir: int, *, outputs: int | None = None, shared: bool = False
) -> Routing:
    """Choose the routing for ``n_in`` input channels and an IR with ``n_ir`` channels.

    - 1 in, 1 IR: mono → mono.
    - 1 in, N IRs: mono → N outputs (IR channel k feeds output k).
    - N in, 1 IR: the same IR on every channel (N → N).
    - N in, N IRs: per-channel (channel k through IR channel k).
    - 2 in, 4 IRs: true stereo, IR channels ordered LL, LR, RL, RR (input-major:
      left input → left output, left → right, right → left, right → right).
    - N in, N·M IRs with ``outputs=M``: a general matrix, IR channel i·M + o feeds input i to
      output o.

    Parameters
    ----------
    n_in : int
        Input channels of the dry signal.
    n_ir : int
        Channels of the impulse response.
    outputs : int, optional
        Output channels of a general matrix (IR channels input-major).
    shared : bool
        Use IR channel 0 for every input.

    Returns
    -------
    Routing

    Examples
    --------
    >>> routing_for(1, 2).name
    'mono to 2'
    >>> routing_for(2, 6, outputs=3).path_ir
    (0, 1, 2, 3, 4, 5)
    """
    if outputs is not None:
        if n_ir != n_in * outputs:
            raise InputError(
                f"a {n_in}-input, {outputs}-output matrix needs {n_in * outputs} IR "
                f"channels (input-major), but the IR has {n_ir}"
            )
        pin, pout = zip(*[(i, o) for i in range(n_in) for o in range(outputs)], strict=True)
        return Routing(n_in, outputs, pin, pout, tuple(range(n_ir)), "matrix")
    if n_in == 1:
        return Routing(
            1,
            n_ir,
            (0,) * n_ir,
            tuple(range(n_ir)),
            tuple(range(n_ir)),
            "mono" if n_ir == 1 else f"mono to {n_ir}",
        )
    if n_ir == 1 or shared:
        return Routing(n_in, n_in, tuple(range(n_in)), tuple(range(n_in)), (0,) * n_in, "shared")
    if n_ir == n_in:
        r = tuple(range(n_in))
        return Routing(n_in, n_in, r, r, r, "per-channel")
    if n_in == 2 and n_ir == 4:
        return Routing(2, 2, (0, 0, 1, 1), (0, 1, 0, 1), (0, 1, 2, 3), "true stereo")
    raise InputError(
        f"cannot route {n_in} input channel(s) through an IR with {n_ir} "
        "channel(s): use 1 IR channel (shared), one per input, 4 for true stereo "
        "with 2 inputs, or a general matrix (give the number of outputs)"
    )


def _as_paths(ir: np.ndarray, routing: Routing) -> np.ndarray:
    h = np.asarray(ir, dtype=np.float64)
    if h.ndim == 1:
        h = h[:, None]
    if not np.all(np.isfinite(h)):
        raise InputError("the impulse response holds NaN or infinite samples")
    if h.shape[0] == 0:
        raise InputError("the impulse response is empty")
    return h[:, list(routing.path_ir)]


def _input_block(block, size: int, n_in: int) -> np.ndarray:
    """An offline engine's input: up to ``size`` samples × ``n_in`` (a 1-D block is one
    channel); anything larger is refused."""
    x = np.asarray(block)
    x = x[:, None] if x.ndim == 1 else x
    if x.shape[0] > size or x.shape[1] != n_in:
        raise InputError(f"a block of {x.shape} does not fit {size} samples × {n_in} input(s)")
    return x


class _ChannelThreads:
    """Run one function per channel on a few threads (scipy.fft and numpy's ufuncs release
    the GIL); inline when one thread or one channel."""

    def __init__(self, threads: int):
        self.threads = max(1, int(threads))
        self._pool: ThreadPoolExecutor | None = None

    def run(self, fn, count: int, *args) -> None:
        if self.threads == 1 or count == 1:
            for k in range(count):
                fn(k, *args)
            return
        if self._pool is None:
            self._pool = ThreadPoolExecutor(self.threads, thread_name_prefix="roomconv-fft")
        for f in [self._pool.submit(fn, k, *args) for k in range(count)]:
            f.result()

    def close(self) -> None:
        if self._pool is not None:
            self._pool.shutdown(wait=False)
            self._pool = None


class _Stage:
    """One uniformly partitioned overlap-save stage of block ``b`` covering IR[offset:...].

    All buffers are allocated once; a block's work is a fixed handful of numpy calls that
    write into them (``out=``), which matters for live blocks where call overhead, not
    arithmetic, is most of the cost.
    """

    def __init__(
        self,
        h_paths: np.ndarray,
        b: int,
        offset: int,
        routing: Routing,
        cdtype,
        workers: int | None,
    ):
        self.b, self.offset = b, offset
        self.n = 2 * b
        taps = h_paths.shape[0]
        self.P = max(1, -(-taps // b))
        self.cdtype = cdtype
        rdtype = np.float32 if cdtype == np.complex64 else np.float64
        self.rdtype = rdtype
        # Each partition zero-padded to 2b, built in place (no padding copy inside rfft).
        parts = np.zeros((self.P, self.n, h_paths.shape[1]), dtype=np.float64)
        for q in range(self.P):
            seg = h_paths[q * b : (q + 1) * b]
            parts[q, : seg.shape[0]] = seg
        # Spectra stored newest-partition-last, so that a contiguous window of the doubled
        # delay line lines up with them without copying.
        H = sfft.rfft(parts, axis=1, workers=workers)  # (P, K, paths)
        del parts
        self.H = np.ascontiguousarray(H[::-1], dtype=cdtype)
        self.path_in = np.array(routing.path_in)
        self.mix: np.ndarray = routing.mix_matrix().astype(rdtype)
        # Shortcuts for the common routings (one path per input, one per output): no gather
        # of inputs and no mixing product per block.
        self.gather = list(routing.path_in) != list(range(routing.n_in))
        self.mixes = not (
            routing.n_paths == routing.n_out
            and list(routing.path_out) == list(range(routing.n_out))
        )
        # Small FFTs spend more time in dispatch than in arithmetic: numpy's is lighter.
        # Large ones go channel by channel on their own threads (see OverlapSaveConvolver).
        self.small = self.n <= 4096 and workers in (None, 1)
        self._threads = _ChannelThreads(min(workers or 1, max(routing.n_in, routing.n_paths)))
        self.n_in = routing.n_in
        K = b + 1
        n_paths = routing.n_paths
        self.fdl = np.zeros((2 * self.P, K, self.n_in), dtype=cdtype)
        self.pos = 0
        # [previous block | current block]; callers may fill the second half in place
        # (:attr:`current`) and then call :meth:`push` with no argument.
        self.inbuf = np.zeros((self.n, self.n_in), dtype=rdtype)
        self.current = self.inbuf[b:]
        self._acc = np.zeros((K, n_paths), dtype=cdtype)
        self._part = np.zeros((K, n_paths), dtype=cdtype)
        self._prod = np.zeros((0, K, n_paths), dtype=cdtype)  # grown on first use
        self._fresh = True
        self.fill = 0  # samples gathered into :attr:`current` by the non-uniform engine

    def push(self, block: np.ndarray | None = None) -> None:
        """Transform the newest ``b`` input samples (b × n_in) into the delay line.

        With no argument the block is already in :attr:`current`."""
        if block is not None:
            self.current[:] = block
        self.pos = self.pos + 1 if self.pos + 1 < self.P else 0
        X = self.fdl[self.pos]
        if self.small:
            np.fft.rfft(self.inbuf, axis=0, out=X)
        else:
            self._threads.run(self._forward, self.n_in, X)
        self.fdl[self.pos + self.P] = X
        self.inbuf[: self.b] = self.current
        self._fresh = True

    def accumulate(self, first: int = 0, last: int | None = None) -> None:
        """Multiply-accumulate partitions [first, last) of the newest block's output."""
        last = self.P if last is None else last
        n = last - first
        if n <= 0:
            return
        # Row r of the window (the spectrum r blocks newer than the oldest in use) lines up
        # with row r of the reversed self.H: partition P-1-r.
        base = self.pos + 1
        Xs = self.fdl[base + first : base + last]
        if self.gather:
            Xs = Xs[:, :, self.path_in]
        if self._prod.shape[0] < n:
            self._prod = np.empty((n,) + self._acc.shape, dtype=self.cdtype)
        prod = self._prod[:n]
        # multiply then reduce over partitions: about twice as fast as einsum on complex data
        np.multiply(Xs, self.H[first:last], out=prod)
        if self._fresh:
            np.add.reduce(prod, axis=0, out=self._acc)
            self._fresh = False
        else:
            np.add.reduce(prod, axis=0, out=self._part)
            self._acc += self._part

    def _forward(self, c: int, X: np.ndarray) -> None:
        X[:, c] = sfft.rfft(self.inbuf[:, c])

    def _inverse(self, p: int, y: np.ndarray) -> None:
        y[:, p] = sfft.irfft(self._acc[:, p], self.n)[self.b :]

    def finish(self) -> np.ndarray:
        """Inverse transform the accumulated spectrum: ``b`` output samples × outputs."""
        if self._fresh:
            self.accumulate()
        if self.small:
            y = np.fft.irfft(self._acc, self.n, axis=0)[self.b :]
        else:
            y = np.empty((self.b, self._acc.shape[1]), dtype=self.rdtype)
            self._threads.run(self._inverse, self._acc.shape[1], y)
        return y @ self.mix if self.mixes else y


class UniformPartitionedConvolver:
    """Uniformly partitioned overlap-save convolution with a frequency-domain delay line.

    Parameters
    ----------
    ir : ndarray, shape (taps,) or (taps, ir_channels)
    routing : Routing
        From :func:`routing_for`.
    block : int
        Block size B; each :meth:`process` call takes up to B samples and returns B.
    precision : 'float64' or 'float32'
        float32 keeps spectra in complex64 (about −130 dB relative error for few partitions;
        the error grows with the partition count as the accumulation is single precision).
    workers : int, optional
        Threads for the transforms of large blocks (one channel each) and for building
        the partition spectra.

    Notes
    -----
    The output of block i is y[iB:(i+1)B] of the full linear convolution; in a stream this
    is a latency of B samples (:attr:`latency_samples`).

    References
    ----------
    Wefers, F. (2015). Partitioned convolution algorithms for real-time auralization. Logos
    Verlag (uniformly partitioned overlap-save with a frequency-domain delay line).

    Examples
    --------
    Block by block, the output is the linear convolution (against scipy):

    >>> from scipy.signal import fftconvolve
    >>> rng = np.random.default_rng(0)
    >>> ir, x = rng.standard_normal(300), rng.standard_normal(1000)
    >>> conv = UniformPartitionedConvolver(ir, routing_for(1, 1), block=100)
    >>> y = np.concatenate([conv.process(x[i : i + 100, None]) for i in range(0, 1000, 100)])
    >>> bool(np.allclose(y[:, 0], fftconvolve(x, ir)[:1000], atol=1e-12))
    True
    >>> conv.close()
    """

    def __init__(
        self,
        ir,
        routing: Routing,
        block: int,
        *,
        precision: str = "float64",
        workers: int | None = None,
    ):
        if block < 1:
            raise InputError(f"block size {block} must be positive")
        self.routing = routing
        self.block = int(block)
        cdtype = np.complex64 if precision == "float32" else np.complex128
        h = _as_paths(ir, routing)
        self.taps = h.shape[0]
        self._stage = _Stage(h, self.block, 0, routing, cdtype, workers)
        self.latency_samples = self.block
        self.precision = precision

    @property
    def partitions(self) -> int:
        """Number of partitions of length ``block`` the response is cut into."""
        return self._stage.P

    def process(self, block: np.ndarray, out: np.ndarray | None = None) -> np.ndarray:
        """Convolve the next block.

        Parameters
        ----------
        block : ndarray, shape (n,) or (n, inputs), n ≤ ``self.block``
            New input samples; a short last block is zero-padded.
        out : ndarray, optional
            Written with the result (its first ``len(out)`` samples) when given.

        Returns
        -------
        ndarray, shape (block, outputs)
            The next ``block`` samples of the linear convolution.

        Examples
        --------
        >>> from scipy.signal import fftconvolve
        >>> h, x = np.random.default_rng(0).standard_normal((2, 300))
        >>> eng = UniformPartitionedConvolver(h, routing_for(1, 1), 64)
        >>> y = np.concatenate([eng.process(x[i:i + 64]) for i in range(0, 640, 64)])
        >>> bool(np.allclose(y[:599, 0], fftconvolve(x, h)))
        True
        """
        x = _input_block(block, self.block, self.routing.n_in)
        cur = self._stage.current
        cur[: x.shape[0]] = x
        cur[x.shape[0] :] = 0.0
        self._stage.push()
        y = self._stage.finish()
        if out is None:
            return y
        out[:] = y[: out.shape[0]]
        return out

    def close(self) -> None:
        """Stop the transform threads (they also stop when the convolver is collected)."""
        self._stage._threads.close()


class OverlapSaveConvolver:
    """Single-partition overlap-save for offline work: one FFT of size N per hop of
    N − taps + 1 samples, paths combined into outputs before the inverse transform.

    Parameters
    ----------
    ir : ndarray, shape (taps,) or (taps, ir_channels)
    routing : Routing
        From :func:`routing_for`.
    fft_size : int, optional
        N; by default :func:`overlap_save_size`.
    precision : 'float64' or 'float32'
    workers : int, optional
        Threads sharing the channels' transforms.

    Each :meth:`process` call takes ``block`` (= the hop) samples and returns y[iB:(i+1)B].

    Every channel is transformed as its own contiguous 1-D array, the channels spread over
    ``workers`` threads (scipy.fft releases the GIL). A many-column transform along axis 0
    of a (N, channels) array ran about four times slower than the same data as separate
    rows with pocketfft on our 2-core test machine (`make bench` prints the comparison).

    References
    ----------
    Oppenheim, A. V., Schafer, R. W. Discrete-Time Signal Processing (3rd ed., 2010), 8.7.3
    (overlap-save).

    Examples
    --------
    >>> from scipy.signal import fftconvolve
    >>> rng = np.random.default_rng(0)
    >>> ir, x = rng.standard_normal(300), rng.standard_normal(1000)
    >>> conv = OverlapSaveConvolver(ir, routing_for(1, 1), fft_size=1024)
    >>> B = conv.block
    >>> y = np.concatenate([conv.process(x[i : i + B, None]) for i in range(0, 1000, B)])
    >>> bool(np.allclose(y[:1000, 0], fftconvolve(x, ir)[:1000], atol=1e-12))
    True
    >>> conv.close()
    """

    def __init__(
        self,
        ir,
        routing: Routing,
        *,
        fft_size: int | None = None,
        precision: str = "float64",
        workers: int | None = None,
    ):
        h = _as_paths(ir, routing)
        self.routing, self.taps = routing, h.shape[0]
        rdtype = np.float32 if precision == "float32" else np.float64
        n = fft_size or overlap_save_size(self.taps, precision)
        if n < self.taps + 1:
            raise InputError(f"FFT size {n} is too small for {self.taps} taps")
        self.n, self.block = n, n - self.taps + 1
        self.H = sfft.rfft(np.ascontiguousarray(h.T, dtype=rdtype), n, axis=1)  # (paths, K)
        cdtype = self.H.dtype
        K = n // 2 + 1
        self._inputs = np.zeros((routing.n_in, n), dtype=rdtype)  # one row per input channel
        pairs = list(zip(routing.path_in, routing.path_out, strict=True))
        self._paths_of = [
            [(p, i) for p, (i, o) in enumerate(pairs) if o == out] for out in range(routing.n_out)
        ]
        self._Y = np.zeros((routing.n_out, K), dtype=cdtype)
        self._scratch = np.zeros((routing.n_out, K), dtype=cdtype)
        self._X: list = [None] * routing.n_in
        self._threads = _ChannelThreads(min(workers or 1, max(routing.n_in, routing.n_out)))
        self.latency_samples = self.block
        self.precision = precision

    def _forward(self, i: int, block: np.ndarray) -> None:
        # Slide the overlap and take the new samples, in this channel's own thread.
        m1, n_new, row = self.taps - 1, block.shape[0], self._inputs[i]
        if m1:
            row[:m1] = row[self.block :]
        row[m1 : m1 + n_new] = block[:, i]
        if n_new < self.block:
            row[m1 + n_new :] = 0.0
        self._X[i] = sfft.rfft(row)

    def _inverse(self, o: int, out: np.ndarray) -> None:
        Y, S = self._Y[o], self._scratch[o]
        paths = self._paths_of[o]
        if not paths:
            out[:, o] = 0.0
            return
        (p, i), rest = paths[0], paths[1:]
        np.multiply(self._X[i], self.H[p], out=Y)
        for p, i in rest:
            np.multiply(self._X[i], self.H[p], out=S)
            Y += S
        m1 = self.taps - 1
        out[:, o] = sfft.irfft(Y, self.n)[m1 : m1 + out.shape[0]]

    def process(self, block: np.ndarray, out: np.ndarray | None = None) -> np.ndarray:
        """Convolve the next hop.

        Parameters
        ----------
        block : ndarray, shape (n,) or (n, inputs), n ≤ ``self.block``
            New input samples; a short last block is zero-padded.
        out : ndarray, optional
            At most ``block`` × outputs, written with the result when given.

        Returns
        -------
        ndarray, shape (block, outputs)
            The next ``block`` samples of the linear convolution (``out`` when given).

        Examples
        --------
        >>> from scipy.signal import fftconvolve
        >>> h, x = np.random.default_rng(1).standard_normal((2, 1000))
        >>> eng = OverlapSaveConvolver(h, routing_for(1, 1), fft_size=4096)
        >>> y = np.concatenate([eng.process(x), eng.process(np.zeros(0))])
        >>> bool(np.allclose(y[:1999, 0], fftconvolve(x, h)))
        True
        """
        x = _input_block(block, self.block, self.routing.n_in)
        if out is None:
            out = np.empty((self.block, self.routing.n_out), dtype=self._inputs.dtype)
        self._threads.run(self._forward, self.routing.n_in, x)
        self._threads.run(self._inverse, self.routing.n_out, out)
        return out

    def close(self) -> None:
        """Stop the worker threads (they also stop when the convolver is collected)."""
        self._threads.close()


def overlap_save_size(taps: int, precision: str = "float64") -> int:
    """FFT size for single-block overlap-save, at least 2^14: in float64 the smallest 2^k,
    3·2^k or 5·2^k of at least 2.2·taps; in float32 the power of two of at least 3·taps.

    Larger FFTs waste fewer samples per hop (N − taps + 1 of N are kept) but cost more per
    point once out of cache. Measured at 48 kHz on a 2-core machine (medians of five,
    interleaved): for stereo through a 4 s IR, 3·2^18 ran 12 % ahead of 2^19 while the
    machine was quiet but 15 % behind it while it was busy, so the smaller, steadier size
    is used; true stereo through 6 s IRs was fastest at 5·2^17; float32 at 2^20 for both.

    Parameters
    ----------
    taps : int
        Length of the response, samples.
    precision : 'float64' or 'float32'

    Returns
    -------
    int
        FFT size N, samples.

    Examples
    --------
    >>> overlap_save_size(48000), overlap_save_size(48000, "float32")  # 2^17 ≥ 2.2·48000
    (131072, 262144)
    """
    if precision == "float32":
        return max(1 << 14, 1 << int(np.ceil(np.log2(3.0 * taps))))
    want = max(1 << 14, int(np.ceil(2.2 * taps)))
    return min(c << max(0, int(np.ceil(np.log2(want / c)))) for c in (1, 3, 5))


#: Largest single-block overlap-save FFT offline (memory: paths × N complex spectra).
MAX_OVERLAP_SAVE = 1 << 21


def offline_convolver(
    ir, routing: Routing, *, precision: str = "float64", workers: int | None = None
):
    """The fastest exact engine for a whole-file render: single-block overlap-save while the
    response fits a 2^21-point FFT with a hop of at least a third of it (about 29 s of
    response at 48 kHz), uniformly partitioned overlap-save beyond that. ``workers``
    threads (default: every core) share the channels' transforms.

    Parameters
    ----------
    ir : ndarray, shape (taps,) or (taps, ir_channels)
    routing : Routing
    precision : 'float64' or 'float32'
    workers : int, optional

    Returns
    -------
    OverlapSaveConvolver or UniformPartitionedConvolver
        Either has ``process(block, out=None)``, ``block`` and ``latency_samples``.

    Examples
    --------
    >>> type(offline_convolver(np.ones(100), routing_for(1, 1))).__name__
    'OverlapSaveConvolver'
    """
    taps = np.asarray(ir).shape[0]
    workers = workers or os.cpu_count() or 1
    n = overlap_save_size(taps, precision)
    if n > MAX_OVERLAP_SAVE and 1.5 * taps <= MAX_OVERLAP_SAVE:
        n = MAX_OVERLAP_SAVE
    if n <= MAX_OVERLAP_SAVE:
        return OverlapSaveConvolver(ir, routing, fft_size=n, precision=precision, workers=workers)
    # Few, long partitions: the multiply-accumulate over partitions is what costs here
    # (a 35 s response: 2^18 ran 20 % ahead of 2^17 and level with 2^19).
    return UniformPartitionedConvolver(ir, routing, 1 << 18, precision=precision, workers=workers)


def plan_partition(
    taps: int, block: int, *, ratio: int = 4, max_block: int = 16384
) -> list[tuple[int, int, int]]:
    """Non-uniform partition: (block, offset, length) per stage.

    Stage s uses block b_s = block·ratio^s. Its work is spread over the b_s/block callbacks
    after its input is complete, so its segment may start no earlier than 2·b_s − block; each
    stage therefore covers exactly up to where the next may start, and the largest block
    takes the rest.

    Parameters
    ----------
    taps : int
        Length of the response, samples.
    block : int
        Callback block size, samples (the first stage's block).
    ratio : int
        Growth factor of the block from one stage to the next.
    max_block : int
        Largest block; the last stage takes the rest of the response.

    Returns
    -------
    list of (block, offset, length)
        Per stage, in samples; the offsets and lengths tile ``[0, taps)``.

    Examples
    --------
    >>> plan = plan_partition(10000, 128)
    >>> plan
    [(128, 0, 896), (512, 896, 3072), (2048, 3968, 6032)]
    >>> sum(length for _, _, length in plan)
    10000

    References
    ----------
    Gardner, W. G. (1995). Efficient convolution without input-output delay. J. Audio Eng.
    Soc. 43(3), 127–136. García, G. (2002). Optimal filter partition for efficient
    convolution with short input/output delay. 113th AES Convention, preprint 5660.
    """
    stages = []
    start, b = 0, block
    while start < taps:
        nb = b * ratio
        if nb > max(max_block, block):
            stages.append((b, start, taps - start))
            break
        # This stage covers [start, 2·nb − block), where the next stage may begin.
        end = 2 * nb - block
        length = max(b, -(-(end - start) // b) * b)
        if start + length >= taps:
            stages.append((b, start, taps - start))
            break
        stages.append((b, start, length))
        start += length
        b = nb
    return stages


class NonUniformConvolver:
    """Low-latency convolution with long responses: a small first stage and growing blocks.

    Each call to :meth:`process` takes ``block`` samples and returns ``block`` samples
    (y[iB:(i+1)B] of the linear convolution). A stage of block b does its forward FFT when
    its input is complete, spreads its multiply-accumulate over the next b/block calls and
    adds its inverse FFT's output into a delay line, so no call does a whole stage's work.

    Parameters
    ----------
    ir : ndarray, shape (taps,) or (taps, ir_channels)
    routing : Routing
    block : int
        Callback block size, 1–65536 samples.
    precision : 'float64' or 'float32'
    ratio, max_block : int
        Passed to :func:`plan_partition`.

    References
    ----------
    Gardner, W. G. (1995), J. Audio Eng. Soc. 43(3), 127–136; Wefers, F. (2015).

    Examples
    --------
    >>> from scipy.signal import fftconvolve
    >>> rng = np.random.default_rng(0)
    >>> ir, x = rng.standard_normal(3000), rng.standard_normal(4096)
    >>> conv = NonUniformConvolver(ir, routing_for(1, 1), 64)
    >>> y = np.concatenate([conv.process(x[i : i + 64, None]) for i in range(0, 4096, 64)])
    >>> bool(np.allclose(y[:, 0], fftconvolve(x, ir)[:4096], atol=1e-12))
    True
    """

    def __init__(
        self,
        ir,
        routing: Routing,
        block: int,
        *,
        precision: str = "float64",
        ratio: int = 4,
        max_block: int = 16384,
    ):
        if not 1 <= block <= 65536:
            raise InputError(f"block size {block} is outside 1..65536")
        self.routing = routing
        self.block = B = int(block)
        cdtype = np.complex64 if precision == "float32" else np.complex128
        h = _as_paths(ir, routing)
        self.taps = h.shape[0]
        self.plan = plan_partition(self.taps, B, ratio=ratio, max_block=max_block)
        self.stages = [
            _Stage(h[off : off + ln], b, off, routing, cdtype, None) for b, off, ln in self.plan
        ]
        # The first stage has the callback's block and starts at tap 0: its output belongs
        # to the block being returned.
        assert self.plan[0][:2] == (B, 0)
        # For each spread stage: the partitions to multiply in each of its b/B calls.
        self._spread = [
            (
                s,
                st,
                [
                    (d * st.P // (st.b // B), (d + 1) * st.P // (st.b // B))
                    for d in range(st.b // B)
                ],
            )
            for s, st in enumerate(self.stages)
            if s > 0
        ]
        horizon = max(off + 3 * b for b, off, _ in self.plan) + B
        # A whole number of callback blocks, so the block read out never wraps.
        self._ring = np.zeros((-(-horizon // B) * B, routing.n_out))
        self._t = 0  # samples consumed so far
        self._pending: list[tuple[int, int] | None] = [None] * len(
            self.stages
        )  # (output start, slices done)
        self.latency_samples = B

    def process(self, block: np.ndarray) -> np.ndarray:
        """Convolve the next callback block.

        Parameters
        ----------
        block : ndarray, exactly ``self.block`` samples (× inputs)

        Returns
        -------
        ndarray, shape (block, outputs)
            The next ``block`` samples of the linear convolution.

        Examples
        --------
        >>> from scipy.signal import fftconvolve
        >>> h, x = np.random.default_rng(2).standard_normal((2, 4096))
        >>> eng = NonUniformConvolver(h, routing_for(1, 1), 64)
        >>> xs = np.concatenate([x, np.zeros(4096)])
        >>> y = np.concatenate([eng.process(xs[i:i + 64]) for i in range(0, 8192, 64)])
        >>> bool(np.allclose(y[:8191, 0], fftconvolve(x, h)))
        True
        """
        B = self.block
        x = np.asarray(block, dtype=np.float64).reshape(B, self.routing.n_in)
        t0 = self._t
        first = self.stages[0]
        first.push(x)
        y0 = first.finish()
        pending = self._pending
        for s, st, slices in self._spread:
            # Continue the previous firing's multiply-accumulate with this call's share.
            pend = pending[s]
            if pend is not None:
                start, done = pend
                st.accumulate(*slices[done])
                done += 1
                if done == len(slices):
                    self._add(st.finish(), start)
                    pending[s] = None
                else:
                    pending[s] = (start, done)
            st.current[st.fill : st.fill + B] = x
            st.fill += B
            if st.fill == st.b:
                # Input block complete: transform now, multiply over the next b/B calls.
                st.push()
                st.fill = 0
                pending[s] = (t0 + B - st.b + st.offset, 0)
        ring = self._ring
        s0 = t0 % ring.shape[0]
        out = ring[s0 : s0 + B] + y0
        ring[s0 : s0 + B] = 0.0
        self._t = t0 + B
        return out

    def _add(self, y: np.ndarray, start: int) -> None:
        ring = self._ring
        H = ring.shape[0]
        if start < self._t:
            raise RuntimeError("partition plan violated: a stage finished too late")
        s0, n = start % H, y.shape[0]
        if s0 + n <= H:
            ring[s0 : s0 + n] += y
        else:
            ring[s0:] += y[: H - s0]
            ring[: n - (H - s0)] += y[H - s0 :]


def live_block_size(requested: int = 256) -> int:
    """Callback block size for live use: the requested latency, 32–1024 samples, rounded to
    a power of two (offline renders choose their own size in :func:`offline_convolver`).

    Parameters
    ----------
    requested : int
        Wanted block size, samples.

    Returns
    -------
    int

    Examples
    --------
    >>> live_block_size(200)
    256
    """
    if not 32 <= requested <= 1024:
        raise InputError(f"live block size {requested} is outside 32..1024")
    return 1 << int(np.round(np.log2(requested)))
