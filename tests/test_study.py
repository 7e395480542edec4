"""The study file: the template, validation that names the key, and relative paths."""

from __future__ import annotations

import os

import pytest

from roomconv.errors import InputError
from roomconv.study import load_study, parse_study, template_text
from tests.report.conftest import STUDY, write_study


def test_template_loads_as_it_stands(tmp_path):
    s = parse_study(template_text("Hall A"), tmp_path / "study.toml")
    assert s.title == "Hall A"
    assert [r.label for r in s.responses] == ["S1-R1", "S1-R2"]
    assert s.responses[0].file == tmp_path / "S1R1.wav"  # relative to the study file


def test_init_writes_the_template_and_refuses_to_clobber(tmp_path, cli):
    path = tmp_path / "study.toml"
    code, out, _ = cli("study", "init", path, "--title", "Hall B")
    assert code == 0
    assert load_study(path).title == "Hall B"
    before = path.read_bytes()
    code, _, err = cli("study", "init", path)
    assert code == 2
    assert "exists already" in err and path.read_bytes() == before


def test_dimensions_give_volume_and_surface(tmp_path):
    # Rectangular room 12 × 8 × 4 m: V = 384 m³, S = 2(96 + 48 + 32) = 352 m² (closed form).
    s = parse_study(STUDY, tmp_path / "s.toml")
    assert s.room.volume == pytest.approx(384.0)
    assert s.room.surface == pytest.approx(352.0)
    assert s.dates == ("2026-11-30", "2026-12-01")


@pytest.mark.parametrize(
    ("old", "new", "key"),
    [
        ("humidity_pct = 45", "humidity = 45", "room.humidity"),
        ("humidity_pct = 45", "humidity_pct = 130", "room.humidity_pct"),
        ("dimensions_m = [12.0, 8.0, 4.0]", "dimensions_m = [12.0, 8.0]", "room.dimensions_m"),
        ("dimensions_m = [12.0, 8.0, 4.0]", "volume_m3 = -3", "room.volume_m3"),
        ('state = "unoccupied"', 'state = "empty"', "room.state"),
        ('title = "Harbour Room acceptance test"', 'titel = "x"', "study.title"),
        ('dates = [2026-11-30, "2026-12-01"]', 'dates = ["30/11/2026"]', "study.dates"),
        ('receiver = "R2"', 'receiver = "R9"', "responses[2].receiver"),
        ('file = "irs/S1R3.wav"', 'file = "irs/S1R3.wav"\nchanel = 2', "responses[3].chanel"),
        ("f_low_hz = 20", "f_low_hz = 30000", "sweep.f_low_hz"),
        ("height_m = 1.5", 'height_m = "tall"', "sources[1].height_m"),
        ("tolerance_pct = [-10, 10]", "tolerance_pct = [10, -10]", "targets.tolerance_pct"),
        ('"250" = 0.9', '"low" = 0.9', "targets.reverberation_s"),
        ("[equipment]", '[equipment]\namplifier = "x"', "equipment.amplifier"),
        ("[sweep]", 'colour = "red"\n[sweep]', "equipment.colour"),
        ("[study]", "extra = 1\n[study]", "extra"),
        ('file = "irs/S1R1.wav"', 'file = "irs/missing.wav"', "responses[1].file"),
        ('file = "irs/S1R2.wav"', 'file = "irs/S1R2.wav"\nchannel = 3', "responses[2].channel"),
        ("[room]", "[room\n", "not valid TOML"),
    ],
)
def test_bad_study_is_exit_2_naming_the_key(tmp_path, cli, old, new, key):
    assert old in STUDY
    path = write_study(tmp_path, STUDY.replace(old, new, 1))
    code, out, err = cli("analyze", "--study", path, "--quiet")
    assert code == 2
    line = err.strip()
    assert "\n" not in line and "Traceback" not in line
    assert key in line and str(path) in line
    assert not (tmp_path / "report").exists()


def test_relative_paths_follow_the_study_file_not_the_working_folder(tmp_path, monkeypatch):
    path = write_study(tmp_path)
    elsewhere = tmp_path / "elsewhere"
    elsewhere.mkdir()
    monkeypatch.chdir(elsewhere)
    s = load_study(os.path.relpath(path, elsewhere))
    assert all(r.file.is_file() for r in s.responses)


def test_missing_study_file_is_refused(tmp_path):
    with pytest.raises(InputError, match="study file not found"):
        load_study(tmp_path / "nope.toml")


def test_check_finds_the_responses_and_refuses_missing_ones(tmp_path, cli):
    path = write_study(tmp_path)
    code, out, _ = cli("study", "check", path)
    assert code == 0 and "3 response(s)" in out
    (tmp_path / "irs" / "S1R2.wav").unlink()
    code, _, err = cli("study", "check", path)
    assert code == 2 and "irs/S1R2.wav" in err


def test_init_wants_a_toml_name(tmp_path, cli):
    code, _, err = cli("study", "init", tmp_path / "study.txt")
    assert code == 2 and ".toml" in err and not (tmp_path / "study.txt").exists()
