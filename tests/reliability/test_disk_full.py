"""A full disk: the message says so and names the file, the exit code is 2 (the user can act
on it: free space or write elsewhere), and nothing partial is left. Uses a 1 MiB tmpfs, which
needs root and permission to mount; skipped with the reason otherwise."""

from __future__ import annotations

import os
import shutil
import subprocess

import pytest

from .conftest import write_noise


@pytest.fixture
def small_disk(tmp_path):
    mnt = tmp_path / "small"
    mnt.mkdir()
    if os.geteuid() != 0 or not shutil.which("mount"):
        pytest.skip("a small tmpfs needs root and mount(8)")
    r = subprocess.run(
        ["mount", "-t", "tmpfs", "-o", "size=1m", "tmpfs", str(mnt)],
        capture_output=True,
        text=True,
        check=False,
    )
    if r.returncode != 0:
        pytest.skip(f"cannot mount a tmpfs here: {r.stderr.strip()}")
    try:
        yield mnt
    finally:
        subprocess.run(["umount", str(mnt)], check=False)


def test_render_onto_a_full_disk(small_disk, tmp_path, cli):
    dry = write_noise(tmp_path / "dry.wav", 20, channels=1)  # 1.28 MB of float output
    ir = write_noise(tmp_path / "ir.wav", 0.2, seed=1, decay=20.0)
    out = small_disk / "wet.wav"
    code, _, err = cli("render", dry, "--ir", ir, "-o", out)
    assert code == 2, err
    assert "no space left on device while writing" in err and "wet.wav" in err
    assert "Traceback" not in err and "report it" not in err
    assert list(small_disk.iterdir()) == []


def test_sweep_and_its_sidecar_onto_a_full_disk(small_disk, cli):
    out = small_disk / "long_sweep.wav"
    code, _, err = cli("sweep", out, "--rate", 48000, "--duration", 10)
    assert code == 2, err
    assert "no space left on device while writing" in err
    assert list(small_disk.iterdir()) == []


def test_extract_whose_later_output_hits_a_full_disk_leaves_none(small_disk, tmp_path, cli):
    ir = write_noise(tmp_path / "room.wav", 0.3, seed=1, decay=15.0)
    sweep = ["--rate", 16000, "--duration", 1, "--silence", 0.6, "--high", 7000]
    assert cli("sweep", tmp_path / "sw.wav", *sweep)[0] == 0
    assert (
        cli(
            "measure",
            tmp_path / "ref.wav",
            "--simulate",
            ir,
            *sweep,
            "--save-recording",
            tmp_path / "rec.wav",
        )[0]
        == 0
    )
    # Leave room for the response (9600 float samples, about 38 kB) but not for the rest.
    st = os.statvfs(small_disk)
    filler = small_disk / "filler.bin"
    filler.write_bytes(b"\0" * (st.f_bavail * st.f_frsize - 56 * 1024))
    code, _, err = cli(
        "extract",
        tmp_path / "rec.wav",
        "--sweep",
        tmp_path / "sw.wav",
        "-o",
        small_disk / "x.wav",
        "--harmonics",
        small_disk / "harm",
        "--json",
        small_disk / "x.quality.json",
    )
    assert code == 2, err
    assert "no space left on device while writing" in err
    # The response was written before the disk filled up; the failed run removed it again.
    assert sorted(p.name for p in small_disk.iterdir()) == ["filler.bin"]
