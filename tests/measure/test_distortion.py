"""Harmonic distortion read from an exponential-sweep measurement: levels of a known
polynomial against their closed forms, noise bounds for a linear chain, and the figures in
the quality JSON, the `extract` output and the study report."""

import json

import numpy as np
import pytest
import soundfile as sf

from roomconv.measure.capture import SimulatedDevice
from roomconv.measure.deconvolve import extract_ir
from roomconv.measure.distortion import harmonic_levels, ideal_responses
from roomconv.measure.sweep import Sweep, sweep_signal
from tests.conftest import band_limited_room

FS = 48000
SWEEP = Sweep(
    rate=FS,
    f_low=20,
    f_high=20000,
    duration=2.0,
    level_dbfs=-6.0,
    silence_pre=1.0,
    silence_post=1.0,
)
#: Loudspeaker polynomial of the test chain (invented for the test scenario).
A2, A3 = 0.05, 0.03


def _closed_form(a2: float, a3: float, amp: float) -> dict:
    """Levels of the 2nd and 3rd harmonic re the fundamental, dB, for x + a2·x² + a3·x³ driven
    by amp·sin φ. Power-reduction identities: sin² φ = (1 − cos 2φ)/2 gives a 2nd harmonic of
    a2·amp²/2; sin³ φ = (3 sin φ − sin 3φ)/4 gives a 3rd of a3·amp³/4 and adds 3·a3·amp³/4
    to the fundamental. Relative to the input amplitude (what the inverse filter returns):
    a2·amp/2, a3·amp²/4 and 1 + 3·a3·amp²/4."""
    fund = 1 + 0.75 * a3 * amp**2
    return {
        2: 20 * np.log10(a2 * amp / 2 / fund),
        3: 20 * np.log10(a3 * amp**2 / 4 / fund),
    }


LENGTH_S = 0.8
#: The sweep through a perfect chain: the method's own leak, computed once.
IDEAL = ideal_responses(SWEEP, LENGTH_S)


def _measure(ir, distortion=(0.0, 0.0), noise_dbfs=-100.0, seed=0):
    dev = SimulatedDevice(ir=ir, distortion=distortion, noise_dbfs=noise_dbfs, seed=seed)
    rec = dev.playrec(sweep_signal(SWEEP), FS)
    return extract_ir(rec, FS, sweep=SWEEP, length_s=LENGTH_S)


def _levels(ex, ideal=IDEAL):
    return harmonic_levels(ex.ir, ex.harmonics, FS, (SWEEP.f_low, SWEEP.f_high), ideal=ideal)[0]


def _delay(n=300):
    # A delay keeps the band-limited responses' pre-ringing inside their windows, as the
    # acoustic path does in a real measurement.
    h = np.zeros(n + 1)
    h[n] = 1.0
    return h


def test_polynomial_harmonics_match_the_closed_form():
    # Farina (2000): the k-th harmonic of an exponential sweep deconvolves into its own
    # response, whose spectrum at k·f is the harmonic's amplitude re the fundamental at f.
    # Within 0.5 dB of the trigonometric closed form.
    ex = _measure(_delay(), distortion=(A2, A3), noise_dbfs=-90.0)
    lv = _levels(ex)
    want = _closed_form(A2, A3, 10 ** (SWEEP.level_dbfs / 20))
    for k in (2, 3):
        assert not lv["orders"][k]["below_floor"]
        assert lv["orders"][k]["level_db"] == pytest.approx(want[k], abs=0.5), k
    # The polynomial has no 4th or 5th harmonic: both sit in the noise.
    assert lv["orders"][4]["below_floor"] and lv["orders"][5]["below_floor"]
    # The total adds the orders above the noise in power (the definition of a total
    # harmonic distortion, IEC 60268-5 from memory).
    total = 10 * np.log10(sum(10 ** (want[k] / 10) for k in (2, 3)))
    assert lv["total_orders"] == [2, 3]
    assert lv["total_db"] == pytest.approx(total, abs=0.5)
    assert lv["total_percent"] == pytest.approx(100 * 10 ** (total / 20), rel=0.06)


def test_a_linear_chain_reads_below_the_noise_floor_for_every_order():
    # No nonlinearity at all: whatever the harmonic windows hold is noise, and each order
    # must come out as a bound, never as a level.
    room = band_limited_room(FS, rt=0.25, length_s=0.5, direct_at=300)
    ex = _measure(0.2 * room / np.sqrt(np.sum(room**2)), noise_dbfs=-70.0, seed=3)
    lv = _levels(ex)
    for k in (2, 3, 4, 5):
        o = lv["orders"][k]
        assert o["below_floor"] and o["level_db"] is None, k
        assert o["floor_db"] < -20, k
    assert lv["total_db"] is None and lv["total_orders"] == []


