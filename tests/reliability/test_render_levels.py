"""Renders do what they say: loudness normalization lands on its target, ``--target`` alone
is not ignored, and ``--mix`` means the same balance whatever the response file's level.

Outside references: pyloudnorm's public API (``pyloudnorm.Meter(rate).integrated_loudness``,
an independent implementation of ITU-R BS.1770-4) for loudness; scipy.signal.fftconvolve for
the convolution; Parseval's theorem for the level matching (white noise of power σ² through
a filter h leaves with power σ²·Σh²), which makes wet and dry equally loud once Σh² = 1, so
the balance of mix·wet + (1 − mix)·dry is 20·log10(mix / (1 − mix)) dB.
"""

from __future__ import annotations

import math
import re

import numpy as np
import pytest
import soundfile as sf
from scipy.signal import fftconvolve

pyloudnorm = pytest.importorskip("pyloudnorm")

FS = 48000


def _ramp_noise(seconds: float, start_db: float, end_db: float, seed: int = 1) -> np.ndarray:
    """Stereo noise whose level falls linearly in dB: it spends time at every level, so the
    −70 LUFS absolute gate admits different blocks at different gains."""
    rng = np.random.default_rng(seed)
    n = int(seconds * FS)
    t = np.arange(n) / n
    return rng.standard_normal((n, 2)) * 10 ** ((start_db + (end_db - start_db) * t) / 20)[:, None]


def test_loudness_normalization_hits_its_target(tmp_path, cli):
    dry = _ramp_noise(8.0, -20.0, -80.0)
    target = -40.0
    meter = pyloudnorm.Meter(FS)
    # Precondition: a one-step gain (target − measured) misses by more than 0.05 LU on this
    # signal, per pyloudnorm, because the gate is not scale-invariant.
    l0 = meter.integrated_loudness(dry)
    one_step = meter.integrated_loudness(dry * 10 ** ((target - l0) / 20))
    assert abs(one_step - target) > 0.05
    sf.write(tmp_path / "dry.wav", dry, FS, subtype="FLOAT")
    sf.write(tmp_path / "unit.wav", np.array([1.0]), FS, subtype="FLOAT")
    code, out, err = cli(
        "render",
        tmp_path / "dry.wav",
        "--ir",
        tmp_path / "unit.wav",
        "-o",
        tmp_path / "wet.wav",
        "--normalize",
        "loudness",
        "--target",
        target,
    )
    assert code == 0, err
    y, _ = sf.read(tmp_path / "wet.wav")
    measured = meter.integrated_loudness(y)
    assert measured == pytest.approx(target, abs=0.05)
    # The printed value is our own BS.1770-4 meter's (published 48 kHz K-weighting); it agrees
    # with pyloudnorm's (which designs its filters itself) within the 0.05 LU.
    printed = float(re.search(r"loudness (-?\d+\.\d+) LUFS", out).group(1))
    assert printed == pytest.approx(measured, abs=0.05)


def test_target_without_normalize_implies_loudness(tmp_path, cli):
    rng = np.random.default_rng(4)
    sf.write(tmp_path / "dry.wav", 0.05 * rng.standard_normal((3 * FS, 1)), FS, subtype="FLOAT")
    sf.write(tmp_path / "unit.wav", np.array([1.0]), FS, subtype="FLOAT")
    code, _, err = cli(
        "render",
        tmp_path / "dry.wav",
        "--ir",
        tmp_path / "unit.wav",
        "-o",
        tmp_path / "wet.wav",
        "--target",
        -30,
    )
    assert code == 0, err
    assert "without --normalize" in err and "loudness" in err
    y, _ = sf.read(tmp_path / "wet.wav")
    assert pyloudnorm.Meter(FS).integrated_loudness(y) == pytest.approx(-30.0, abs=0.05)


@pytest.fixture
def quiet_room(tmp_path):
    """Dry white noise and a response file 19 dB below unit energy, as a measured one may be."""
    rng = np.random.default_rng(9)
    dry = 0.1 * rng.standard_normal(2 * FS)
    n = int(0.3 * FS)
    h = rng.standard_normal(n) * np.exp(-6.9 * np.arange(n) / n)
    h *= math.sqrt(10 ** (-1.9) / np.sum(h**2))
    sf.write(tmp_path / "dry.wav", dry, FS, subtype="DOUBLE")
    sf.write(tmp_path / "room.wav", h, FS, subtype="DOUBLE")
    return tmp_path, dry, h


