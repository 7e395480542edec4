"""Performance figures, each against scipy measured in the same run (interleaved, median of
at least five repeats). Targets are printed beside the figures; nothing here is a test.

    python -m benchmarks.run            # all jobs (a few minutes on two cores)
    python -m benchmarks.run --quick    # shorter signals, for a smoke run
    python -m benchmarks.run --long     # adds the 2-hour render's peak memory
"""

from __future__ import annotations

import argparse
import os
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import numpy as np
import soundfile as sf
from scipy.signal import oaconvolve, sosfilt

from roomconv.analysis.bands import band_sos, bands_for_rate
from roomconv.analysis.parameters import room_parameters
from roomconv.render.partitioned import offline_convolver, routing_for
from roomconv.render.stream import LiveProcessor

FS = 48000


def fft_backends(repeats):
    """The engine's FFT choice: numpy.fft against scipy.fft, a stereo 2^19-point round trip
    with the channels as columns (one call along axis 0, all threads) and as contiguous rows
    transformed one per thread (what the offline engine does)."""
    from concurrent.futures import ThreadPoolExecutor

    from scipy import fft as sfft

    rng = np.random.default_rng(5)
    x = rng.standard_normal((1 << 19, 2))
    rows = np.ascontiguousarray(x.T)
    pool = ThreadPoolExecutor(2)

    def by_row(r):
        return sfft.irfft(sfft.rfft(r), r.size)

    res = interleaved(
        {
            "numpy.fft columns": lambda: np.fft.irfft(np.fft.rfft(x, axis=0), axis=0),
            "scipy.fft columns": lambda: sfft.irfft(
                sfft.rfft(x, axis=0, workers=-1), axis=0, workers=-1
            ),
            "scipy.fft rows, a thread each": lambda: list(pool.map(by_row, rows)),
        },
        repeats,
    )
    pool.shutdown()
    base = res["numpy.fft columns"]
    print(
        "FFT, 2^19-point stereo round trip: "
        + " | ".join(f"{k} {1000 * v:.1f} ms ({base / v:.2f}x)" for k, v in res.items())
        + " (offline uses scipy.fft by rows; live, numpy.fft on small blocks)"
    )


def compiled_mac(repeats):
    """The multiply-accumulate of one live callback at 128 samples (the first stage: 31
    partitions × 129 bins; an eighth of the long stage: 15 × 1025), complex64 as the live
    default: numpy as the engine does it (multiply into a buffer, then add.reduce), einsum,
    and an optional numba loop."""
    rng = np.random.default_rng(6)
    shapes = [(31, 129), (15, 1025)]
    arrays = [
        (
            (rng.standard_normal(s) + 1j * rng.standard_normal(s)).astype(np.complex64),
            (rng.standard_normal(s) + 1j * rng.standard_normal(s)).astype(np.complex64),
            np.empty(s, np.complex64),
            np.empty(s[1], np.complex64),
        )
        for s in shapes
    ]

    def with_numpy():
        for X, H, prod, out in arrays:
            for _ in range(200):
                np.multiply(X, H, out=prod)
                np.add.reduce(prod, axis=0, out=out)

    def with_einsum():
        for X, H, _, _ in arrays:
            for _ in range(200):
                np.einsum("pk,pk->k", X, H)

    funcs = {"numpy": with_numpy, "einsum": with_einsum}
    try:
        import numba  # noqa: PLC0415 - optional, benchmark only

        @numba.njit(cache=False)
        def mac(X, H, out):
            for k in range(X.shape[1]):
                acc = 0j
                for p in range(X.shape[0]):
                    acc += X[p, k] * H[p, k]
                out[k] = acc

        for X, H, _, out in arrays:
            mac(X, H, out)  # compile outside the timing

        def with_numba():
            for X, H, _, out in arrays:
                for _ in range(200):
                    mac(X, H, out)

        funcs["numba"] = with_numba
    except ImportError:
        pass
    res = interleaved(funcs, repeats)
    line = " | ".join(f"{k} {v / 200 * 1e6:.1f} us" for k, v in res.items())
    if "numba" in res:
        d = (res["numpy"] - res["numba"]) / 200 * 1e6
        verdict = f"numba {'saves' if d > 0 else 'costs'} {abs(d):.1f} us a callback"
    else:
        verdict = "numba not installed"
    print(
        f"multiply-accumulate per live callback: {line} ({verdict}; the engine uses the numpy path)"
    )


