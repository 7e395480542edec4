"""The SOFA paths of the command line: export (with and without a study file), analyze a
.sofa file, render and batch through one of its measurements, no clobber, exit codes.

Renders are compared with scipy.signal.fftconvolve; analyses of a set with the analysis of
the same responses as WAV files (the same samples must give the same numbers); positions and
ids with the study file they came from. Layout details come from the AES69-2022 convention
tables of GeneralFIR 1.0 and SingleRoomSRIR 1.1 (seen).
"""

from __future__ import annotations

import json

import netCDF4
import numpy as np
import pytest
import soundfile as sf
from scipy.signal import fftconvolve

from tests.conftest import band_limited_room

FS = 48000

STUDY = """
[study]
title = "Test set"
author = "tester"

[room]
name = "Box room"
dimensions_m = [9.0, 6.0, 3.0]
temperature_c = 21.0

[[sources]]
id = "S1"
xy_m = [2.0, 3.0]
height_m = 1.5

[[receivers]]
id = "R1"
xy_m = [6.0, 2.0]
height_m = 1.2

[[receivers]]
id = "R2"
xy_m = [7.0, 4.5]
height_m = 1.2

[[responses]]
source = "S1"
receiver = "R1"
file = "r1.wav"

[[responses]]
source = "S1"
receiver = "R2"
file = "r2.wav"
"""


