"""Data loss: no output of any command lands on one of its inputs (whatever name reaches
it), on another of its outputs, or on an existing file without --force; the last step is
no-clobber, so of two writers of one new file exactly one wins.

Expected behaviour is the README's promise; identities are checked with the standard
library's os.stat (st_dev, st_ino) and os.path.realpath."""

from __future__ import annotations

import hashlib
import os

import numpy as np
import pytest
import soundfile as sf

from roomconv.audio import WriteGuard, commit, new_temp, sidecar_path
from roomconv.errors import InputError, OutputExistsError

from .conftest import start_cli, write_noise

RATE = 16000
SWEEP = ["--rate", RATE, "--duration", 1, "--silence", 0.6, "--high", 7000]


def digest(p) -> str:
    return hashlib.sha256(open(p, "rb").read()).hexdigest()


@pytest.fixture
def files(tmp_path):
    dry = write_noise(tmp_path / "dry.wav", 0.5)
    ir = write_noise(tmp_path / "ir.wav", 0.2, seed=1, decay=20.0)
    return tmp_path, dry, ir


def test_measure_recording_never_replaces_the_simulated_room(files, cli):
    tmp, _, ir = files
    before = digest(ir)
    code, _, err = cli(
        "measure", tmp / "m.wav", "--simulate", ir, *SWEEP, "--save-recording", ir, "--force"
    )
    assert code == 2 and "ir.wav" in err and "input" in err
    assert digest(ir) == before and not (tmp / "m.wav").exists()


def test_extract_json_never_replaces_the_sweep_sidecar(files, cli):
    tmp, _, ir = files
    assert cli("sweep", tmp / "sw.wav", *SWEEP)[0] == 0
    side = tmp / "sw.sweep.json"
    before = digest(side)
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
        "--json",
        side,
        "--force",
    )
    assert code == 2 and "sw.sweep.json" in err
    assert digest(side) == before and not (tmp / "x.wav").exists()


def test_provenance_sidecars_are_outputs_like_any_other(files, cli):
    tmp, dry, ir = files
    # A sidecar that is also this command's input: synth reading it as a materials file,
    # edit reading it as the response.
    assert (
        cli("synth", tmp / "room.wav", "--room", "6x5x3", "--rate", RATE, "--length", 0.3)[0] == 0
    )
    side = tmp / "room.provenance.json"
    before = digest(side)
    code, _, err = cli(
        "synth",
        tmp / "room.wav",
        "--room",
        "6x5x3",
        "--rate",
        RATE,
        "--materials-file",
        side,
        "--force",
    )
    assert code == 2 and "room.provenance.json" in err
    code, _, err = cli("edit", side, "-o", tmp / "room.wav", "--reverse", "--force")
    assert code == 2 and "room.provenance.json" in err
    assert digest(side) == before
    # Rendering to new.flac after new.wav would rewrite new.provenance.json: not without
    # --force.
    assert cli("render", dry, "--ir", ir, "-o", tmp / "new.wav")[0] == 0
    before = digest(tmp / "new.provenance.json")
    code, _, err = cli("render", dry, "--ir", ir, "-o", tmp / "new.flac")
    assert code == 2 and "new.provenance.json" in err and "--force" in err
    assert digest(tmp / "new.provenance.json") == before
    assert not (tmp / "new.flac").exists()


@pytest.mark.parametrize("alias", ["symlink", "hardlink", "dotdot"])
def test_an_input_reached_by_another_name_is_refused_even_with_force(files, cli, alias):
    tmp, dry, ir = files
    (tmp / "sub").mkdir()
    target = {
        "symlink": tmp / "link.wav",
        "hardlink": tmp / "hard.wav",
        "dotdot": tmp / "sub" / ".." / "dry.wav",
    }[alias]
    if alias == "symlink":
        target.symlink_to(dry)
    elif alias == "hardlink":
        os.link(dry, target)
    before = digest(dry)
    code, _, err = cli("render", dry, "--ir", ir, "-o", target, "--force")
    assert code == 2 and "is also an input" in err
    assert digest(dry) == before


