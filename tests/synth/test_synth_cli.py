"""`roomconv synth` as a user runs it: the table it prints is what `roomconv analyze` reads,
partial --rt60 is completed by interpolation, and impossible geometry is refused."""

import json
import re

import numpy as np
import pytest


def _printed_tail(out: str) -> dict:
    """{band: (tail s, origin)} from the table `synth` prints."""
    rows = {}
    for line in out.splitlines():
        m = re.match(r"\s*(\d+)\s+[\d.]+\s+[\d.]+\s+([\d.]+)\s+(\w+)", line)
        if m:
            rows[int(m.group(1))] = (float(m.group(2)), m.group(3))
    return rows


def _printed_reading(out: str) -> dict:
    """{band: T30 the analysis is expected to read} from the table `synth` prints."""
    rows = {}
    for line in out.splitlines():
        m = re.match(r"\s*(\d+)\s+[\d.]+\s+[\d.]+\s+[\d.]+\s+\w+\s+([\d.]+)", line)
        if m:
            rows[int(m.group(1))] = float(m.group(2))
    return rows


def test_steep_room_prints_what_analyze_reads(tmp_path, cli):
    # The room of the report that prompted this: carpet and acoustic tile over plaster walls,
    # whose Eyring T falls about threefold per octave from 125 to 500 Hz. The table's last
    # column must be what `analyze` reads: within 5 % at 125 Hz–4 kHz and 8 % at 63 Hz and
    # 8 kHz (the ISO 3382-1 JND of 5 %, Annex A, from memory; wider in the outer octaves).
    # Three seeds are averaged as three positions: at 500 Hz the slow part of the decay is
    # a leak from a narrow stretch of spectrum, and one realization scatters by about ±5 %
    # (ISO 3382-2:2008, 6.2: the uncertainty grows as 1/sqrt(B·T) for a narrow B).
    files, tables, readings = [], [], []
    for seed in (0, 1, 2):
        ir = tmp_path / f"A{seed}.wav"
        code, out, err = cli(
            "synth",
            ir,
            "--room",
            "8x6x3",
            "--materials",
            "floor=carpet,ceiling=acoustic-tile,walls=plaster",
            "--seed",
            seed,
        )
        assert code == 0, err
        files.append(ir)
        tables.append(_printed_tail(out))
        readings.append(_printed_reading(out))
    assert tables[0] == tables[1] == tables[2] and readings[0] == readings[1] == readings[2]
    table, reading = tables[0], readings[0]
    assert sorted(reading) == [63, 125, 250, 500, 1000, 2000, 4000, 8000]
    # The bands the filter cannot read as asked are named, with the neighbour that leaks.
    notes = [line for line in out.splitlines() if "analyze will read" in line]
    assert [n.split()[1] for n in notes] == ["250", "500"]
    assert "125 Hz band's slower decay" in notes[0] and "250 Hz band's slower decay" in notes[1]
    for b in (250, 500):
        assert reading[b] > 1.2 * table[b][0]
    for b in (63, 125, 1000, 2000, 4000, 8000):
        assert reading[b] == pytest.approx(table[b][0], abs=0.011)
    # The provenance keeps both numbers: the T asked for and the reading expected.
    prov = json.loads((tmp_path / "A0.provenance.json").read_text())["settings"]
    assert prov["tail_rt_s"]["250"] == pytest.approx(table[250][0], abs=0.005)
    assert prov["expected_octave_reading_s"]["250"] == pytest.approx(reading[250], abs=0.005)
    assert any("analyze will read" in n for n in prov["notes"])
    js = tmp_path / "a.json"
    code, _, err = cli("analyze", *files, "--json", js, "--quiet")
    assert code == 0, err
    doc = json.loads(js.read_text())
    avg = {int(r["band_hz"]): r["t30_s"]["mean"] for r in doc["average"]["bands"]}
    for band, expected in reading.items():
        tol = 0.08 if band in (63, 8000) else 0.05
        assert avg[band] == pytest.approx(expected, rel=tol), band


def test_partial_rt60_end_to_end_through_analyze(tmp_path, cli):
    # Two stereo-spaced channels are two positions (own tail noise each), averaged by
    # `analyze`; T30 within 5 % at 125 Hz–4 kHz and 8 % at 63 Hz and 8 kHz of what `synth`
    # printed (the ISO 3382-1 JND of 5 %, Annex A, from memory; wider in the outer octaves
    # where ISO 3382-2's statistical uncertainty per position is larger).
    ir = tmp_path / "partial.wav"
    code, out, err = cli(
        "synth",
        ir,
        "--room",
        "12x9x5",
        "--stereo",
        "spaced:2",
        "--rt60",
        "250:1.5,500:1.4,1000:1.3,2000:1.15,4000:0.95",
    )
    assert code == 0, err
    table = _printed_tail(out)
    assert [b for b, (_, o) in table.items() if o == "given"] == [250, 500, 1000, 2000, 4000]
    assert table[63] == (1.5, "held") and table[125] == (1.5, "held")
    assert table[8000] == (0.95, "held")
    assert "analyze will read" not in out
    js = tmp_path / "a.json"
    code, _, err = cli("analyze", ir, "--json", js, "--quiet")
    assert code == 0, err
    doc = json.loads(js.read_text())
    avg = {int(r["band_hz"]): r["t30_s"]["mean"] for r in doc["average"]["bands"]}
    for band, (used, _) in table.items():
        tol = 0.08 if band in (63, 8000) else 0.05
        assert avg[band] == pytest.approx(used, rel=tol), band


def test_interpolated_band_is_printed_as_used(tmp_path, cli):
    # log T linear in log f: 500 Hz half-way (in octaves) between 250 and 1000 Hz gets the
    # geometric mean of their values (closed form).
    code, out, err = cli(
        "synth",
        tmp_path / "i.wav",
        "--room",
        "10x8x4",
        "--length",
        "0.5",
        "--rt60",
        "250:2.0,1000:0.5",
    )
    assert code == 0, err
    table = _printed_tail(out)
    assert table[500] == (pytest.approx(np.sqrt(2.0 * 0.5), abs=0.005), "interpolated")
    prov = json.loads((tmp_path / "i.provenance.json").read_text())
    assert prov["settings"]["tail_rt_origin"]["500"] == "interpolated"


def test_coinciding_source_and_receiver_refused_in_one_line(tmp_path, cli):
    out_wav = tmp_path / "x.wav"
    code, _, err = cli(
        "synth", out_wav, "--room", "8x6x3", "--source", "2,2,1.5", "--receiver", "2,2,1.5"
    )
    assert code == 2 and "apart" in err and "--source" in err
    assert len(err.strip().splitlines()) == 1 and "Traceback" not in err
    assert not out_wav.exists()


def test_small_room_says_which_mixing_time_it_used(tmp_path, cli):
    code, out, err = cli("synth", tmp_path / "s.wav", "--room", "4x3x2.5", "--length", "0.3")
    assert code == 0, err
    assert "20·V/S + 12 ms" in out
