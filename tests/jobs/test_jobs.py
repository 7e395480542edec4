"""The job layer called directly, as the TUI and the demo call it: naming, progress,
1-based channels, the hearing-caution gate, no clobbering, cancellation, and library
messages that name values rather than command-line options."""

from __future__ import annotations

import ast
import json
import re
from pathlib import Path

import numpy as np
import pytest
import soundfile as sf
from scipy.signal import fftconvolve

from roomconv.errors import InputError, OutputExistsError
from roomconv.jobs import (
    Cancelled,
    extract_recording,
    measure_position,
    render_many,
    render_one,
    render_output_name,
    write_sweep,
)
from roomconv.measure.sweep import Sweep
from roomconv.render.offline import RenderSettings

from ..conftest import band_limited_room, rel_error_db

FS = 48000
ROOT = Path(__file__).resolve().parents[2]


def _noise(path, seconds, seed, rate=FS, decay=None):
    rng = np.random.default_rng(seed)
    x = 0.1 * rng.standard_normal(int(seconds * rate))
    if decay is not None:
        x *= np.exp(-decay * np.arange(x.size) / rate)
    sf.write(path, x, rate, subtype="DOUBLE")
    return x


def test_render_one_writes_the_convolution_and_its_provenance(tmp_path):
    d = _noise(tmp_path / "dry.wav", 0.3, 1)
    h = _noise(tmp_path / "ir.wav", 0.05, 2, decay=60.0)
    calls = []
    s = RenderSettings(subtype="DOUBLE", match_ir_level=False)
    rep = render_one(
        tmp_path / "dry.wav",
        tmp_path / "ir.wav",
        tmp_path / "wet.wav",
        s,
        progress=lambda st, f, m=None: calls.append((st, f)),
    )
    y, _ = sf.read(tmp_path / "wet.wav")
    # Reference: scipy.signal.fftconvolve (direct FFT convolution).
    assert rel_error_db(y, fftconvolve(d, h)) < -120
    assert rep.frames == d.size + h.size - 1
    prov = json.loads((tmp_path / "wet.provenance.json").read_text())
    assert [Path(i["file"]).name for i in prov["inputs"]] == ["dry.wav", "ir.wav"]
    assert prov["output"]["frames"] == rep.frames
    assert calls and all(0.0 <= f <= 1.0 for _, f in calls) and calls[-1][1] == 1.0


def test_render_one_never_replaces_without_force_and_never_an_input(tmp_path):
    _noise(tmp_path / "dry.wav", 0.1, 1)
    _noise(tmp_path / "ir.wav", 0.02, 2)
    (tmp_path / "wet.wav").write_bytes(b"keep")
    with pytest.raises(OutputExistsError) as err:
        render_one(
            tmp_path / "dry.wav", tmp_path / "ir.wav", tmp_path / "wet.wav", RenderSettings()
        )
    assert "--" not in str(err.value)  # the library names no command-line option
    assert (tmp_path / "wet.wav").read_bytes() == b"keep"
    with pytest.raises(InputError, match="input"):
        render_one(
            tmp_path / "dry.wav",
            tmp_path / "ir.wav",
            tmp_path / "dry.wav",
            RenderSettings(),
            force=True,
        )


def test_render_many_names_outputs_and_a_cancel_leaves_no_partial_file(tmp_path):
    for k in range(3):
        _noise(tmp_path / f"take{k}.wav", 0.5, k)
    _noise(tmp_path / "hall.wav", 0.05, 9)
    drys = [tmp_path / f"take{k}.wav" for k in range(3)]
    seen = []

    def stop_in_the_second(stage, frac, message=None):
        seen.append(stage)
        if stage.startswith("2/") and frac > 0:
            raise Cancelled()

    res = render_many(
        drys, tmp_path / "hall.wav", tmp_path / "wet", RenderSettings(), progress=stop_in_the_second
    )
    assert res.cancelled and len(res.reports) == 1
    assert render_output_name(drys[0], tmp_path / "hall.wav") == "take0__hall.wav"
    names = sorted(p.name for p in (tmp_path / "wet").iterdir())
    assert names == ["take0__hall.provenance.json", "take0__hall.wav"]
    assert seen[0].startswith("1/3 take0__hall.wav")


