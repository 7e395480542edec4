"""The demo's steps: synthesize Quillmere Hall, measure every position through the simulated
chain, analyse and compare with the prediction, render the clips, write the report.

Each step calls the job layer, which names, guards and records every file it writes.
"""

from __future__ import annotations

import html
import time
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from .. import __version__
from ..errors import InputError, OutputExistsError
from ..jobs.progress import ProgressCallback, silent
from .plan_step import plan_demo
from .scenario import (
    CHAIN,
    FULL,
    QUICK,
    RATE_HZ,
    SEED,
    Scenario,
    demo_clip,
    pink_noise,
    quillmere_hall,
)

__all__ = ["run_demo"]

TITLE = "Quillmere Hall — room acoustic study (demo)"


@dataclass
class _Run:
    """What the steps share: the scenario, the folder, the settings recorded in every
    provenance sidecar, and the step counter behind the progress callback."""

    scenario: Scenario
    out: Path
    force: bool
    progress: ProgressCallback
    settings: dict
    total: int
    done: int = 0
    notes: list = field(default_factory=list)
    sofa: dict = field(default_factory=dict)

    def step(self, stage: str) -> None:
        self.done += 1
        self.progress(stage, self.done / self.total, None)


def run_demo(
    out, *, quick: bool = False, force: bool = False, progress: ProgressCallback = silent, log=print
) -> dict:
    """Run the whole study into ``out``; returns a summary dict (also written as
    ``summary.json``). ``log`` receives notes (a missing clip).

    Examples
    --------
    Not run here (the quick study takes tens of seconds); ``tests/demo/test_demo.py`` runs
    it. A typical call::

        summary = run_demo("demo_out", quick=True)
        summary["files"]    # the responses, renders, results and reports written
    """
    from ..jobs.guard import make_folders, write_document
    from ..measure.sweep import Sweep

    sc = QUICK if quick else FULL
    t_start = time.monotonic()
    out = Path(out)
    if out.exists() and not out.is_dir():
        raise InputError(f"{out}: exists and is not a folder; give a folder for the demo's files")
    if out.exists() and any(out.iterdir()) and not force:
        raise OutputExistsError(f"{out}: folder is not empty (nothing was replaced)")
    make_folders(out, *(out / sub for sub in ("irs", "harmonics", "renders", "recordings")))
    sweep = Sweep(
        rate=RATE_HZ,
        f_low=20,
        f_high=20000,
        duration=sc.sweep_s,
        level_dbfs=CHAIN.sweep_level_dbfs,
        silence_pre=CHAIN.silence_pre_s,
        silence_post=CHAIN.silence_post_s,
    )
    n_pos = len(sc.sources) * len(sc.receivers)
    run = _Run(
        sc,
        out,
        force,
        progress,
        {"scenario": "Quillmere Hall (fictional)", "quick": quick, "seed": SEED},
        total=n_pos * 2 + 4 + len(sc.clips) + 3,
    )
    room = quillmere_hall()
    truths = true_responses(run, room)
    qualities = measure_positions(run, truths, sweep)
    study, comparison = analyse_positions(run, room, qualities)
    speech = speech_room_step(run)
    pairs = stereo_pairs(run, room)
    stage = stage_support_example(run, room)
    renders = render_clips(run, pairs)
    for n in run.notes:
        log(n)
    write_report(run, room, sweep, study, comparison, renders)
    plan_demo(out, room, force=force)  # the hall planned for talks (plan.json)
    summary = _summary(study.document, time.monotonic() - t_start, out)
    summary["speech_room"] = speech
    summary["stage_support"] = stage
    summary["sofa"] = run.sofa
    write_document(out / "summary.json", summary, force=force)
    return summary


def true_responses(run: _Run, room) -> dict:
    """1. The hall's own responses at every position (what a real hall would be).

    Examples
    --------
    Step 1 of :func:`run_demo`, which builds the shared run state and calls the steps in
    order; ``tests/demo/`` runs the whole demo.
    """
    from ..synth.generate import synthesize

    truths = {}
    for si, src in enumerate(run.scenario.sources, 1):
        for ri, rcv in enumerate(run.scenario.receivers, 1):
            res = synthesize(
                room, src, rcv, rate=RATE_HZ, seed=SEED + 10 * si + ri, length_s=CHAIN.true_length_s
            )
            truths[(si, ri)] = res.ir[:, 0]
            run.step(f"hall S{si}R{ri}")
    return truths