@pytest.fixture
def room(tmp_path):
    irs = []
    for i in (1, 2):
        h = band_limited_room(FS, rt=0.3, length_s=0.5, seed=40 + i)
        sf.write(tmp_path / f"r{i}.wav", h, FS, subtype="DOUBLE")
        irs.append(h)
    rng = np.random.default_rng(3)
    dry = 0.1 * rng.standard_normal(FS // 4)
    sf.write(tmp_path / "dry.wav", dry, FS, subtype="DOUBLE")
    (tmp_path / "study.toml").write_text(STUDY)
    return tmp_path, irs, dry


def _one_line_error(err: str, *names: str) -> None:
    lines = [ln for ln in err.strip().splitlines() if ln.startswith("roomconv: error:")]
    assert len(lines) == 1, err
    assert "Traceback" not in err
    for n in names:
        assert n in lines[0], (n, err)


def test_export_without_a_study_then_no_clobber_then_force(room, cli):
    d, irs, _ = room
    out = d / "set.sofa"
    code, stdout, err = cli("export", d / "r1.wav", d / "r2.wav", "-o", out)
    assert code == 0, err
    assert "GeneralFIR" in stdout and "positions unknown" in stdout
    with netCDF4.Dataset(out) as ds:
        assert ds.SOFAConventions == "GeneralFIR"
        np.testing.assert_array_equal(ds["Data.IR"][:, 0, :], np.stack(irs))
    before = out.read_bytes()
    code, _, err = cli("export", d / "r1.wav", d / "r2.wav", "-o", out)
    assert code == 2
    _one_line_error(err, "set.sofa", "exists already", "--force")
    assert out.read_bytes() == before
    code, _, err = cli("export", d / "r2.wav", "-o", out, "--force")
    assert code == 0, err
    with netCDF4.Dataset(out) as ds:
        assert len(ds.dimensions["M"]) == 1
    assert not list(d.glob(".rc-*.tmp"))


def test_export_with_a_study_writes_positions_ids_and_the_room(room, cli):
    d, irs, _ = room
    out = d / "room.sofa"
    code, stdout, err = cli("export", "--study", d / "study.toml", "-o", out)
    assert code == 0, err
    assert "SingleRoomSRIR" in stdout
    with netCDF4.Dataset(out) as ds:
        assert ds.SOFAConventions == "SingleRoomSRIR" and ds.RoomType == "shoebox"
        assert ds.Title == "Test set" and ds.AuthorContact == "tester"
        # Positions from the study: plan x, y and height above the floor, metres.
        np.testing.assert_array_equal(ds["SourcePosition"][:], [[2, 3, 1.5], [2, 3, 1.5]])
        np.testing.assert_array_equal(ds["ListenerPosition"][:], [[6, 2, 1.2], [7, 4.5, 1.2]])
        np.testing.assert_array_equal(ds["RoomCornerB"][:], [[9, 6, 3]])
        assert netCDF4.chartostring(ds["ListenerLabel"][:]).tolist() == ["R1", "R2"]
        np.testing.assert_array_equal(ds["Data.IR"][:, 0, :], np.stack(irs))


def test_export_refusals(room, cli):
    d, _, _ = room
    sf.write(d / "other.wav", np.ones(10), FS)
    code, _, err = cli("export", d / "other.wav", "--study", d / "study.toml", "-o", d / "x.sofa")
    assert code == 2
    _one_line_error(err, "other.wav", "not among the [[responses]]")
    code, _, err = cli("export", d / "r1.wav", "-o", d / "x.wav")
    assert code == 2
    _one_line_error(err, "x.wav", ".sofa")
    sf.write(d / "r44.wav", np.ones(10), 44100)
    code, _, err = cli("export", d / "r1.wav", d / "r44.wav", "-o", d / "x.sofa")
    assert code == 2
    _one_line_error(err, "r44.wav", "44100 Hz")
    code, _, err = cli("export", "-o", d / "x.sofa")
    assert code == 2
    _one_line_error(err, "no responses given")
    assert not (d / "x.sofa").exists()


def test_analyze_a_sofa_set_gives_the_numbers_of_its_wav_files(room, cli):
    d, _, _ = room
    assert cli("export", "--study", d / "study.toml", "-o", d / "room.sofa")[0] == 0
    code, _, err = cli("analyze", d / "room.sofa", "--json", d / "a.json", "--quiet")
    assert code == 0, err
    code, _, err = cli("analyze", d / "r1.wav", d / "r2.wav", "--json", d / "b.json", "--quiet")
    assert code == 0, err
    a = json.loads((d / "a.json").read_text())
    b = json.loads((d / "b.json").read_text())
    assert [p["file"] for p in a["positions"]] == [
        f"{d / 'room.sofa'}#1 S1-R1",
        f"{d / 'room.sofa'}#2 S1-R2",
    ]
    for pa, pb in zip(a["positions"], b["positions"], strict=True):
        assert pa["bands"] == pb["bands"]
    assert a["average"]["single_numbers"] == b["average"]["single_numbers"]


def test_render_through_one_measurement(room, cli):
    d, irs, dry = room
    assert cli("export", "--study", d / "study.toml", "-o", d / "room.sofa")[0] == 0
    common = ("--keep-ir-level", "--subtype", "DOUBLE")  # compare with the raw convolution
    code, _, err = cli(
        "render",
        d / "dry.wav",
        "--ir",
        d / "room.sofa",
        "--measurement",
        "2",
        "-o",
        d / "w2.wav",
        *common,
    )
    assert code == 0, err
    y, _ = sf.read(d / "w2.wav")
    ref = fftconvolve(dry, irs[1])  # scipy.signal.fftconvolve reference
    assert y.shape == ref.shape
    assert 10 * np.log10(np.sum((y - ref) ** 2) / np.sum(ref**2)) < -120
    code, _, err = cli(
        "render",
        d / "dry.wav",
        "--ir",
        d / "room.sofa",
        "--receiver",
        "R1",
        "-o",
        d / "w1.wav",
        *common,
    )
    assert code == 0, err
    y1, _ = sf.read(d / "w1.wav")
    ref1 = fftconvolve(dry, irs[0])
    assert 10 * np.log10(np.sum((y1 - ref1) ** 2) / np.sum(ref1**2)) < -120
    prov = json.loads((d / "w2.provenance.json").read_text())
    assert prov["settings"]["ir_measurement"] == 2


def test_render_refusals_name_the_option(room, cli):
    d, _, _ = room
    assert cli("export", "--study", d / "study.toml", "-o", d / "room.sofa")[0] == 0
    code, _, err = cli("render", d / "dry.wav", "--ir", d / "room.sofa", "-o", d / "w.wav")
    assert code == 2
    _one_line_error(err, "--measurement", "holds 2 measurements")
    code, _, err = cli(
        "render", d / "dry.wav", "--ir", d / "room.sofa", "--measurement", "3", "-o", d / "w.wav"
    )
    assert code == 2
    _one_line_error(err, "--measurement", "has no measurement 3")
    code, _, err = cli(
        "render", d / "dry.wav", "--ir", d / "room.sofa", "--receiver", "R9", "-o", d / "w.wav"
    )
    assert code == 2
    _one_line_error(err, "--source/--receiver", "'R9'")
    code, _, err = cli(
        "render", d / "dry.wav", "--ir", d / "r1.wav", "--measurement", "1", "-o", d / "w.wav"
    )
    assert code == 2
    _one_line_error(err, "--measurement", "SOFA")
    assert not (d / "w.wav").exists()


def test_batch_through_a_measurement(room, cli):
    d, irs, dry = room
    assert cli("export", d / "r1.wav", d / "r2.wav", "-o", d / "set.sofa")[0] == 0
    code, _, err = cli(
        "batch",
        d / "dry.wav",
        "--ir",
        d / "set.sofa",
        "--measurement",
        "1",
        "--out-dir",
        d / "wet",
        "--keep-ir-level",
        "--subtype",
        "DOUBLE",
        "--workers",
        "1",
    )
    assert code == 0, err
    y, _ = sf.read(d / "wet" / "dry__set.wav")
    ref = fftconvolve(dry, irs[0])  # scipy.signal.fftconvolve reference
    assert 10 * np.log10(np.sum((y - ref) ** 2) / np.sum(ref**2)) < -120


def test_bad_sofa_files_exit_2_naming_them(room, cli):
    d, _, _ = room
    (d / "junk.sofa").write_bytes(b"not a netCDF file at all")
    code, _, err = cli("analyze", d / "junk.sofa", "--quiet")
    assert code == 2
    _one_line_error(err, "junk.sofa", "cannot be read as a SOFA file")
    with netCDF4.Dataset(d / "tf.sofa", "w", format="NETCDF4") as ds:
        for k in (
            "Conventions",
            "Version",
            "SOFAConventions",
            "SOFAConventionsVersion",
            "DataType",
            "RoomType",
            "Title",
            "DateCreated",
            "DateModified",
            "APIName",
            "APIVersion",
            "AuthorContact",
            "Organization",
            "License",
        ):
            ds.setncattr(k, "x")
        ds.Conventions, ds.SOFAConventions, ds.DataType = "SOFA", "GeneralTF", "TF"
    code, _, err = cli("render", d / "dry.wav", "--ir", d / "tf.sofa", "-o", d / "w.wav")
    assert code == 2
    _one_line_error(err, "--ir", "tf.sofa", "'TF'")


def test_live_needs_a_measurement_before_any_device_is_opened(room, cli):
    # The response is read before the sound card is looked for, so this needs no hardware.
    d, _, _ = room
    assert cli("export", d / "r1.wav", d / "r2.wav", "-o", d / "set.sofa")[0] == 0
    code, _, err = cli("live", "--ir", d / "set.sofa", "--duration", "1")
    assert code == 2
    _one_line_error(err, "--measurement", "holds 2 measurements")
    from roomconv.safety import caution_text

    assert caution_text().splitlines()[0] not in err  # refused before the caution