def interleaved(funcs: dict, repeats: int) -> dict:
    times = {k: [] for k in funcs}
    for _ in range(repeats):
        for k, f in funcs.items():
            t = time.perf_counter()
            f()
            times[k].append(time.perf_counter() - t)
    return {k: float(np.median(v)) for k, v in times.items()}


def ours_offline(x, h, routing, precision):
    conv = offline_convolver(h, routing, precision=precision)
    B = conv.block
    n = x.shape[0] + h.shape[0] - 1
    out = np.empty((n, routing.n_out), dtype=np.float32 if precision == "float32" else float)
    for s in range(0, n, B):
        conv.process(x[s : s + B], out=out[s : s + B])
    return out


def scipy_offline(x, h, routing):
    n = x.shape[0] + h.shape[0] - 1
    out = np.zeros((n, routing.n_out))
    for p in range(routing.n_paths):
        out[:, routing.path_out[p]] += oaconvolve(
            x[:, routing.path_in[p]], h[:, routing.path_ir[p]]
        )
    return out


def job(name, seconds, ir_seconds, n_ir, repeats, target=True):
    rng = np.random.default_rng(0)
    x = rng.standard_normal((int(seconds * FS), 2))
    h = rng.standard_normal((int(ir_seconds * FS), n_ir)) * 0.01
    r = routing_for(2, n_ir)
    res = interleaved(
        {
            "scipy": lambda: scipy_offline(x, h, r),
            "ours64": lambda: ours_offline(x, h, r, "float64"),
            "ours32": lambda: ours_offline(x, h, r, "float32"),
        },
        repeats,
    )
    print(
        f"{name}: scipy.signal.oaconvolve {res['scipy']:.2f} s | ours float64 "
        f"{res['ours64']:.2f} s, ratio {res['scipy'] / res['ours64']:.1f}x "
        f"({'target >= 5x' if target else 'for information'}) | "
        f"float32 {res['ours32']:.2f} s, ratio {res['scipy'] / res['ours32']:.1f}x"
    )


SCRIPT = """
import sys, numpy as np, soundfile as sf
from scipy.signal import oaconvolve
x, r = sf.read(sys.argv[1]); h, _ = sf.read(sys.argv[2])
y = np.stack([oaconvolve(x[:, c], h[:, c]) for c in range(x.shape[1])], axis=1)
sf.write(sys.argv[3], y, r, subtype="FLOAT")
"""


def whole_process(seconds, repeats):
    rng = np.random.default_rng(1)
    with tempfile.TemporaryDirectory() as tmp:
        tmp = Path(tmp)
        sf.write(
            tmp / "dry.wav", 0.02 * rng.standard_normal((int(seconds * FS), 2)), FS, subtype="FLOAT"
        )
        sf.write(tmp / "ir.wav", 0.01 * rng.standard_normal((4 * FS, 2)), FS, subtype="FLOAT")
        (tmp / "ref.py").write_text(SCRIPT)

        def ours():
            subprocess.run(
                [
                    sys.executable,
                    "-m",
                    "roomconv",
                    "render",
                    str(tmp / "dry.wav"),
                    "--ir",
                    str(tmp / "ir.wav"),
                    "-o",
                    str(tmp / "a.wav"),
                    "--force",
                    "--quiet",
                ],
                check=True,
            )

        def ref():
            subprocess.run(
                [
                    sys.executable,
                    str(tmp / "ref.py"),
                    str(tmp / "dry.wav"),
                    str(tmp / "ir.wav"),
                    str(tmp / "b.wav"),
                ],
                check=True,
            )

        res = interleaved({"scipy": ref, "ours": ours}, repeats)
    print(
        f"whole process, {seconds:.0f} s stereo through 4 s IR: soundfile+oaconvolve script "
        f"{res['scipy']:.2f} s | roomconv render {res['ours']:.2f} s, ratio "
        f"{res['scipy'] / res['ours']:.1f}x (target >= 2.5x)"
    )


def live(block, ir_seconds=5.0, callbacks=3000, limiting=False):
    """Callback compute time of the whole live chain (engine, gain, limiter, meter) as a
    fraction of the block's duration. The IR is decaying noise (T = 2 s) of unit energy and
    the input noise at -20 dBFS, so the limiter idles as it does at a sensible level; with
    ``limiting`` the input is 20 dB hotter and the limiter works on every block."""
    rng = np.random.default_rng(2)
    t = np.arange(int(ir_seconds * FS)) / FS
    h = rng.standard_normal(t.size) * np.exp(-6.9 * t / 2.0)
    h /= np.sqrt(np.sum(h**2))
    proc = LiveProcessor(h, FS, block=block, fade_in_s=0.01)
    x = rng.standard_normal((block, 1)) * (1.0 if limiting else 0.1)
    for _ in range(callbacks):
        proc.process(x)
    assert (proc.stats.limiter_db > 0) == limiting
    c = proc.stats.compute.recent(skip=200) / (block / FS)
    # The same audio through scipy in one go, per block, for scale.
    t = time.perf_counter()
    oaconvolve(rng.standard_normal(callbacks * block), h)
    scipy_per_block = (time.perf_counter() - t) / callbacks / (block / FS)
    return c.mean(), np.percentile(c, 99), scipy_per_block