def measure_positions(run: _Run, truths: dict, sweep) -> dict:
    """2. Each position through the simulated chain (loudspeaker distortion, card latency,
    loopback, pink background noise), extracted by the measurement job.

    Examples
    --------
    Step 2 of :func:`run_demo`, which builds the shared run state and calls the steps in
    order; ``tests/demo/`` runs the whole demo.
    """
    from ..jobs.measure import measure_position
    from ..measure.capture import SimulatedDevice
    from ..measure.sweep import sweep_signal

    rng = np.random.default_rng(SEED)
    n_rec = sweep_signal(sweep).size + int(0.5 * RATE_HZ)
    qualities = {}
    for (si, ri), h in truths.items():
        name = f"S{si}R{ri}"
        device = SimulatedDevice(
            h,
            latency_samples=CHAIN.latency_samples,
            loopback=True,
            distortion=CHAIN.distortion,
            noise=pink_noise(n_rec, rng, CHAIN.noise_dbfs),
        )
        first = (si, ri) == (1, 1)
        res = measure_position(
            run.out / "irs" / f"{name}.wav",
            sweep,
            simulated_device=device,
            reference_channel=2,
            length_s=CHAIN.measured_length_s,
            harmonics_dir=run.out / "harmonics" if first else None,
            save_recording=run.out / "recordings" / f"{name}_recording.wav" if first else None,
            json_path=run.out / "irs" / f"{name}.quality.json",
            harmonic_provenance=True,
            force=run.force,
            settings={**run.settings, "position": name},
        )
        qualities[name] = res.quality
        run.step(f"measure {name}")
    return qualities


def analyse_positions(run: _Run, room, qualities: dict):
    """3. ISO 3382 analysis of every measured position, compared with the prediction.

    Examples
    --------
    Step 3 of :func:`run_demo`, which builds the shared run state and calls the steps in
    order; ``tests/demo/`` runs the whole demo.
    """
    from ..jobs.analyze import analyze_study
    from ..synth.room import eyring, sabine

    files = [run.out / "irs" / f"{n}.wav" for n in qualities]
    study = analyze_study(files, bands="octave").study
    # Files are named relative to the demo folder, as the report shows them.
    for p in study.document["positions"]:
        p["file"] = f"irs/{Path(p['file']).name}"
    study.curves = {(f"irs/{Path(k[0]).name}", k[1]): v for k, v in study.curves.items()}
    pred_e, pred_s = eyring(room), sabine(room)
    doc = study.document
    doc["settings"].update(run.settings)
    doc["prediction"] = {
        "eyring_s": {str(b): v for b, v in pred_e.items()},
        "sabine_s": {str(b): v for b, v in pred_s.items()},
    }
    doc["quality"] = {n: _verdict(q) for n, q in qualities.items()}
    comparison = []
    for r in doc["average"]["bands"]:
        b = int(r["band_hz"]) if r["band_hz"] >= 63 else None
        m = r["t30_s"]["mean"]
        if b in pred_e and m is not None:
            comparison.append(
                {
                    "band_hz": r["band_hz"],
                    "measured_t30_s": m,
                    "eyring_s": pred_e[b],
                    "sabine_s": pred_s[b],
                    "deviation_pct": 100 * (m / pred_e[b] - 1),
                }
            )
    doc["measured_vs_predicted"] = comparison
    run.step("analyse")
    return study, comparison


def speech_room_step(run: _Run) -> dict:
    """3b. A meeting room of our own, rated by the STI (see :mod:`roomconv.demo.speech`)."""
    from ..jobs.guard import make_folders
    from .speech import speech_room

    make_folders(run.out / "speech")
    avg = speech_room(
        run.out / "speech", rate_hz=RATE_HZ, seed=SEED, force=run.force, settings=run.settings
    )
    run.step("speech room")
    return avg


def stereo_pairs(run: _Run, room) -> dict:
    """4. A measured stereo pair (two microphones of source 1) and its synthetic twin.

    Examples
    --------
    Step 4 of :func:`run_demo`, which builds the shared run state and calls the steps in
    order; ``tests/demo/`` runs the whole demo.
    """
    from ..jobs.synth import pair_responses, synthesize_room

    sc = run.scenario
    measured = pair_responses(
        run.out / "irs" / "S1R1.wav",
        run.out / "irs" / "S1R2.wav",
        run.out / "irs" / "measured.wav",
        force=run.force,
        settings={**run.settings, "what": "S1R1 (left) and S1R2 (right) as a pair"},
    )
    predicted = run.out / "irs" / "predicted.wav"
    synthesize_room(
        predicted,
        room,
        source_m=sc.sources[0],
        receiver_m=sc.receivers[0],
        rate_hz=RATE_HZ,
        stereo=f"spaced:{CHAIN.pair_spacing_m:g}",
        seed=SEED,
        length_s=CHAIN.measured_length_s,
        force=run.force,
        settings={
            **run.settings,
            "what": f"synthetic prediction, spaced pair {CHAIN.pair_spacing_m:g} m at R1",
        },
    )
    run.step("stereo pairs")
    return {"measured": measured, "predicted": predicted}


