"""A three-position study of our own: one source, three receivers, each response an
exponential decay of known reverberation time (closed form) over a low noise floor."""

from __future__ import annotations

import numpy as np
import pytest
import soundfile as sf

RATE = 48000
#: Reverberation times of the three synthetic responses (invented for the test scenario).
TIMES = (0.80, 0.85, 0.90)

STUDY = """
[study]
title = "Harbour Room acceptance test"
client = "Quayside Arts Trust"
project_number = "Q-17"
author = "Test Author"
dates = [2026-11-30, "2026-12-01"]

[room]
name = "Harbour Room"
use = "rehearsal"
dimensions_m = [12.0, 8.0, 4.0]
state = "unoccupied"
furnished = true
temperature_c = 21.0
humidity_pct = 45

[equipment]
source = "dodecahedron"
microphone = "omni 1/2 inch"
microphone_serial = "M-0042"

[sweep]
f_low_hz = 20
f_high_hz = 20000
duration_s = 6
repeats = 2

[[sources]]
id = "S1"
xy_m = [2, 4]
height_m = 1.5

[[receivers]]
id = "R1"
xy_m = [6, 2]
height_m = 1.2

[[receivers]]
id = "R2"
xy_m = [8, 5]
height_m = 1.2

[[receivers]]
id = "R3"
xy_m = [10, 3]
height_m = 1.2

[[responses]]
source = "S1"
receiver = "R1"
file = "irs/S1R1.wav"

[[responses]]
source = "S1"
receiver = "R2"
file = "irs/S1R2.wav"

[[responses]]
source = "S1"
receiver = "R3"
file = "irs/S1R3.wav"

[targets]
basis = "t30"
reverberation_s = { "250" = 0.9, "500" = 0.8, "1000" = 0.8, "2000" = 0.8 }
tolerance_pct = [-10, 10]
source = "the client's brief"
"""


def write_study(folder, text: str = STUDY):
    """The study file and its three responses in ``folder``; returns the study path."""
    rng = np.random.default_rng(7)
    (folder / "irs").mkdir(exist_ok=True)
    t = np.arange(int(1.1 * RATE)) / RATE
    for i, rt in enumerate(TIMES, 1):
        h = rng.standard_normal(t.size) * np.exp(-6.9078 * t / rt)
        h[0] = 4.0
        h = np.concatenate([np.zeros(200), h]) + 1e-5 * rng.standard_normal(t.size + 200)
        sf.write(folder / "irs" / f"S1R{i}.wav", 0.5 * h / np.abs(h).max(), RATE, subtype="FLOAT")
    path = folder / "study.toml"
    path.write_text(text, encoding="utf-8")
    return path


@pytest.fixture(scope="session")
def study_run(tmp_path_factory):
    """`roomconv analyze --study ... --json --report` run once for the report tests."""
    from roomconv.cli import main
    from roomconv.report.pdf import pdf_engine_problem

    problem = pdf_engine_problem()
    if problem is not None:
        pytest.skip(f"no PDF engine here: {problem}")
    folder = tmp_path_factory.mktemp("study")
    path = write_study(folder)
    code = main(
        [
            "analyze",
            "--study",
            str(path),
            "--json",
            str(folder / "results.json"),
            "--report",
            str(folder / "report"),
            "--quiet",
        ]
    )
    return folder, code
