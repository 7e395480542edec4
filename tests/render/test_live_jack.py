"""`roomconv live` on a real-time device: a private JACK server with its dummy driver.

The ALSA file device (test_live.py) is deterministic but not clocked; here PortAudio runs
against a server that calls it every period in real time. A small JACK client of the test's
own (the "rig") plays noise into the live program's input and records its output, both in
the server's own time, so the recording must be the convolution of what was played with the
IR (reference: scipy.signal.fftconvolve), shifted by the path's latency in whole periods.
"""

from __future__ import annotations

import os
import shutil
import subprocess
import sys
import time

import numpy as np
import pytest
import soundfile as sf
from scipy.signal import correlate, correlation_lags, fftconvolve

FS = 48000
PERIOD = 256


def _jack_missing() -> str | None:
    import ctypes.util

    for tool in ("jackd", "jack_wait"):
        if shutil.which(tool) is None:
            return f"{tool} is not installed (Debian: apt-get install jackd2)"
    if ctypes.util.find_library("portaudio") is None:
        return "the PortAudio library (libportaudio2) is not installed"
    try:
        import jack  # noqa: F401, PLC0415
    except (ImportError, OSError) as exc:
        return f"the JACK-Client package cannot load libjack ({exc})"
    return None


@pytest.fixture
def jack_server():
    reason = _jack_missing()
    if reason:
        pytest.skip(reason)
    name = f"roomconv-test-{os.getpid()}"
    server = subprocess.Popen(
        [
            "jackd",
            "-n",
            name,
            "-r",
            "-a",
            "e",
            "-d",
            "dummy",
            "-r",
            str(FS),
            "-p",
            str(PERIOD),
            "-C",
            "2",
            "-P",
            "2",
        ],
        stdout=subprocess.DEVNULL,
        stderr=subprocess.PIPE,
        text=True,
    )
    try:
        ready = subprocess.run(
            ["jack_wait", "-s", name, "-w", "-t", "10"], capture_output=True, text=True, timeout=20
        )
        if ready.returncode != 0 or server.poll() is not None:
            server.kill()
            pytest.skip(f"the JACK dummy server did not start: {server.stderr.read()[-300:]}")
        yield name
    finally:
        if server.poll() is None:
            server.terminate()
            try:
                server.wait(10)
            except subprocess.TimeoutExpired:
                server.kill()


@pytest.mark.audio
@pytest.mark.timeout(120)
def test_live_on_a_real_time_jack_device(jack_server, tmp_path):
    import jack

    rng = np.random.default_rng(3)
    t = np.arange(3000) / FS
    ir = rng.standard_normal(t.size) * np.exp(-t / 0.01) * 0.05
    sf.write(tmp_path / "ir.wav", ir, FS, subtype="DOUBLE")
    played = (0.1 * rng.standard_normal(FS * 12)).astype(np.float32)
    heard = np.zeros_like(played)
    clock = {"pos": 0, "xruns": 0}

    rig = jack.Client("rig", servername=jack_server, no_start_server=True)
    src, rec = rig.outports.register("src"), rig.inports.register("rec")

    @rig.set_process_callback
    def _process(frames):
        p = clock["pos"]
        if p + frames <= played.size:
            src.get_array()[:] = played[p : p + frames]
            heard[p : p + frames] = rec.get_array()
        else:
            src.get_array()[:] = 0.0
        clock["pos"] = p + frames

    @rig.set_xrun_callback
    def _xrun(_delay):
        clock["xruns"] += 1

    rig.activate()
    live = subprocess.Popen(
        [
            sys.executable,
            "-m",
            "roomconv",
            "live",
            "--ir",
            str(tmp_path / "ir.wav"),
            "--keep-ir-level",  # compared with the raw convolution below
            "--device",
            "0",
            "--block",
            str(PERIOD),
            "--rate",
            str(FS),
            "--gain",
            "0",
            "--duration",
            "4",
            "--yes",
        ],
        env={**os.environ, "JACK_DEFAULT_SERVER": jack_server},
        stdout=subprocess.PIPE,
        stderr=subprocess.PIPE,
        text=True,
    )
    # Wire the program in from a client that owns no ports (the server ignores clients
    # connecting their own ports to others, see its -a option).
    wire = jack.Client("wire", servername=jack_server, no_start_server=True)
    try:
        deadline, ports = time.monotonic() + 30, None
        while time.monotonic() < deadline and live.poll() is None:
            ins = [
                p.name
                for p in wire.get_ports(is_audio=True, is_input=True)
                if not p.name.startswith(("system:", "rig:"))
            ]
            outs = [
                p.name
                for p in wire.get_ports(is_audio=True, is_output=True)
                if not p.name.startswith(("system:", "rig:"))
            ]
            if ins and outs:
                ports = ins[0], outs[0]
                break
            time.sleep(0.01)
        assert ports, f"roomconv live never showed its JACK ports: {live.stderr.read()[-500:]}"
        wire.connect("rig:src", ports[0])
        wire.connect(ports[1], "rig:rec")
        wired_at = clock["pos"]
        out, err = live.communicate(timeout=60)
        ended_at = clock["pos"]
    finally:
        if live.poll() is None:
            live.kill()
        rig.deactivate()
        rig.close()
        wire.close()
    assert live.returncode == 0, err
    assert "CAUTION" in err and "dropouts" in out and "compute mean" in out

    # Compare the settled part (after the 0.5 s fade-in, before the fade-out) piece by piece,
    # each at its own latency: an xrun may shift the alignment, but never the content.
    ref = fftconvolve(played.astype(float), ir)
    last_sound = int(np.nonzero(heard[: min(ended_at, played.size)])[0][-1])
    start, stop = wired_at + FS, last_sound - FS // 5
    assert stop - start > FS, "too little of the run was recorded"
    piece, bad, lags = FS // 4, 0, set()
    for a in range(start, stop - piece, piece):
        got = heard[a : a + piece].astype(float)
        window = ref[a - 8192 : a + piece]
        cc = correlate(got, window, mode="valid", method="fft")
        lag = 8192 + int(correlation_lags(got.size, window.size, mode="valid")[np.argmax(cc)])
        want = ref[a - lag : a - lag + piece]
        err_db = 10 * np.log10(np.sum((got - want) ** 2) / np.sum(want**2))
        lags.add(lag)
        bad += err_db > -100  # float32 I/O: about -138 dB when nothing is lost
    # Each xrun can spoil at most the piece it falls in; nothing else may differ.
    assert bad <= clock["xruns"], (bad, clock["xruns"], sorted(lags))
    assert all(lag % PERIOD == 0 for lag in lags), sorted(lags)
