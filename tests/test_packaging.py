"""The built wheel is a complete program: installed on its own, `roomconv demo` renders the
bundled clips from any folder."""

from __future__ import annotations

import os
import shutil
import subprocess
import sys
import zipfile
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1]


def _run(args, cwd, env=None):
    return subprocess.run(args, cwd=cwd, env=env, capture_output=True, text=True, timeout=280)


@pytest.mark.slow
def test_wheel_installs_and_runs_the_quick_demo_from_another_folder(tmp_path):
    # Build from a copy so that the checkout gets no build/ or egg-info folders.
    src = tmp_path / "src"
    src.mkdir()
    for name in ("roomconv", "tui", "demo_audio"):
        shutil.copytree(ROOT / name, src / name, ignore=shutil.ignore_patterns("__pycache__"))
    for name in ("pyproject.toml", "README.md"):
        shutil.copy(ROOT / name, src / name)
    built = _run(
        [
            sys.executable,
            "-m",
            "pip",
            "wheel",
            "--no-deps",
            "--no-build-isolation",
            "--no-index",
            "-q",
            "-w",
            str(tmp_path / "dist"),
            str(src),
        ],
        cwd=tmp_path,
    )
    assert built.returncode == 0, built.stderr
    (wheel,) = (tmp_path / "dist").glob("roomconv-*.whl")

    names = set(zipfile.ZipFile(wheel).namelist())
    for clip in ("plucks.wav", "claps.wav", "speech.wav"):
        assert f"roomconv/demo_audio/{clip}" in names
    # Every package of the source tree is in the wheel (pyproject lists them by hand).
    for init in list((ROOT / "roomconv").rglob("__init__.py")) + list(
        (ROOT / "tui").rglob("__init__.py")
    ):
        assert init.relative_to(ROOT).as_posix() in names

    site = tmp_path / "site"
    inst = _run(
        [
            sys.executable,
            "-m",
            "pip",
            "install",
            "--no-deps",
            "--no-index",
            "-q",
            "--target",
            str(site),
            str(wheel),
        ],
        cwd=tmp_path,
    )
    assert inst.returncode == 0, inst.stderr

    elsewhere = tmp_path / "elsewhere"
    elsewhere.mkdir()
    env = {**os.environ, "PYTHONPATH": str(site)}
    where = _run(
        [sys.executable, "-c", "import roomconv; print(roomconv.__file__)"], cwd=elsewhere, env=env
    )
    assert Path(where.stdout.strip()).is_relative_to(site), where.stdout + where.stderr
    demo = _run(
        [sys.executable, "-m", "roomconv", "demo", "--quick", "--out", "out"],
        cwd=elsewhere,
        env=env,
    )
    assert demo.returncode == 0, demo.stderr
    assert "missing" not in demo.stdout + demo.stderr
    for name in ("plucks__measured.wav", "plucks__predicted.wav"):
        assert (elsewhere / "out" / "renders" / name).stat().st_size > 10_000
    assert (elsewhere / "out" / "report.html").exists()
