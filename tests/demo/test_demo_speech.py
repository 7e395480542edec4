"""The demo's speech room: responses, the STI results and their cautions."""

import json

import numpy as np

from roomconv.analysis import sti as S
from roomconv.demo.speech import NOISE_DB, SPEECH_LEVEL_DBA, larkspur_room, speech_room
from roomconv.synth.room import eyring


def test_speech_room_sti_is_bounded_by_its_slowest_decay(tmp_path):
    avg = speech_room(tmp_path, rate_hz=32000, seed=7)
    doc = json.loads((tmp_path / "results.json").read_text())
    assert avg == doc["average"]["sti"] and avg["n"] == 2
    # A direct sound and early reflections only add modulation to a diffuse decay, so the
    # STI lies above that of a pure exponential decay with the room's longest octave
    # decay time (Eyring prediction, 125 Hz–8 kHz) under the same speech and noise
    # (Houtgast, Steeneken & Plomp 1980, closed form for the exponential decay).
    t_max = max(v for b, v in eyring(larkspur_room()).items() if 125 <= b <= 8000)
    m = np.tile(S.exponential_mtf(S.MODULATION_HZ, t_max), (7, 1))
    floor = S.speech_transmission_index(
        m, speech_db=S.speech_spectrum(SPEECH_LEVEL_DBA), noise_db=NOISE_DB
    ).value
    for p in doc["positions"]:
        assert floor < p["sti"]["value"] <= 1.0
    assert doc["settings"]["sti"]["noise_octaves_db"] == list(NOISE_DB)
    assert any("licensed professional" in c for c in doc["cautions"])
    assert "Speech intelligibility (STI)" in (tmp_path / "report.html").read_text()
