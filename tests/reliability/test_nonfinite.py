"""Never write, never play non-finite audio.

References used by the checks: IEEE 754 semantics as implemented by numpy (NaN compares
false, ``np.clip`` and ``max`` let NaN through, which is why the guards are needed); the
definition of dBFS (full scale = 1.0, so −1 dBFS is a peak of 10^(−1/20) ≈ 0.891; AES17,
from memory);
``numpy.finfo(float32).max`` for what a 32-bit float file can hold.
"""

from __future__ import annotations

import math
import os

import numpy as np
import pytest
import soundfile as sf

from roomconv import safety
from roomconv.errors import InputError
from roomconv.render.offline import RenderSettings
from roomconv.render.stream import LiveProcessor

FS = 48000
CAP = 10 ** (safety.OUTPUT_CAP_DBFS / 20)


@pytest.fixture
def files(tmp_path):
    rng = np.random.default_rng(11)
    sf.write(tmp_path / "dry.wav", 0.1 * rng.standard_normal((FS // 4, 1)), FS, subtype="FLOAT")
    h = np.zeros(200)
    h[0] = 1.0
    sf.write(tmp_path / "ir.wav", h, FS, subtype="FLOAT")
    return tmp_path


@pytest.mark.parametrize(
    "args",
    [
        ["--gain", "nan"],
        ["--gain", "1000"],
        ["--normalize", "peak", "--target", "nan"],
        ["--normalize", "loudness", "--target", "-inf"],
        ["--mix", "nan"],
    ],
)
def test_non_finite_or_overflowing_settings_write_nothing(files, cli, args):
    code, _, err = cli(
        "render", files / "dry.wav", "--ir", files / "ir.wav", "-o", files / "wet.wav", *args
    )
    assert code == 2, err
    assert sorted(os.listdir(files)) == ["dry.wav", "ir.wav"]


def test_library_settings_refuse_non_finite_values():
    for kw in (
        {"gain_db": math.nan},
        {"mix": math.inf},
        {"predelay_ms": -math.inf},
        {"normalize": "peak", "target": math.nan},
    ):
        with pytest.raises(InputError):
            RenderSettings(**kw).check()


def test_render_that_would_overflow_a_float_file_is_refused(tmp_path, cli):
    # float32 holds at most finfo(float32).max ≈ 3.4e38: a loud float input with +60 dB of
    # gain would become +inf in the output file.
    big = np.full((1000, 1), 1e36)
    sf.write(tmp_path / "loud.wav", big, FS, subtype="FLOAT")
    sf.write(tmp_path / "one.wav", np.array([1.0]), FS, subtype="FLOAT")
    assert float(np.finfo(np.float32).max) < 1e36 * 10.0 ** (60 / 20)
    for precision in ("float64", "float32"):  # overflow after the engine, or inside it
        code, _, err = cli(
            "render",
            tmp_path / "loud.wav",
            "--ir",
            tmp_path / "one.wav",
            "-o",
            tmp_path / "o.wav",
            "--gain",
            "60",
            "--precision",
            precision,
        )
        assert code == 2 and "o.wav" in err and "nothing written" in err, err
        assert len(err.strip().splitlines()) == 1, err
        assert sorted(os.listdir(tmp_path)) == ["loud.wav", "one.wav"]


def test_live_processor_checks_its_numbers_before_any_stream():
    ir = np.zeros(64)
    ir[0] = 1.0
    for kw in (
        {"gain_db": math.nan},
        {"mix": math.nan},
        {"ceiling_dbfs": 0.0},
        {"gain_db": math.inf},
    ):
        with pytest.raises(InputError):
            LiveProcessor(ir, FS, block=128, **kw)
    bad = ir.copy()
    bad[5] = np.nan
    with pytest.raises(InputError, match="NaN"):
        LiveProcessor(bad, FS, block=128)
    with pytest.raises(InputError, match="silent"):
        LiveProcessor(np.zeros(64), FS, block=128)


def test_live_output_never_carries_nan_or_exceeds_the_cap():
    ir = np.zeros(300)
    ir[0], ir[150] = 1.0, 0.5
    proc = LiveProcessor(ir, FS, block=128, gain_db=20.0, fade_in_s=0.0)
    rng = np.random.default_rng(2)
    outs = []
    for k in range(40):
        x = rng.standard_normal((128, 1))
        if k == 10:
            x[3, 0] = np.nan
        if k == 11:
            x[7, 0] = np.inf
        outs.append(proc.process(x))
    y = np.concatenate(outs)
    assert np.all(np.isfinite(y))
    assert np.max(np.abs(y)) <= CAP + 1e-12
    assert proc.stats.nonfinite == 2
    # The engine's history stays clean: blocks after the bad ones are not silenced.
    assert np.max(np.abs(outs[-1])) > 0.1


def test_limiter_and_hard_cap_do_not_pass_nan():
    # np.clip(nan) is nan, and max(0.0, nan) is 0.0: both would hide or pass NaN.
    assert np.isnan(np.clip(np.nan, -1, 1))
    capped = safety.hard_cap(np.array([np.nan, np.inf, -np.inf, 0.5, 2.0]))
    assert np.all(np.isfinite(capped)) and np.max(np.abs(capped)) <= CAP + 1e-15
    assert capped[0] == 0.0 and capped[3] == 0.5
    lim = safety.OutputLimiter(FS)
    block = np.full((256, 2), 0.5)
    block[10, 1] = np.nan
    out = lim.process(block)
    assert np.all(np.isfinite(out)) and lim.nonfinite == 1
    # The gain state is not poisoned: a clean block below the ceiling passes unchanged.
    clean = np.full((256, 2), 0.25)
    assert np.array_equal(lim.process(clean), clean)
