"""``batch`` under interrupts and kills: queued jobs are cancelled, workers stop at once and
never outlive their parent, and a resume verifies every finished output (frames + SHA-256)
before trusting it. Reference output: scipy.signal.fftconvolve."""

from __future__ import annotations

import json
import signal
import time

import numpy as np
import pytest
import soundfile as sf
from scipy.signal import fftconvolve

from .conftest import (
    children,
    run_cli,
    running,
    start_cli,
    temps,
    wait_for,
    write_noise,
)


def _outputs(folder):
    return sorted(p.name for p in folder.glob("*__*.wav")) if folder.exists() else []


@pytest.fixture
def long_batch(tmp_path):
    drys = [write_noise(tmp_path / f"take{k}.wav", 60, channels=2, seed=k) for k in range(3)]
    ir = write_noise(tmp_path / "hall.wav", 0.5, channels=2, seed=9, decay=8.0)
    return tmp_path, drys, ir


@pytest.mark.parametrize("sig", [signal.SIGINT, signal.SIGTERM])
def test_interrupt_cancels_queued_jobs_and_stops_workers(long_batch, linux_proc, sig):
    folder, drys, ir = long_batch
    out = folder / "wet"
    p = start_cli(
        "batch",
        *drys,
        "--ir",
        ir,
        "--out-dir",
        out,
        "--workers",
        1,
        "--normalize",
        "loudness",
        "--quiet",
    )
    assert wait_for(lambda: temps(out), timeout=60), "no job started"
    workers = children(p.pid)
    p.send_signal(sig)
    _, err = p.communicate(timeout=60)
    assert p.returncode == 128 + int(sig), err
    done_at_exit = _outputs(out)
    assert len(done_at_exit) < len(drys)
    time.sleep(1.0)
    assert _outputs(out) == done_at_exit, "jobs went on after the interrupt"
    assert temps(out) == []
    assert wait_for(lambda: not any(running(w) for w in workers), timeout=10), (
        "worker processes outlived the batch"
    )


def test_sigkill_of_the_parent_stops_workers_and_resume_finishes_cleanly(long_batch, linux_proc):
    folder, drys, ir = long_batch
    out = folder / "wet"
    args = ["batch", *drys, "--ir", ir, "--out-dir", out, "--workers", 2, "--quiet"]
    p = start_cli(*args, "--normalize", "loudness")
    assert wait_for(lambda: temps(out), timeout=60)
    workers = wait_for(lambda: children(p.pid), timeout=10)
    p.send_signal(signal.SIGKILL)
    p.wait(timeout=30)
    assert wait_for(lambda: not any(running(w) for w in workers), timeout=15), (
        "workers went on after their parent was killed"
    )
    code, _, err = run_cli(*args, "--normalize", "loudness", timeout=120)
    assert code == 0, err
    assert temps(out) == []
    assert len(_outputs(out)) == len(drys)


def test_resume_verifies_outputs_and_redoes_damaged_or_unvouched_ones(tmp_path):
    drys = [write_noise(tmp_path / f"t{k}.wav", 1.0, seed=k) for k in range(4)]
    ir = write_noise(tmp_path / "room.wav", 0.2, seed=7, decay=20.0)
    out = tmp_path / "wet"
    args = [
        "batch",
        *drys,
        "--ir",
        ir,
        "--out-dir",
        out,
        "--workers",
        1,
        "--subtype",
        "DOUBLE",
        "--quiet",
    ]
    code, _, err = run_cli(*args)
    assert code == 0, err
    prov = json.loads((out / "t0__room.provenance.json").read_text())
    assert prov["output"]["frames"] == 16000 + 3200 - 1
    # Damage three outputs in three ways: truncated, altered in place, sidecar lost.
    with open(out / "t0__room.wav", "r+b") as fh:
        fh.truncate(1000)
    with open(out / "t1__room.wav", "r+b") as fh:
        fh.seek(-8, 2)
        fh.write(b"\x00" * 8)
    (out / "t2__room.provenance.json").unlink()
    (out / "t3__room.wav").rename(out / "t3__room.wav.moved")  # output gone, sidecar stays
    code, _, err = run_cli(*[a for a in args if a != "--quiet"])
    assert code == 0, err
    assert "t0__room.wav: rendered again (the output held 1" in err
    assert "t1__room.wav: rendered again (the output differed from the hash" in err
    assert "t2__room.wav: rendered again (the output had no sidecar)" in err
    stamp = (out / "t3__room.wav").stat().st_mtime_ns
    code, text, err = run_cli(*[a for a in args if a != "--quiet"])
    assert code == 0 and "0 rendered, 4 already finished" in text, text + err
    assert (out / "t3__room.wav").stat().st_mtime_ns == stamp  # untouched: it verified
    h, _ = sf.read(ir)
    for k in range(4):
        d, _ = sf.read(drys[k])
        y, _ = sf.read(out / f"t{k}__room.wav")
        # The batch's own output against scipy's FFT convolution with the response scaled to
        # unit energy, 1/sqrt(sum h^2): the default level matching (Parseval's theorem).
        assert np.allclose(y, fftconvolve(d, h / np.sqrt(np.sum(h**2))), atol=1e-9)
