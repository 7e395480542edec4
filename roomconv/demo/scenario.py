"""The demo's scenario, data only: Quillmere Hall, a multi-purpose hall of our own invention,
its sources and microphones, the sweep, the simulated measurement chain and the dry clips.
"""

from __future__ import annotations

import importlib.resources
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from ..signal import db_to_gain

__all__ = [
    "Scenario",
    "FULL",
    "QUICK",
    "RATE_HZ",
    "SEED",
    "quillmere_hall",
    "pink_noise",
    "demo_clip",
    "SOURCE_CLIPS",
    "CHAIN",
]

#: The dry clips' source folder in a checkout (demo_audio/, beside the script that made them).
#: A built wheel carries the same files as the package data ``roomconv.demo_audio``.
SOURCE_CLIPS = Path(__file__).resolve().parent.parent.parent / "demo_audio"
RATE_HZ = 48000
SEED = 2026


@dataclass(frozen=True)
class Scenario:
    """Positions in m, the sweep length in s and the clips rendered.

    Examples
    --------
    >>> len(FULL.sources) * len(FULL.receivers), QUICK.sweep_s
    (6, 3.0)
    """

    sources: tuple
    receivers: tuple
    sweep_s: float
    clips: tuple


FULL = Scenario(
    sources=((4.0, 7.5, 1.6), (4.0, 4.0, 1.6)),
    receivers=((12.0, 5.0, 1.2), (17.5, 10.0, 1.2), (22.5, 6.5, 1.2)),
    sweep_s=5.0,
    clips=("plucks.wav", "claps.wav", "speech.wav"),
)
QUICK = Scenario(
    sources=((4.0, 7.5, 1.6),),
    receivers=((12.0, 5.0, 1.2), (17.5, 10.0, 1.2)),
    sweep_s=3.0,
    clips=("plucks.wav",),
)


@dataclass(frozen=True)
class Chain:
    """The simulated measurement chain (our own invented figures).

    Examples
    --------
    >>> CHAIN.latency_samples, CHAIN.noise_dbfs
    (384, -72.0)
    """

    sweep_level_dbfs: float = -12.0
    silence_pre_s: float = 0.5
    silence_post_s: float = 2.5
    latency_samples: int = 384
    distortion: tuple = (0.02, 0.01)  #: loudspeaker x + a2·x² + a3·x³
    noise_dbfs: float = -72.0
    true_length_s: float = 2.5
    measured_length_s: float = 2.4
    pair_spacing_m: float = 0.6
    mix: float = 0.85


CHAIN = Chain()


def demo_clip(name: str) -> Path | None:
    """The bundled dry clip ``name``: package data when installed, else the source folder.

    Examples
    --------
    >>> demo_clip("plucks.wav").name
    'plucks.wav'
    >>> demo_clip("no-such-clip.wav") is None
    True
    """
    try:
        root = importlib.resources.files("roomconv.demo_audio")
    except ModuleNotFoundError:  # a source checkout on PYTHONPATH, not installed
        root = SOURCE_CLIPS
    clip = root / name
    # Installed wheels are unpacked on disk, so the resource is a real file with a path.
    return Path(str(clip)) if clip.is_file() else None


def quillmere_hall():
    """26 × 15 × 6 m (2,340 m³): plastered walls, a glazed side wall, a timber-panelled stage
    wall and timber floor, 220 m² of upholstered seating (empty), plaster ceiling.

    Examples
    --------
    >>> hall = quillmere_hall()
    >>> hall.volume, hall.surfaces["right"]
    (2340.0, 'glass-heavy')
    """
    from ..synth.room import Patch, RoomModel

    return RoomModel(
        26.0,
        15.0,
        6.0,
        {
            "left": "plaster",
            "right": "glass-heavy",
            "front": "wood-panel",
            "back": "plaster",
            "floor": "wood-floor",
            "ceiling": "plaster",
        },
        patches=(Patch("floor", "seats-upholstered-empty", 220.0),),
    )


def pink_noise(
    n: int, rng: np.random.Generator, level_dbfs: float, rate_hz: int = RATE_HZ
) -> np.ndarray:
    """Stationary pink (1/f) noise with an HVAC-like low-frequency bump, at an RMS level.

    Examples
    --------
    The RMS level is the one asked for, and 1/f noise carries equal energy per octave
    (here 1–2 kHz against 2–4 kHz, above the low-frequency bump):

    >>> x = pink_noise(48000, np.random.default_rng(0), -40.0)
    >>> round(float(20 * np.log10(np.sqrt(np.mean(x**2)))), 6)
    -40.0
    >>> f = np.fft.rfftfreq(x.size, 1 / RATE_HZ)
    >>> p = np.abs(np.fft.rfft(x)) ** 2
    >>> octave = lambda lo: p[(f >= lo) & (f < 2 * lo)].sum()
    >>> round(float(10 * np.log10(octave(2000) / octave(1000))), 1)
    -0.0
    """
    nfft = 1 << int(np.ceil(np.log2(n)))
    f = np.fft.rfftfreq(nfft, 1.0 / rate_hz)
    shape = 1.0 / np.sqrt(np.maximum(f, 20.0))
    shape *= 1 + 2.0 * np.exp(-0.5 * (np.log2(np.maximum(f, 1) / 90.0) / 0.5) ** 2)
    spec = shape * (rng.standard_normal(f.size) + 1j * rng.standard_normal(f.size))
    x = np.fft.irfft(spec, nfft)[:n]
    return x / np.sqrt(np.mean(x * x)) * db_to_gain(level_dbfs)