def stage_support_example(run: _Run, room) -> dict:
    """4b. Stage support: a synthesized response 1 m downstage of source 1, analysed with the
    stage layout (ST_early, ST_late) into ``stage.json``."""
    from ..jobs.analyze import analyze_study
    from ..jobs.synth import synthesize_room

    src = run.scenario.sources[0]
    path = run.out / "irs" / "stage_1m.wav"
    synthesize_room(
        path,
        room,
        source_m=src,
        receiver_m=(src[0] + 1.0, src[1], src[2]),
        rate_hz=RATE_HZ,
        seed=SEED + 7,
        length_s=CHAIN.true_length_s,
        force=run.force,
        settings={**run.settings, "what": "stage response 1 m downstage of S1"},
    )
    res = analyze_study([path], stage=True, json_path=run.out / "stage.json", force=run.force)
    run.step("stage support")
    p = res.study.document["positions"][0]
    return {
        "values": p["layout_single_numbers"],
        "verdicts": p["layout_single_number_verdicts"],
    }


def render_clips(run: _Run, pairs: dict) -> list:
    """5. The dry clips through the measured pair; the first also through the prediction.

    Examples
    --------
    Step 5 of :func:`run_demo`, which builds the shared run state and calls the steps in
    order; ``tests/demo/`` runs the whole demo.
    """
    from ..jobs.naming import render_output_name
    from ..jobs.render import render_one
    from ..render.offline import RenderSettings

    rs = RenderSettings(
        mix=CHAIN.mix, normalize="truepeak", target=-1.0, subtype="PCM_24", match_ir_level=True
    )
    renders = []
    for clip in run.scenario.clips:
        dry = demo_clip(clip)
        if dry is None:
            run.notes.append(f"note: demo clip {clip} is missing; skipped")
            run.step(f"render {clip}")
            continue
        for label, ir in pairs.items():
            if label == "predicted" and clip != run.scenario.clips[0]:
                continue
            target = run.out / "renders" / render_output_name(dry, ir)
            renders.append((target, render_one(dry, ir, target, rs, force=run.force)))
        run.step(f"render {clip}")
    return renders


def write_report(run: _Run, room, sweep, study, comparison, renders) -> None:
    """6. results.json, results.csv and report.html, with one provenance sidecar each.

    Examples
    --------
    Step 6 of :func:`run_demo`, which builds the shared run state and calls the steps in
    order; ``tests/demo/`` runs the whole demo.
    """
    from ..jobs.analyze import write_study
    from ..synth.room import eyring, sabine

    sections = _report_sections(
        room, sweep, study.document["quality"], comparison, renders, run.out
    )
    extra = {
        "Eyring prediction": {float(b): v for b, v in eyring(room).items()},
        "Sabine prediction": {float(b): v for b, v in sabine(room).items()},
    }
    write_study(
        study,
        json_path=run.out / "results.json",
        csv_path=run.out / "results.csv",
        report_file=run.out / "report.html",
        report_options={"title": TITLE, "sections": sections, "extra_series": extra},
        provenance={**run.settings, "sweep": sweep.to_dict()},
        force=run.force,
    )
    client_report(run, room, sweep, study.document["average"]["single_numbers"])
    run.step("report")


def client_report(run: _Run, room, sweep, wav_numbers: dict | None = None) -> list[Path]:
    """6b. The study file and the client report (report/report.html and .pdf) from it, as a
    consultant sends them; the HTML alone, saying why, where no PDF engine is installed.

    Examples
    --------
    Step 6b of :func:`run_demo`, which builds the shared run state and calls the steps in
    order; ``tests/demo/`` runs the whole demo.
    """
    from ..jobs.study import report_study, write_study_file

    study_file = write_study_file(
        run.out / "study.toml", _study_text(run.scenario, room, sweep), force=run.force
    )
    sofa_file = export_sofa(run, study_file, wav_numbers)
    res = report_study(
        study_file,
        report_dir=run.out / "report",
        force=run.force,
        require_pdf=False,
        sofa_file=sofa_file,
    )
    run.notes.extend(f"note: {n}" for n in res.notes)
    return [study_file, *res.written]


