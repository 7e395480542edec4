"""A hostile corpus of our own: every command × absurd or non-finite option values.

Each case must end with exit code 2 and one line on stderr that names the option, before
any work: no file appears in the folder. The values are chosen by kind (NaN, ±inf, zero,
negative, far too large, not a number), not from any outside table; the expected sizes in
the budget messages are plain arithmetic (samples × channels × 8 bytes, 1 GiB = 2^30 bytes).
"""

from __future__ import annotations

import os
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest
import soundfile as sf

FS = 48000
ROOT = Path(__file__).resolve().parents[2]

CORPUS = [
    # sweep
    ("sweep", ["--duration", "nan"], "--duration"),
    ("sweep", ["--silence", "inf"], "--silence"),
    ("sweep", ["--level", "-inf"], "--level"),
    ("sweep", ["--level", "5"], "--level"),
    ("sweep", ["--rate", "0"], "--rate"),
    ("sweep", ["--rate", "1"], "--rate"),
    ("sweep", ["--rate", "fast"], "--rate"),
    ("sweep", ["--fade-in", "-1"], "--fade-in"),
    ("sweep", ["--fade-out", "nan"], "--fade-out"),
    ("sweep", ["--pre", "-0.5"], "--pre"),
    ("sweep", ["--repeat", "0"], "--repeat"),
    ("sweep", ["--repeat", "2.5"], "--repeat"),
    ("sweep", ["--low", "0"], "--low"),
    ("sweep", ["--high", "inf"], "--high"),
    ("sweep", ["--silence", "1e9"], "--silence"),
    ("sweep", ["--duration", "1e5"], "--duration"),
    ("sweep", ["--silence", "1e308"], "--silence"),
    # measure (with --simulate, so no sound card is ever touched)
    ("measure", ["--sim-latency", "1e10"], "--sim-latency"),
    ("measure", ["--sim-latency", "-3"], "--sim-latency"),
    ("measure", ["--sim-latency", "1e308"], "--sim-latency"),
    ("measure", ["--sim-noise", "nan"], "--sim-noise"),
    ("measure", ["--output-channel", "0"], "--output-channel"),
    ("measure", ["--input-channels", "a,b"], "--input-channels"),
    ("measure", ["--input-channels", "1,,2"], "--input-channels"),
    ("measure", ["--reference-channel", "-1"], "--reference-channel"),
    ("measure", ["--reference-channel", "5"], "--reference-channel"),
    ("measure", ["--length", "1e6"], "--length"),
    ("measure", ["--seed", "-1"], "--seed"),
    ("measure", ["--duration", "nan"], "--duration"),
    # extract
    ("extract", ["--length", "nan"], "--length"),
    ("extract", ["--length", "1e6"], "--length"),
    ("extract", ["--reference-channel", "x"], "--reference-channel"),
    # synth
    ("synth", ["--room", "-5x4x3"], "--room"),
    ("synth", ["--room", "1e6x1e6x1e6"], "--room"),
    ("synth", ["--room", "nanx4x3"], "--room"),
    ("synth", ["--room", "1e-300x1x1"], "--room"),
    ("synth", ["--length", "1e6"], "--length"),
    ("synth", ["--length", "-1"], "--length"),
    ("synth", ["--length", "1e308"], "--length"),
    ("synth", ["--rate", "0"], "--rate"),
    ("synth", ["--temperature", "1e3"], "--temperature"),
    ("synth", ["--humidity", "0"], "--humidity"),
    ("synth", ["--peak", "10"], "--peak"),
    ("synth", ["--source", "nan,1,1"], "--source"),
    ("synth", ["--rt60", "500:nan"], "--rt60"),
    ("synth", ["--patch", "floor:carpet:inf"], "--patch"),
    ("synth", ["--absorber", "carpet:-3"], "--absorber"),
    ("synth", ["--stereo", "spaced:1e9"], "--stereo"),
    ("synth", ["--seed", "1.5"], "--seed"),
    # edit
    ("edit", ["--trim-db", "10"], "--trim-db"),
    ("edit", ["--early-late", "1e6"], "--early-late"),
    ("edit", ["--fade-in", "-1"], "--fade-in"),
    ("edit", ["--fade-out", "inf"], "--fade-out"),
    ("edit", ["--normalize", "nan"], "--normalize"),
    ("edit", ["--rate", "1"], "--rate"),
    ("edit", ["--decay-scale", "0"], "--decay-scale"),
    ("edit", ["--decay-scale", "500:inf"], "--decay-scale"),
    ("edit", ["--decay-scale", "1e-300"], "--decay-scale"),
    ("edit", ["--decay-scale", "1500:2"], "--decay-scale"),
    # render
    ("render", ["--gain", "20000"], "--gain"),
    ("render", ["--gain", "nan"], "--gain"),
    ("render", ["--gain", "1000"], "--gain"),
    ("render", ["--mix", "1.5"], "--mix"),
    ("render", ["--mix", "nan"], "--mix"),
    ("render", ["--predelay", "1e9"], "--predelay"),
    ("render", ["--predelay", "-1"], "--predelay"),
    ("render", ["--predelay", "1e308"], "--predelay"),
    ("render", ["--mix", ""], "--mix"),
    ("render", ["--normalize", "peak", "--target", "nan"], "--target"),
    ("render", ["--target", "inf"], "--target"),
    ("render", ["--normalize", "loudness", "--target", "-90"], "--target"),
    ("render", ["--normalize", "none", "--target", "-20"], "--target"),
    ("render", ["--outputs", "0"], "--outputs"),
    # batch
    ("batch", ["--workers", "0"], "--workers"),
    ("batch", ["--workers", "1e9"], "--workers"),
    ("batch", ["--gain", "nan"], "--gain"),
    ("batch", ["--predelay", "1e9"], "--predelay"),
    # live (all refused before sounddevice is loaded)
    ("live", ["--block", "16"], "--block"),
    ("live", ["--block", "nan"], "--block"),
    ("live", ["--rate", "0"], "--rate"),
    ("live", ["--gain", "nan"], "--gain"),
    ("live", ["--ceiling", "0"], "--ceiling"),
    ("live", ["--duration", "-1"], "--duration"),
    ("live", ["--duration", "inf"], "--duration"),
    ("live", ["--input-channels", "a,b"], "--input-channels"),
    ("live", ["--output-channels", "0"], "--output-channels"),
    ("live", ["--mix", "-0.1"], "--mix"),
    # plan (refused before the analysis document is read)
    ("plan", ["--volume", "nan"], "--volume"),
    ("plan", ["--volume", "-1"], "--volume"),
    ("plan", ["--volume", "1e308"], "--volume"),
    ("plan", ["--area", "0"], "--area"),
    ("plan", ["--target", "nan"], "--target"),
    ("plan", ["--target", "din18041:A9"], "--target"),
    ("plan", ["--target", "500:-1"], "--target"),
    ("plan", ["--tolerance", "x"], "--tolerance"),
    ("plan", ["--temperature", "1e3"], "--temperature"),
    ("plan", ["--humidity", "0"], "--humidity"),
    ("plan", ["--treat", "ceiling=unobtainium"], "--treat"),
]


