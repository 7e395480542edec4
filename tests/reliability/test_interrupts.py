"""Interrupts and kills: SIGINT, SIGTERM and SIGHUP end a render cleanly (exit 128 + n, the
POSIX shell convention for a death by signal n), and a killed run's leftovers are removed by
the next run in that folder, and nothing else is."""

from __future__ import annotations

import os
import signal
import time

import pytest

from roomconv import audio

from .conftest import start_cli, temps, wait_for, write_noise


@pytest.fixture
def long_job(tmp_path):
    # Long enough that the render (with a loudness pass) is still running when signalled.
    dry = write_noise(tmp_path / "speech.wav", 120, channels=2)
    ir = write_noise(tmp_path / "hall.wav", 1.0, channels=2, seed=1, decay=5.0)
    return tmp_path, dry, ir


@pytest.mark.parametrize("sig", [signal.SIGINT, signal.SIGTERM, signal.SIGHUP])
def test_signal_during_render_removes_temp_files_and_exits_128_plus_n(long_job, sig):
    folder, dry, ir = long_job
    out = folder / "wet.wav"
    p = start_cli("render", dry, "--ir", ir, "-o", out, "--normalize", "loudness", "--quiet")
    assert wait_for(lambda: temps(folder), timeout=60), "the render never started writing"
    p.send_signal(sig)
    _, err = p.communicate(timeout=60)
    # 128 + n: the shell convention for a process ended by signal n (POSIX sh, "Exit Status").
    assert p.returncode == 128 + int(sig), err
    assert "interrupted" in err and "Traceback" not in err
    assert temps(folder) == []
    assert not out.exists() and not (folder / "wet.provenance.json").exists()


def test_sigkill_leftovers_are_removed_by_the_next_run_and_nothing_else(long_job):
    folder, dry, ir = long_job
    p = start_cli(
        "render", dry, "--ir", ir, "-o", folder / "first.wav", "--normalize", "loudness", "--quiet"
    )
    assert wait_for(lambda: temps(folder), timeout=60)
    p.send_signal(signal.SIGKILL)
    p.wait(timeout=30)
    left = temps(folder)
    assert left, "a SIGKILL cannot be caught, so its temp files stay until the next run"
    assert all(t.name.startswith(f".rc-{audio._HOST}-{p.pid}-") for t in left)
    # Files that merely look similar, and a temp file of a live process, must survive.
    other_host = "0000" if audio._HOST != "0000" else "ffff"
    bystanders = [
        folder / ".rc-notapid.tmp",
        folder / ".first.wav.abc.part",
        folder / f".rc-{audio._HOST}-{os.getpid()}-keepme01.tmp",
        folder / f".rc-{other_host}-{p.pid}-otherhost.tmp",
        folder / "notes.tmp",
    ]
    for b in bystanders:
        b.write_text("x")
    old = time.time() - 3600
    for t in left:
        os.utime(t, (old, old))
    small = write_noise(folder / "short.wav", 0.5)
    p2 = start_cli("render", small, "--ir", ir.name, "-o", "second.wav", "--quiet", cwd=folder)
    _, err = p2.communicate(timeout=60)
    assert p2.returncode == 0, err
    assert not any(t.exists() for t in left)
    assert all(b.exists() for b in bystanders)


def test_stale_sweep_keeps_files_of_live_processes(tmp_path):
    mine = tmp_path / f".rc-{audio._HOST}-{os.getpid()}-abcdef12.tmp"
    parent = tmp_path / f".rc-{audio._HOST}-{os.getppid()}-abcdef12.tmp"
    mine.write_text("x")
    parent.write_text("x")
    assert audio.sweep_stale_temps(tmp_path) == []
    assert mine.exists() and parent.exists()