def export_sofa(run: _Run, study_file: Path, wav_numbers: dict | None) -> Path:
    """6c. The study's responses as one SOFA file (AES69-2022), analysed back from it: the
    same samples must give the same numbers as the WAV files did (``wav_numbers``, the
    single numbers of step 3; ``summary["sofa"]``)."""
    from ..jobs.analyze import analyze_study
    from ..jobs.export import export_responses

    target = run.out / "quillmere.sofa"
    res = export_responses([], target, study=study_file, force=run.force)
    back = analyze_study(
        [target], bands="octave", json_path=run.out / "sofa-results.json", force=run.force
    ).study
    run.sofa = {
        "file": target.name,
        "convention": res.convention,
        "measurements": res.measurements,
        "analysis": "sofa-results.json",
        "same_numbers_as_wav": back.document["average"]["single_numbers"] == wav_numbers,
    }
    run.step("sofa")
    return target


def _study_text(sc: Scenario, room, sweep) -> str:
    pts = "".join(
        f'\n[[sources]]\nid = "S{i}"\nxy_m = [{x:g}, {y:g}]\nheight_m = {z:g}\n'
        for i, (x, y, z) in enumerate(sc.sources, 1)
    )
    pts += "".join(
        f'\n[[receivers]]\nid = "R{i}"\nxy_m = [{x:g}, {y:g}]\nheight_m = {z:g}\n'
        for i, (x, y, z) in enumerate(sc.receivers, 1)
    )
    resp = "".join(
        f'\n[[responses]]\nsource = "S{si}"\nreceiver = "R{ri}"\n'
        f'file = "irs/S{si}R{ri}.wav"\nquality_file = "irs/S{si}R{ri}.quality.json"\n'
        for si in range(1, len(sc.sources) + 1)
        for ri in range(1, len(sc.receivers) + 1)
    )
    # Everything below is the demo's own invented scenario, including the client's target.
    return f"""# Quillmere Hall: a fictional hall, measured in simulation by `roomconv demo`.
[study]
title = "Quillmere Hall: room acoustic survey (demo)"
client = "Quillmere Hall Community Trust (fictional)"
project_number = "DEMO-001"
author = "roomconv demo"
dates = [2026-01-15]
notes = "A scenario of our own: the hall, its responses and the measurement chain are synthesized."

[room]
name = "Quillmere Hall"
use = "multi-purpose: concerts, talks, community events"
dimensions_m = [{room.length:g}, {room.width:g}, {room.height:g}]
state = "unoccupied"
furnished = true
temperature_c = 20.0
humidity_pct = 50.0

[equipment]
source = "simulated omnidirectional loudspeaker (mild 2nd/3rd-order distortion)"
microphone = "simulated omnidirectional measurement microphone"
interface = "simulated sound card, loopback reference on input 2"

[sweep]
f_low_hz = {sweep.f_low:g}
f_high_hz = {sweep.f_high:g}
duration_s = {sweep.duration:g}
level_dbfs = {sweep.level_dbfs:g}
repeats = {sweep.repeats}
silence_s = {sweep.silence_post:g}
rate_hz = {sweep.rate}
{pts}{resp}
[targets]
basis = "t30"
tolerance_pct = [-15, 15]
source = "the (fictional) client's brief"

[targets.reverberation_s]
"125" = 1.6
"250" = 1.5
"500" = 1.4
"1000" = 1.4
"2000" = 1.4
"4000" = 1.3
"""


def _verdict(q: dict) -> dict:
    from ..measure.quality import REQUIRED_INR_DB

    inr = min(q["ir"]["inr_db"])
    clipped = sum(q["recording"]["clipped_samples"])
    if clipped:
        v = "fail: clipped recording"
    elif inr >= REQUIRED_INR_DB["t30"]:
        v = f"pass: T30 evaluable (impulse-to-noise ratio (INR) ≥ {REQUIRED_INR_DB['t30']:.0f} dB)"
    elif inr >= REQUIRED_INR_DB["t20"]:
        v = "limited: T20 only"
    else:
        v = "fail: too noisy for decay times"
    return {
        "verdict": v,
        "inr_db": inr,
        "clipped_samples": clipped,
        "latency_samples": q.get("reference_latency_samples"),
        "warnings": q.get("warnings", []),
    }