def test_the_methods_own_leak_is_never_read_as_distortion():
    # A noise-free, distortion-free chain: the linear response's low-frequency ringing ahead
    # of its zero lag is all the harmonic windows hold. Without the perfect-chain reference
    # it would read as a (small) 2nd harmonic; with it, every order is a bound.
    ex = _measure(_delay(), noise_dbfs=-140.0)
    bare = _levels(ex, ideal=None)
    assert bare["orders"][2]["level_db"] is not None  # the leak the reference is for
    lv = _levels(ex)
    assert all(lv["orders"][k]["below_floor"] for k in (2, 3, 4, 5))
    assert lv["orders"][2]["method_floor_db"] > lv["orders"][2]["noise_db"]


def test_a_harmonic_well_above_the_noise_keeps_its_level_when_noise_is_added():
    # The expected noise energy is subtracted from the harmonic's window: with the noise
    # 20 dB below the harmonic the level moves by under 0.5 dB (10·log10(1 + 0.01) = 0.04 dB
    # before the estimate's own scatter).
    quiet = _measure(_delay(), distortion=(A2, 0.0), noise_dbfs=-120.0)
    noisy = _measure(_delay(), distortion=(A2, 0.0), noise_dbfs=-70.0, seed=1)
    lq, ln = _levels(quiet)["orders"][2], _levels(noisy)["orders"][2]
    assert ln["floor_db"] < lq["level_db"] - 20
    assert ln["level_db"] == pytest.approx(lq["level_db"], abs=0.5)


def test_extract_writes_the_levels_and_prints_one_line(tmp_path, cli):
    x = sweep_signal(SWEEP)
    (tmp_path / "s.sweep.json").write_text(json.dumps(SWEEP.to_dict()))
    sf.write(tmp_path / "s.wav", x, FS, subtype="FLOAT")
    rec = SimulatedDevice(ir=_delay(), distortion=(A2, A3), noise_dbfs=-100.0).playrec(x, FS)
    sf.write(tmp_path / "rec.wav", rec, FS, subtype="FLOAT")
    code, out, err = cli(
        "extract", tmp_path / "rec.wav", "--sweep", tmp_path / "s.wav",
        "-o", tmp_path / "ir.wav", "--json", tmp_path / "q.json",
    )  # fmt: skip
    assert code == 0, err
    lines = [ln for ln in out.splitlines() if "harmonic distortion" in ln]
    assert len(lines) == 1 and "H2 " in lines[0] and "H4 below the noise floor" in lines[0]
    q = json.loads((tmp_path / "q.json").read_text())
    want = _closed_form(A2, A3, 10 ** (SWEEP.level_dbfs / 20))
    got = q["distortion"]["channels"][0]["orders"]["2"]["level_db"]
    assert got == pytest.approx(want[2], abs=0.5)
    assert f"H2 {got:.1f} dB" in lines[0]


def test_the_study_report_shows_the_distortion_per_position(tmp_path):
    # The quality files of a study carry the figures into the report's data-quality section.
    from roomconv.jobs.measure import measure_position
    from roomconv.report.document import report_html
    from roomconv.report.inputs import analyse_study
    from roomconv.study import load_study
    from tests.report.conftest import STUDY, write_study

    text = STUDY
    for i in (1, 2, 3):
        text = text.replace(
            f'file = "irs/S1R{i}.wav"\n',
            f'file = "irs/S1R{i}.wav"\nquality_file = "q{i}.json"\n',
        )
    path = write_study(tmp_path, text)
    for i in (1, 2, 3):
        # The first position's loudspeaker distorts; the others are linear.
        dev = SimulatedDevice(
            ir=_delay(),
            distortion=(A2, A3) if i == 1 else (0.0, 0.0),
            noise_dbfs=-90.0,
            seed=i,
        )
        measure_position(
            tmp_path / f"m{i}.wav", SWEEP, simulated_device=dev, json_path=tmp_path / f"q{i}.json"
        )
    res = analyse_study(load_study(path))
    d1 = res.analysis.document["quality"]["S1-R1"]["distortion"]
    page = report_html(res)
    assert "Harmonic distortion" in page
    assert f"<td>{d1['orders']['2']['level_db']:.1f}</td>" in page
    assert page.count("all below noise") == 2