def test_measure_refuses_sound_without_the_caution_being_confirmed(tmp_path):
    sweep = Sweep(rate=FS, duration=1.0, level_dbfs=-20.0, silence_post=0.5)
    with pytest.raises(InputError, match="caution"):
        measure_position(tmp_path / "ir.wav", sweep)
    assert not (tmp_path / "ir.wav").exists()


def test_a_simulated_room_is_measured_at_its_own_rate_when_asked(tmp_path):
    # A 44.1 kHz room: refused at another rate unless the job may follow the room.
    rate = 44100
    room = band_limited_room(rate, rt=0.2, length_s=0.4) * 0.2
    sf.write(tmp_path / "room.wav", room, rate, subtype="FLOAT")
    sweep = Sweep(rate=FS, f_low=10, f_high=20000, duration=2.0, silence_post=1.0, level_dbfs=-20.0)
    with pytest.raises(InputError, match="44100 Hz"):
        measure_position(tmp_path / "a.wav", sweep, simulate=tmp_path / "room.wav")
    res = measure_position(
        tmp_path / "b.wav",
        sweep,
        simulate=tmp_path / "room.wav",
        match_simulated_rate=True,
        reference_channel=2,
        sim_latency_samples=300,
        sim_noise_dbfs=-140,
    )
    ir, got_rate = sf.read(tmp_path / "b.wav")
    assert got_rate == rate
    # Ideal deconvolution returns the room itself (the loopback removes the latency).
    assert rel_error_db(ir[: room.size], room) < -60
    assert res.quality["reference_latency_samples"] == 300


def test_reference_channels_count_from_one(tmp_path):
    s = Sweep(rate=FS, f_low=20, f_high=20000, duration=1.0, silence_post=0.5, level_dbfs=-20.0)
    write_sweep(tmp_path / "sweep.wav", s)
    played, _ = sf.read(tmp_path / "sweep.wav")
    sf.write(tmp_path / "rec.wav", np.stack([0.5 * played, played], axis=1), FS, subtype="FLOAT")
    with pytest.raises(InputError, match="reference channel 3 does not exist.*1 to 2"):
        extract_recording(
            tmp_path / "rec.wav", tmp_path / "sweep.wav", tmp_path / "x.wav", reference_channel=3
        )
    res = extract_recording(
        tmp_path / "rec.wav", tmp_path / "sweep.wav", tmp_path / "y.wav", reference_channel=2
    )
    extract_recording(
        tmp_path / "rec.wav", tmp_path / "sweep.wav", tmp_path / "z.wav", reference_channel=1
    )
    y, _ = sf.read(tmp_path / "y.wav")
    z, _ = sf.read(tmp_path / "z.wav")
    # Channel 1 is 0.5 × channel 2. Divided by channel 2 the response is 0.5·δ, divided by
    # channel 1 it is 2·δ, each within the same band: energies in the ratio (0.5/2)² = 1/16
    # (closed form), which holds only if "2" and "1" picked the channels a person means.
    assert res.extraction.ir.shape[1] == 1
    assert np.sum(y**2) / np.sum(z**2) == pytest.approx(1 / 16, rel=1e-3)


_FLAG = re.compile(r"(?<![\w-])--[a-z][a-z-]+")


def _raised_texts(path: Path):
    """String pieces of every ``raise SomeError(...)`` in a module."""
    tree = ast.parse(path.read_text())
    for node in ast.walk(tree):
        if isinstance(node, ast.Raise) and isinstance(node.exc, ast.Call):
            for sub in ast.walk(node.exc):
                if isinstance(sub, ast.Constant) and isinstance(sub.value, str):
                    yield node.lineno, sub.value


def test_library_and_job_messages_name_no_command_line_option():
    offenders = []
    for pkg in ("measure", "analysis", "synth", "render", "jobs", "demo"):
        for path in (ROOT / "roomconv" / pkg).rglob("*.py"):
            offenders += [
                f"{path.name}:{line}: {text}"
                for line, text in _raised_texts(path)
                if _FLAG.search(text)
            ]
    for name in ("audio.py", "safety.py", "validate.py", "signal.py", "errors.py"):
        path = ROOT / "roomconv" / name
        offenders += [
            f"{name}:{line}: {text}" for line, text in _raised_texts(path) if _FLAG.search(text)
        ]
    assert offenders == []


def test_the_flag_pattern_finds_a_flag_and_not_a_range():
    assert _FLAG.search("lower --gain")
    assert not _FLAG.search("from -20 to 0 dB") and not _FLAG.search("a — b")