def _report_sections(room, sweep, verdicts, comparison, renders, out):
    from ..analysis.report import _html_table

    surf = [[s, room.surfaces[s], f"{room.surface_area(s):.0f}"] for s in room.surfaces]
    surf += [[f"{p.surface} (part)", p.material, f"{p.area_m2:.0f}"] for p in room.patches]
    desc = (
        f"<p>Quillmere Hall is a fictional multi-purpose hall invented for this demo: "
        f"{room.length:g} × {room.width:g} × {room.height:g} m, V = {room.volume:.0f} m³, "
        f"S = {room.total_area:.0f} m², 20 °C, 50 % RH. It is synthesized by roomconv's "
        "image-source model with a diffuse tail whose decay time varies smoothly with "
        "frequency and is fitted so that octave-band filters read the Eyring "
        "prediction.</p>" + _html_table(["surface", "material", "area m²"], surf)
    )
    a2, a3 = CHAIN.distortion
    chain = (
        f"<p>Exponential sweep {sweep.f_low:g} Hz–{sweep.f_high / 1000:g} kHz, "
        f"{sweep.duration:g} s at {sweep.level_dbfs:g} dBFS, {sweep.silence_post:g} s of "
        "silence after it; a simulated loudspeaker with 2nd/3rd-order distortion "
        f"(x + {a2:g}x² + {a3:g}x³), a sound card with {CHAIN.latency_samples} samples "
        "of latency and a loopback reference channel, and pink HVAC-like background "
        f"noise at {CHAIN.noise_dbfs:g} dBFS. Each recording is deconvolved with the "
        "sweep's analytic inverse and divided by the loopback response.</p>"
    )
    rows = [
        [
            n,
            v["verdict"],
            f"{v['inr_db']:.1f}",
            str(v["clipped_samples"]),
            str(v["latency_samples"]),
        ]
        for n, v in verdicts.items()
    ]
    quality = _html_table(["position", "verdict", "INR dB", "clipped", "latency removed"], rows)
    comp = (
        "<p>T30 averaged over the measured positions against Eyring's formula per octave "
        "band (deviation relative to Eyring). The synthetic hall decays at that prediction "
        "as an octave filter reads it, so the deviation shows what the measuring chain "
        "(sweep, distortion, noise, deconvolution) and the few positions add; the ISO "
        "3382-1 just-noticeable difference of T is 5 %.</p>"
    ) + _html_table(
        ["band", "measured T30 s", "Eyring s", "Sabine s", "deviation %"],
        [
            [
                f"{c['band_hz']:g}",
                f"{c['measured_t30_s']:.2f}",
                f"{c['eyring_s']:.2f}",
                f"{c['sabine_s']:.2f}",
                f"{c['deviation_pct']:+.1f}",
            ]
            for c in comparison
        ],
    )
    rend = (
        "<ul>"
        + "".join(
            f"<li>{html.escape(str(p.relative_to(out)))}: peak {r.peak_dbfs:+.1f} dBFS, true peak "
            f"{r.true_peak_dbtp:+.1f} dBTP</li>"
            for p, r in renders
        )
        + "</ul>"
    )
    return [
        ("The room", desc),
        ("Measurement chain", chain),
        ("Data quality", quality),
        ("Measured against predicted reverberation time", comp),
        ("Listening (A/B: measured vs predicted)", rend),
    ]


def _summary(doc, seconds, out) -> dict:
    from ..analysis.spatial import position_single_numbers

    keys = ("t30_mid_s", "edt_mid_s", "c80_mid_db", "d50_mid")
    per_pos = {}
    for p in doc["positions"]:
        sn = position_single_numbers(p["bands"], doc["settings"]["bands"])
        per_pos[Path(p["file"]).stem] = {k: sn[k] for k in keys}
    dev = [c["deviation_pct"] for c in doc["measured_vs_predicted"]]
    return {
        "positions": per_pos,
        "average": doc["average"]["single_numbers"],
        "quality": {n: q["verdict"] for n, q in doc["quality"].items()},
        "t30_vs_eyring_pct": [min(dev), max(dev)] if dev else None,
        "files": [
            str(out / n)
            for n in (
                "report",
                "study.toml",
                "quillmere.sofa",
                "report.html",
                "results.json",
                "results.csv",
                "plan.json",
                "stage.json",
                "irs",
                "harmonics",
                "renders",
                "speech",
            )
        ],
        "seconds": seconds,
        "output": str(out),
        "roomconv_version": __version__,
    }