def test_outputs_colliding_with_each_other_are_refused_before_any_write(files, cli):
    tmp, _, ir = files
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
        "--json",
        tmp / "x.provenance.json",
    )
    assert code == 2 and "written twice" in err
    assert not (tmp / "x.wav").exists() and not (tmp / "x.provenance.json").exists()


def test_batch_whose_outputs_land_on_its_inputs_is_refused(tmp_path, cli):
    takes = tmp_path / "takes"
    takes.mkdir()
    write_noise(takes / "a.wav", 0.5)
    ir = write_noise(tmp_path / "ir.wav", 0.1, seed=1, decay=30.0)
    assert (
        cli(
            "batch",
            *sorted(takes.glob("*.wav")),
            "--ir",
            ir,
            "--out-dir",
            takes,
            "--workers",
            1,
            "--force",
        )[0]
        == 0
    )
    first = digest(takes / "a__ir.wav")
    # The second run's glob now includes the first run's output as a dry file.
    code, _, err = cli(
        "batch",
        *sorted(takes.glob("*.wav")),
        "--ir",
        ir,
        "--out-dir",
        takes,
        "--workers",
        1,
        "--force",
    )
    assert code == 2 and "a__ir.wav" in err and "input" in err
    assert digest(takes / "a__ir.wav") == first
    assert not (takes / "a__ir__ir.wav").exists()


def test_commit_is_no_clobber_between_two_writers(tmp_path):
    final = tmp_path / "new.wav"
    g1, g2 = WriteGuard(), WriteGuard()
    g1.file(final)
    g2.file(final)  # both planned while the name was free
    t1, t2 = new_temp(tmp_path), new_temp(tmp_path)
    t1.write_text("one")
    t2.write_text("two")
    commit(t1, final, force=False)
    with pytest.raises(OutputExistsError):
        commit(t2, final, force=False)
    assert final.read_text() == "one"


def test_commit_falls_back_to_exclusive_create_without_hard_links(tmp_path, monkeypatch):
    import errno

    def no_links(*_a, **_k):
        raise OSError(errno.EPERM, "links not supported here")

    monkeypatch.setattr(os, "link", no_links)
    final = tmp_path / "f.json"
    t1, t2 = new_temp(tmp_path), new_temp(tmp_path)
    t1.write_text("one")
    t2.write_text("two")
    commit(t1, final, force=False)
    with pytest.raises(OutputExistsError):
        commit(t2, final, force=False)
    assert final.read_text() == "one" and not t1.exists()


def test_two_processes_rendering_one_new_file_exactly_one_wins(files):
    tmp, _, ir = files
    dry = write_noise(tmp / "long.wav", 40, channels=2)
    out = tmp / "race.wav"
    procs = [
        start_cli("render", dry, "--ir", ir, "-o", out, "--normalize", "loudness", "--quiet")
        for _ in range(2)
    ]
    results = [(p.wait(timeout=120), p.stderr.read()) for p in procs]
    codes = sorted(c for c, _ in results)
    assert codes == [0, 2], results
    loser = next(err for c, err in results if c == 2)
    assert "race.wav" in loser or "race.provenance.json" in loser
    y, rate = sf.read(out)
    assert rate == RATE and y.shape == (40 * RATE + int(0.2 * RATE) - 1, 2)
    assert not list(tmp.glob(".rc-*.tmp"))


def test_a_legal_245_character_name_works(files, cli):
    tmp, dry, ir = files
    name = "r" * 241 + ".wav"  # 245 characters; ext4/tmpfs allow 255 bytes
    code, _, err = cli("render", dry, "--ir", ir, "-o", tmp / name)
    assert code == 0, err
    assert (tmp / name).exists()
    side = sidecar_path(tmp / name, "provenance")
    assert side.exists() and len(side.name) <= 255


def test_guard_refuses_existing_output_without_force_and_replaces_with(tmp_path):
    p = tmp_path / "a.json"
    p.write_text("old")
    with pytest.raises(OutputExistsError):
        WriteGuard().file(p)
    with WriteGuard(force=True) as g:
        g.write_json(p, {"v": np.float64(1.5)})
    assert p.read_text().strip().startswith("{")
    with pytest.raises(InputError):
        WriteGuard([p], force=True).file(p)