def test_mix_is_defined_on_level_matched_wet_and_dry(quiet_room, cli):
    tmp, dry, h = quiet_room
    mix = 0.3
    code, out, err = cli(
        "render",
        tmp / "dry.wav",
        "--ir",
        tmp / "room.wav",
        "-o",
        tmp / "m.wav",
        "--mix",
        mix,
        "--subtype",
        "DOUBLE",
    )
    assert code == 0, err
    y, _ = sf.read(tmp / "m.wav")
    wet = fftconvolve(dry, h / math.sqrt(np.sum(h**2)))  # unit energy: Σh² = 1
    expected = mix * wet + (1 - mix) * np.pad(dry, (0, wet.size - dry.size))
    assert np.max(np.abs(y - expected)) < 1e-9
    # Parseval: with Σh² = 1 the wet part carries the dry part's power (white input).
    wet_db = 10 * math.log10(np.sum(wet**2) / np.sum(dry**2))
    assert abs(wet_db) < 0.3
    assert f"wet/dry balance {20 * math.log10(mix / (1 - mix)):+.1f} dB" in out


def test_keep_ir_level_shows_the_files_own_balance(quiet_room, cli):
    tmp, dry, h = quiet_room
    code, out, err = cli(
        "render",
        tmp / "dry.wav",
        "--ir",
        tmp / "room.wav",
        "-o",
        tmp / "k.wav",
        "--mix",
        0.3,
        "--keep-ir-level",
        "--subtype",
        "DOUBLE",
    )
    assert code == 0, err
    y, _ = sf.read(tmp / "k.wav")
    expected = 0.3 * fftconvolve(dry, h)
    expected[: dry.size] += 0.7 * dry
    assert np.max(np.abs(y - expected)) < 1e-9
    balance = 20 * math.log10(0.3 / 0.7) + 10 * math.log10(np.sum(h**2))
    assert f"wet/dry balance {balance:+.1f} dB" in out


def test_live_and_batch_use_the_same_mix_definition(quiet_room, cli):
    from roomconv.render.mix import ir_gain, wet_dry_db
    from roomconv.render.partitioned import routing_for
    from roomconv.render.stream import LiveProcessor

    tmp, dry, h = quiet_room
    g = ir_gain(h, routing_for(1, 1))
    assert g == pytest.approx(1 / math.sqrt(np.sum(h**2)), rel=1e-12)
    proc = LiveProcessor(
        h,
        FS,
        block=256,
        mix=0.3,
        gain_db=0.0,
        fade_in_s=0.0,
        precision="float64",
        match_ir_level=True,
    )
    assert proc.wet_dry_db == pytest.approx(20 * math.log10(0.3 / 0.7), abs=1e-9)
    assert wet_dry_db(0.3, h * g, routing_for(1, 1), 1.0) == pytest.approx(proc.wet_dry_db)
    x = 0.01 * dry[: 40 * 256, None]  # quiet enough that the limiter never acts
    y = np.concatenate([proc.process(x[i : i + 256]) for i in range(0, x.shape[0], 256)])
    ref = 0.3 * fftconvolve(x[:, 0], h * g)[: x.shape[0]] + 0.7 * x[:, 0]
    # The processor's fade-in is at least one sample long: compare from the second block on.
    assert proc.stats.limiter_db == 0.0
    assert np.max(np.abs(y[256:, 0] - ref[256:])) < 1e-9
    # batch: the same settings give the same file as render
    code, _, err = cli(
        "render",
        tmp / "dry.wav",
        "--ir",
        tmp / "room.wav",
        "-o",
        tmp / "r.wav",
        "--mix",
        0.3,
        "--subtype",
        "DOUBLE",
    )
    assert code == 0, err
    code, _, err = cli(
        "batch",
        tmp / "dry.wav",
        "--ir",
        tmp / "room.wav",
        "--out-dir",
        tmp / "b",
        "--mix",
        0.3,
        "--subtype",
        "DOUBLE",
        "--workers",
        1,
    )
    assert code == 0, err
    a, _ = sf.read(tmp / "r.wav")
    b, _ = sf.read(tmp / "b" / "dry__room.wav")
    assert np.max(np.abs(a - b)) < 1e-12
