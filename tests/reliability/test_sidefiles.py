"""Malformed side files are refused with exit 2, naming the file and the field.

JSON allows any value at the top level (RFC 8259, section 2), so a list or a number parses
without error: the shape of the content must be checked by us. JSON's grammar has no NaN
(RFC 8259, section 6), but Python's json module accepts it, so finite values are checked
too (section numbers from memory). TOML tables (TOML v1.0.0) give the same structure for
the materials file.
"""

from __future__ import annotations

import json
import os

import numpy as np
import pytest
import soundfile as sf


@pytest.fixture
def sweep_files(tmp_path, cli):
    code, _, err = cli(
        "sweep",
        tmp_path / "s.wav",
        "--rate",
        16000,
        "--high",
        7000,
        "--duration",
        0.5,
        "--silence",
        0.3,
        "--pre",
        0.1,
    )
    assert code == 0, err
    return tmp_path


@pytest.mark.parametrize(
    "content, field",
    [
        ([1, 2, 3], "JSON object"),
        ({"rate": "fast"}, "missing"),
        ("SWEEP", "JSON object"),
        ("FAST", "'rate'"),
        ("NANDUR", "'duration'"),
        ("BOOLREP", "'repeats'"),
    ],
)
def test_broken_sweep_sidecar(sweep_files, cli, content, field):
    side = sweep_files / "s.sweep.json"
    good = json.loads(side.read_text())
    if content == "SWEEP":
        content = "a sweep"
    elif content == "FAST":
        content = {**good, "rate": "fast"}
    elif content == "NANDUR":
        content = {**good, "duration": float("nan")}
    elif content == "BOOLREP":
        content = {**good, "repeats": True}
    side.write_text(json.dumps(content))
    before = sorted(os.listdir(sweep_files))
    code, _, err = cli(
        "extract",
        sweep_files / "s.wav",
        "--sweep",
        sweep_files / "s.wav",
        "-o",
        sweep_files / "ir.wav",
    )
    assert code == 2, err
    assert "s.sweep.json" in err and field in err, err
    assert len(err.strip().splitlines()) == 1 and "Traceback" not in err
    assert sorted(os.listdir(sweep_files)) == before


def test_intact_sidecar_still_extracts(sweep_files, cli):
    code, _, err = cli(
        "extract",
        sweep_files / "s.wav",
        "--sweep",
        sweep_files / "s.wav",
        "-o",
        sweep_files / "ir.wav",
        "--json",
        sweep_files / "q.json",
    )
    assert code == 0, err
    # The sweep recorded by itself is an identity system: with the sidecar read, the
    # analytic inverse (Farina 2000) gives a band-limited unit impulse at lag 0.
    assert json.loads((sweep_files / "q.json").read_text())["method"] == "analytic_inverse"
    ir, _ = sf.read(sweep_files / "ir.wav")
    assert int(np.argmax(np.abs(ir))) == 0


@pytest.mark.parametrize(
    "name, text, field",
    [
        ("list.json", "[1, 2, 3]", "not a table of materials"),
        ("str.json", '{"felt": {"alpha": "high"}}', "'alpha'"),
        ("scalar.json", '{"felt": {"alpha": 0.5}}', "'alpha'"),
        ("strval.json", '{"felt": {"alpha": [0.1, 0.2, "x", 0.4, 0.5, 0.6]}}', "'alpha'"),
        ("nan.json", '{"felt": {"alpha": [0.1, 0.2, NaN, 0.4, 0.5, 0.6]}}', "felt"),
        ("count.json", '{"felt": {"alpha": [0.1, 0.2, 0.3]}}', "'alpha'"),
        ("row.toml", "felt = 3\n", "felt"),
    ],
)
@pytest.mark.parametrize("command", ["synth", "materials"])
def test_broken_materials_file(tmp_path, cli, name, text, field, command):
    mf = tmp_path / name
    mf.write_text(text)
    args = (
        ["synth", tmp_path / "x.wav", "--room", "6x5x3"]
        if command == "synth"
        else ["materials", "--json", tmp_path / "x.json"]
    )
    code, _, err = cli(*args, "--materials-file", mf)
    assert code == 2, err
    assert name in err and field in err, err
    assert len(err.strip().splitlines()) == 1 and "Traceback" not in err
    assert sorted(os.listdir(tmp_path)) == [name]


def test_materials_file_that_is_a_folder(tmp_path, cli):
    (tmp_path / "mats").mkdir()
    code, _, err = cli("materials", "--materials-file", tmp_path / "mats")
    assert code == 2 and "mats" in err and "not a file" in err, err


def test_valid_materials_file_is_used(tmp_path, cli):
    mf = tmp_path / "ok.json"
    mf.write_text('{"felt": {"alpha": [0.1, 0.2, 0.3, 0.4, 0.5, 0.6], "source": "ours"}}')
    code, out, err = cli("materials", "--materials-file", mf)
    assert code == 0, err
    assert "felt" in out
