"""Helpers for the reliability suite: small audio files of our own and the CLI run as a real
process (signals, kills and races need one)."""

from __future__ import annotations

import os
import signal
import subprocess
import sys
import time
from pathlib import Path

import numpy as np
import pytest
import soundfile as sf

ROOT = Path(__file__).resolve().parents[2]
RATE = 16000


def write_noise(
    path,
    seconds: float,
    channels: int = 1,
    rate: int = RATE,
    seed: int = 0,
    decay: float | None = None,
) -> Path:
    """White noise (optionally decaying exponentially, as a toy room response)."""
    rng = np.random.default_rng(seed)
    n = int(seconds * rate)
    x = 0.1 * rng.standard_normal((n, channels))
    if decay is not None:
        x *= np.exp(-decay * np.arange(n) / rate)[:, None]
    sf.write(path, x, rate, subtype="FLOAT")
    return Path(path)


def start_cli(*args, cwd=None) -> subprocess.Popen:
    """``python -m roomconv ARGS`` as a child process of its own session."""
    env = {**os.environ, "PYTHONPATH": str(ROOT)}
    return subprocess.Popen(
        [sys.executable, "-m", "roomconv", *map(str, args)],
        cwd=cwd,
        env=env,
        stdout=subprocess.PIPE,
        stderr=subprocess.PIPE,
        text=True,
        start_new_session=True,
    )


def run_cli(*args, cwd=None, timeout: float = 60) -> tuple[int, str, str]:
    p = start_cli(*args, cwd=cwd)
    out, err = p.communicate(timeout=timeout)
    return p.returncode, out, err


def temps(folder) -> list[Path]:
    """Our temporary files (pattern .rc-<pid>-<random>.tmp) in ``folder``."""
    return sorted(Path(folder).glob(".rc-*.tmp"))


def wait_for(cond, timeout: float = 30.0, step: float = 0.005):
    end = time.monotonic() + timeout
    while time.monotonic() < end:
        v = cond()
        if v:
            return v
        time.sleep(step)
    return None


def children(pid: int) -> list[int]:
    """Direct children of ``pid`` (Linux /proc)."""
    kids = []
    for d in Path("/proc").iterdir():
        if not d.name.isdigit():
            continue
        try:
            stat = (d / "stat").read_text()
        except OSError:
            continue
        fields = stat.rsplit(")", 1)[1].split()
        if int(fields[1]) == pid:
            kids.append(int(d.name))
    return kids


def running(pid: int) -> bool:
    """True while ``pid`` exists and is not a zombie."""
    try:
        stat = Path(f"/proc/{pid}/stat").read_text()
    except OSError:
        return False
    return stat.rsplit(")", 1)[1].split()[0] != "Z"


@pytest.fixture
def linux_proc():
    if not Path("/proc/self/stat").exists() or not hasattr(signal, "SIGKILL"):
        pytest.skip("needs Linux /proc and POSIX signals")
