"""The treatment-planning job from an analysis document held in memory: the same plan as from
the file it was written to, and the sources still one at a time."""

import numpy as np
import pytest
import soundfile as sf

from roomconv.errors import InputError
from roomconv.jobs.analyze import analyze_study
from roomconv.jobs.plan import plan_treatment

FS = 48000


@pytest.fixture(scope="module")
def analysed(tmp_path_factory):
    d = tmp_path_factory.mktemp("mem")
    t = np.arange(2 * FS) / FS
    # An exponential decay of T = 0.8 s (energy falls 60 dB in T: 10^(-3t/T) in amplitude).
    h = np.random.default_rng(7).standard_normal(t.size) * 10 ** (-3 * t / 0.8)
    sf.write(d / "room.wav", 0.5 * h, FS, subtype="DOUBLE")
    res = analyze_study([d / "room.wav"], json_path=d / "room.json")
    return res.study.document, d / "room.json"


def test_document_in_memory_plans_as_the_file_does(analysed):
    doc, path = analysed
    common = dict(volume_m3=150.0, area_m2=170.0, target="0.5", treatments=["floor=carpet"])
    from_file = plan_treatment(results_path=path, **common).document
    from_memory = plan_treatment(results_document=doc, **common).document
    assert from_memory["bands"] == from_file["bands"]
    assert from_memory["installed"] == from_file["installed"]
    assert from_memory["inputs"]["results"] == "analysis document in memory"
    # Sabine's ΔA = 0.161·V·(1/T_target − 1/T_measured) (closed form) at 500 Hz.
    b = {r["band_hz"]: r for r in from_memory["bands"]}[500]
    assert b["added_area_sabine_m2"] == pytest.approx(
        0.161 * 150.0 * (1 / 0.5 - 1 / b["measured_s"]), abs=1e-3
    )


def test_one_source_only(analysed):
    doc, path = analysed
    with pytest.raises(InputError, match="not both or neither"):
        plan_treatment(results_document=doc, results_path=path, volume_m3=1.0, area_m2=6.0)
    with pytest.raises(InputError, match="mapping"):
        plan_treatment(results_document=[1, 2], volume_m3=100.0, area_m2=130.0, target="0.5")
    with pytest.raises(InputError, match="per-band averages"):
        plan_treatment(results_document={"x": 1}, volume_m3=100.0, area_m2=130.0, target="0.5")
