"""Failures leave nothing behind (no empty report or output folder, no recording), and bad
names and paths are a one-line exit 2 naming the path. Limits: POSIX NAME_MAX 255 bytes and
PATH_MAX 4096 on Linux (os.pathconf)."""

from __future__ import annotations

import json
import os

import pytest

from .conftest import start_cli, write_noise

RATE = 16000
SWEEP = ["--rate", RATE, "--duration", 1, "--silence", 0.6, "--high", 7000]


@pytest.fixture
def files(tmp_path):
    dry = write_noise(tmp_path / "dry.wav", 0.5)
    ir = write_noise(tmp_path / "ir.wav", 0.3, seed=1, decay=15.0)
    bad = tmp_path / "bad.wav"
    bad.write_bytes(b"RIFF not really audio")
    return tmp_path, dry, ir, bad


def one_line(err: str) -> bool:
    lines = [ln for ln in err.splitlines() if ln.startswith("roomconv: error")]
    return len(lines) == 1 and "Traceback" not in err


def test_failed_analysis_leaves_no_report_folder(files, cli):
    tmp, _, _, bad = files
    code, _, err = cli("analyze", bad, "--report", tmp / "newrep" / "deep")
    assert code == 2 and one_line(err)
    assert not (tmp / "newrep").exists()


def test_multi_file_analysis_writes_the_good_ones_and_lists_the_bad(files, cli):
    tmp, _, ir, bad = files
    code, _, err = cli("analyze", ir, bad, "--json", tmp / "all.json")
    assert code == 2 and "bad.wav" in err
    doc = json.loads((tmp / "all.json").read_text())
    assert any("bad.wav" in e for e in doc["errors"])


def test_batch_with_only_bad_inputs_leaves_no_output_folder(files, cli):
    tmp, _, ir, bad = files
    fifo = tmp / "pipe.wav"
    os.mkfifo(fifo)
    code, _, err = cli("batch", bad, fifo, "--ir", ir, "--out-dir", tmp / "newout", "--workers", 1)
    assert code == 2 and "bad.wav" in err and "pipe.wav" in err
    assert not (tmp / "newout").exists()


def test_failed_extraction_in_measure_leaves_no_recording(files, cli):
    tmp, _, ir, _ = files
    code, _, err = cli(
        "measure",
        tmp / "m.wav",
        "--simulate",
        ir,
        *SWEEP,
        "--reference-channel",
        5,
        "--save-recording",
        tmp / "rec.wav",
        "--harmonics",
        tmp / "harm",
    )
    assert code == 2 and one_line(err)
    assert not any(p.exists() for p in (tmp / "rec.wav", tmp / "m.wav", tmp / "harm"))


def test_existing_file_as_report_or_harmonics_folder(files, cli):
    tmp, dry, ir, _ = files
    code, _, err = cli("analyze", ir, "--report", dry)
    assert code == 2 and "dry.wav" in err and "not a folder" in err
    assert cli("sweep", tmp / "sw.wav", *SWEEP)[0] == 0
    assert (
        cli(
            "measure",
            tmp / "ref.wav",
            "--simulate",
            ir,
            *SWEEP,
            "--save-recording",
            tmp / "rec.wav",
        )[0]
        == 0
    )
    code, _, err = cli(
        "extract",
        tmp / "rec.wav",
        "--sweep",
        tmp / "sw.wav",
        "-o",
        tmp / "x.wav",
        "--harmonics",
        dry,
    )
    assert code == 2 and "dry.wav" in err and "not a folder" in err
    assert not (tmp / "x.wav").exists()


@pytest.mark.parametrize(
    "case", ["dir-output", "empty-output", "long-name", "long-path", "loop-output"]
)
def test_bad_output_names_are_refused(files, cli, case):
    tmp, dry, ir, _ = files
    (tmp / "loop1").symlink_to(tmp / "loop2")
    (tmp / "loop2").symlink_to(tmp / "loop1")
    out = {
        "dir-output": tmp,
        "empty-output": "",
        "long-name": tmp / ("n" * 300 + ".wav"),
        "long-path": tmp / ("d/" * 2500 + "x.wav"),
        "loop-output": tmp / "loop1",
    }[case]
    code, _, err = cli("render", dry, "--ir", ir, "-o", out)
    assert code == 2 and one_line(err), err
    assert len(err) < 600  # a 5000-character path is shortened in the message


@pytest.mark.parametrize("case", ["fifo", "directory", "loop", "missing"])
def test_bad_inputs_are_refused_before_opening(files, case):
    tmp, _, ir, _ = files
    src = tmp / f"in-{case}"
    if case == "fifo":
        os.mkfifo(src)
    elif case == "directory":
        src.mkdir()
    elif case == "loop":
        src.symlink_to(src)
    # A child process, so that a hang on the FIFO cannot hang the test suite.
    p = start_cli("render", src, "--ir", ir, "-o", tmp / "o.wav")
    _, err = p.communicate(timeout=60)
    assert p.returncode == 2 and one_line(err) and f"in-{case}" in err
    expect = {
        "fifo": "not a regular file",
        "directory": "is a directory",
        "loop": "loop of symbolic links",
        "missing": "not found",
    }[case]
    assert expect in err


@pytest.mark.parametrize("case", ["fifo", "directory"])
def test_side_input_that_is_not_a_file_is_refused_without_hanging(tmp_path, case):
    side = tmp_path / "extra_materials.json"
    if case == "fifo":
        os.mkfifo(side)
    else:
        side.mkdir()
    p = start_cli(
        "synth", tmp_path / "room.wav", "--room", "5x4x3", "--rate", RATE, "--materials-file", side
    )
    _, err = p.communicate(timeout=60)
    assert p.returncode == 2 and one_line(err) and "extra_materials.json" in err
    assert not (tmp_path / "room.wav").exists()