@pytest.fixture
def work(tmp_path):
    rng = np.random.default_rng(7)
    sf.write(tmp_path / "dry.wav", 0.1 * rng.standard_normal(FS // 2), FS, subtype="FLOAT")
    h = np.zeros(FS // 10)
    h[0], h[100] = 1.0, 0.3
    sf.write(tmp_path / "ir.wav", h, FS, subtype="FLOAT")
    return tmp_path


def _base(cmd: str, d: Path) -> list:
    return {
        "sweep": ["sweep", d / "out.wav"],
        "measure": ["measure", d / "out.wav", "--simulate", d / "ir.wav"],
        "extract": ["extract", d / "dry.wav", "--sweep", d / "ir.wav", "-o", d / "out.wav"],
        "synth": ["synth", d / "out.wav", "--room", "6x5x3"],
        "edit": ["edit", d / "ir.wav", "-o", d / "out.wav"],
        "render": ["render", d / "dry.wav", "--ir", d / "ir.wav", "-o", d / "out.wav"],
        "batch": ["batch", d / "dry.wav", "--ir", d / "ir.wav", "--out-dir", d / "outdir"],
        "live": ["live", "--ir", d / "ir.wav", "--yes"],
        "plan": ["plan", "--results", d / "ir.wav", "--volume", "200", "--area", "210"]
        + ["--target", "0.6"],
    }[cmd]


@pytest.mark.parametrize("cmd, bad, option", CORPUS, ids=[f"{c}{''.join(b)}" for c, b, _ in CORPUS])
def test_bad_value_is_a_one_line_refusal_naming_the_option(work, cli, cmd, bad, option):
    before = sorted(os.listdir(work))
    args = _base(cmd, work)
    if cmd == "synth" and bad[0] == "--room":
        args = args[:2]
    code, out, err = cli(*args, *bad)
    assert code == 2, (out, err)
    lines = err.strip().splitlines()
    assert len(lines) == 1, err
    assert option in lines[0], err
    assert "Traceback" not in err and "internal error" not in err
    assert sorted(os.listdir(work)) == before  # nothing written, not even a folder


def test_budget_message_gives_the_size(work, cli):
    # 1e9 ms = 1e6 s at 48 kHz, one channel of float64: 1e6·48000·8 B = 357.6 GiB.
    code, _, err = cli(*_base("render", work), "--predelay", "1e9")
    assert code == 2 and "358 GiB" in err and "--predelay" in err


def test_negative_looking_values_reach_the_check(work, cli):
    # argparse alone reads '-5x4x3' as an unknown option ("expected one argument").
    code, _, err = cli("synth", work / "out.wav", "--room", "-5x4x3")
    assert code == 2 and "room dimensions must be positive" in err
    assert "expected one argument" not in err
    # A negative value that is valid still parses as a value.
    code, _, err = cli("edit", work / "ir.wav", "-o", work / "e.wav", "--trim-db", "-40")
    assert code == 0, err


def test_debug_and_quiet_before_or_after_the_command(work, cli):
    missing = work / "missing.wav"
    for args in (["--debug", "render", missing], ["render", missing, "--debug"]):
        code, _, err = cli(*args, "--ir", work / "ir.wav", "-o", work / "o.wav")
        assert code == 2 and "Traceback" in err, err
    code, _, err = cli("render", missing, "--ir", work / "ir.wav", "-o", work / "o.wav")
    assert code == 2 and "Traceback" not in err
    code, out, _ = cli("--quiet", "sweep", work / "s.wav", "--duration", "0.5")
    assert code == 0 and out == ""
    code, out, _ = cli("sweep", work / "s2.wav", "--duration", "0.5")
    assert code == 0 and "wrote" in out


def _run(args, **kw):
    env = {**os.environ, "PYTHONPATH": str(ROOT)}
    env.update(kw.pop("env", {}))
    return subprocess.run(
        [sys.executable, *args],
        capture_output=True,
        text=True,
        env=env,
        check=False,
        timeout=60,
        cwd=ROOT,
        **kw,
    )


@pytest.mark.parametrize("how", ["devnull", "dumb"])
def test_tui_without_a_terminal_exits_with_a_message(how):
    if how == "devnull":
        r = _run(["-m", "roomconv", "tui"], stdin=subprocess.DEVNULL)
    else:
        r = _run(["-m", "roomconv", "tui"], stdin=subprocess.DEVNULL, env={"TERM": "dumb"})
    assert r.returncode == 2
    assert "terminal" in r.stderr and "Traceback" not in r.stderr


def test_tui_entry_refuses_unknown_options():
    r = _run(["-m", "tui.app", "--bogus"], stdin=subprocess.DEVNULL)
    assert r.returncode == 2 and "--bogus" in r.stderr
    assert len(r.stderr.strip().splitlines()) == 1
