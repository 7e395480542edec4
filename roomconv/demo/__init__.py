"""The demo: a complete room study of Quillmere Hall, a hall of our own invention, measured in
simulation the way a consultant would measure a real one.

:mod:`.scenario` holds the data (room, positions, chain, clips), :mod:`.steps` the steps,
each a call into :mod:`roomconv.jobs`; the ``demo`` command presents the summary.
"""

from .scenario import CHAIN, FULL, QUICK, RATE_HZ, SEED, Scenario, demo_clip, quillmere_hall
from .steps import run_demo

__all__ = [
    "CHAIN",
    "FULL",
    "QUICK",
    "RATE_HZ",
    "SEED",
    "Scenario",
    "demo_clip",
    "quillmere_hall",
    "run_demo",
]