def analysis(repeats):
    rng = np.random.default_rng(3)
    t = np.arange(10 * FS) / FS
    h = rng.standard_normal(t.size) * np.exp(-6.9 * t / 1.5) + 1e-4 * rng.standard_normal(t.size)
    bands, _ = bands_for_rate("third", FS)
    res = interleaved(
        {
            "filters": lambda: [sosfilt(band_sos(b, FS), h) for b in bands],
            "ours": lambda: room_parameters(h, FS, bands="third"),
        },
        repeats,
    )
    print(
        f"analysis, 10 s IR at 48 kHz, {len(bands)} third-octave bands: all parameters "
        f"{res['ours']:.2f} s (target < 0.5 s) | scipy.signal.sosfilt of the same bands alone "
        f"{res['filters']:.2f} s, ratio {res['filters'] / res['ours']:.2f}"
    )


def memory(seconds):
    rng = np.random.default_rng(4)
    with tempfile.TemporaryDirectory() as tmp:
        tmp = Path(tmp)
        with sf.SoundFile(tmp / "long.wav", "w", FS, 2, "PCM_16", format="RF64") as f:
            chunk = 0.1 * rng.standard_normal((FS * 60, 2))
            for _ in range(int(seconds // 60)):
                f.write(chunk)
        sf.write(tmp / "ir.wav", 0.01 * rng.standard_normal((4 * FS, 2)), FS, subtype="FLOAT")
        code = (
            "import resource, subprocess, sys; subprocess.run(sys.argv[1:], check=True); "
            "print(resource.getrusage(resource.RUSAGE_CHILDREN).ru_maxrss)"
        )
        out = subprocess.run(
            [
                sys.executable,
                "-c",
                code,
                sys.executable,
                "-m",
                "roomconv",
                "render",
                str(tmp / "long.wav"),
                "--ir",
                str(tmp / "ir.wav"),
                "-o",
                str(tmp / "o.wav"),
                "--quiet",
            ],
            check=True,
            capture_output=True,
            text=True,
        )
        rss_mb = int(out.stdout.strip().splitlines()[-1]) / 1024
    print(
        f"memory, {seconds / 60:.0f} min stereo render: peak RSS {rss_mb:.0f} MB "
        f"(target < 500 MB for 2 hours)"
    )


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("--quick", action="store_true")
    ap.add_argument("--long", action="store_true")
    a = ap.parse_args()
    reps = 5
    secs = 30 if a.quick else 180
    print(f"roomconv benchmarks ({os.cpu_count()} cores; medians of {reps}, interleaved)")
    fft_backends(reps)
    compiled_mac(reps)
    job(f"job A, {secs} s stereo through a 4 s stereo IR", secs, 4.0, 2, reps)
    job(f"job B, {secs} s true stereo through 4 IRs of 6 s", secs, 6.0, 4, reps)
    job(
        f"job C, {secs} s stereo through a 35 s stereo IR (beyond one FFT: partitioned)",
        secs,
        35.0,
        2,
        reps,
        target=False,
    )
    whole_process(secs, reps)
    n_cb = 1500 if a.quick else 3000
    for block, limiting in ((128, False), (64, False), (128, True)):
        mean, p99, sc = live(block, callbacks=n_cb, limiting=limiting)
        target = (
            ("mean <= 2 %, p99 <= 10 %" if block == 128 else "mean <= 10 %")
            if not limiting
            else "for information: limiter reducing on every block"
        )
        print(
            f"live, 5 s mono IR, {block}-sample blocks{', limiting' if limiting else ''}: "
            f"compute mean {100 * mean:.1f} %, p99 {100 * p99:.1f} % of a block ({target}) "
            f"| scipy oaconvolve of the same audio offline: {100 * sc:.1f} % of a block"
        )
    analysis(reps)
    memory(7200 if a.long else (120 if a.quick else 1200))


if __name__ == "__main__":
    main()
