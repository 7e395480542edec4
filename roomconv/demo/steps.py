"""``roomconv demo``: a complete room study of Linden Hall, a multi-purpose hall of our own
invention, measured in simulation the way a consultant would measure a real one.

The hall is synthesized (image sources + per-band tail); each of 2 sources × 3 microphones is
"measured" with a sweep through a simulated loudspeaker with mild distortion, a sound card
with latency and a loopback channel, and HVAC-like pink background noise; the recordings are
deconvolved, analysed by ISO 3382, averaged and compared with the Sabine/Eyring prediction;
demo clips are rendered through a measured and the synthetic response; everything lands in
the output folder with a provenance sidecar, and a self-contained HTML report ties it up.
"""

from __future__ import annotations

import html
import importlib.resources
import time
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from . import __version__
from .audio import WriteGuard, write_audio, write_json, write_provenance, write_text
from .cli import command
from .errors import InputError
from .progress import Progress

#: The dry clips' source folder in a checkout (demo_audio/, beside the script that made them).
#: A built wheel carries the same files as the package data ``roomconv.demo_audio``.
SOURCE_CLIPS = Path(__file__).resolve().parent.parent / "demo_audio"
RATE = 48000
SEED = 2026


@dataclass(frozen=True)
class Scenario:
    sources: tuple
    receivers: tuple
    sweep_s: float
    clips: tuple


FULL = Scenario(sources=((4.0, 7.5, 1.6), (4.0, 4.0, 1.6)),
                receivers=((12.0, 5.0, 1.2), (17.5, 10.0, 1.2), (22.5, 6.5, 1.2)),
                sweep_s=5.0, clips=("plucks.wav", "claps.wav", "speech.wav"))
QUICK = Scenario(sources=((4.0, 7.5, 1.6),), receivers=((12.0, 5.0, 1.2), (17.5, 10.0, 1.2)),
                 sweep_s=3.0, clips=("plucks.wav",))


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
        root = SOURCE_CLIPS  # type: ignore[assignment]
    clip = root / name
    # Installed wheels are unpacked on disk, so the resource is a real file with a path.
    return Path(str(clip)) if clip.is_file() else None


def linden_hall():
    """26 × 15 × 6 m (2,340 m³): plastered walls, a glazed side wall, a timber-panelled stage
    wall and timber floor, 220 m² of upholstered seating (empty), plaster ceiling."""
    from .synth.room import Patch, RoomModel
    return RoomModel(26.0, 15.0, 6.0,
                     {"left": "plaster", "right": "glass-heavy", "front": "wood-panel",
                      "back": "plaster", "floor": "wood-floor", "ceiling": "plaster"},
                     patches=(Patch("floor", "seats-upholstered-empty", 220.0),))


def pink_noise(n: int, rng: np.random.Generator, level_dbfs: float) -> np.ndarray:
    """Stationary pink (1/f) noise with an HVAC-like low-frequency bump, at an RMS level."""
    nfft = 1 << int(np.ceil(np.log2(n)))
    f = np.fft.rfftfreq(nfft, 1.0 / RATE)
    shape = 1.0 / np.sqrt(np.maximum(f, 20.0))
    shape *= 1 + 2.0 * np.exp(-0.5 * (np.log2(np.maximum(f, 1) / 90.0) / 0.5) ** 2)
    spec = shape * (rng.standard_normal(f.size) + 1j * rng.standard_normal(f.size))
    x = np.fft.irfft(spec, nfft)[:n]
    return x / np.sqrt(np.mean(x * x)) * 10 ** (level_dbfs / 20)


def run_demo(out: Path, *, quick: bool = False, force: bool = False, quiet: bool = False,
             log=print) -> dict:
    """Run the whole study; returns a summary dict (also written as part of results.json)."""
    from .analysis.report import html_report, csv_text
    from .analysis.study import analyse_arrays
    from .measure.capture import SimulatedDevice, run_measurement
    from .measure.deconvolve import extract_ir
    from .measure.sweep import Sweep, sweep_signal
    from .render.offline import RenderSettings, render_file
    from .synth.generate import Receivers, synthesize
    from .synth.room import eyring, sabine

    sc = QUICK if quick else FULL
    t_start = time.monotonic()
    out = Path(out)
    if out.exists() and any(out.iterdir()) and not force:
        raise InputError(f"{out}: folder is not empty (pass --force to overwrite the demo's "
                         "files in it)")
    # Folders go through a guard so that a run that fails or is interrupted removes the
    # ones it created and left empty.
    folders = WriteGuard(force=True)
    folders.make_folder(folders.folder(out))
    for sub in ("irs", "harmonics", "renders", "recordings"):
        folders.make_folder(folders.folder(out / sub))
    room = linden_hall()
    pred_e, pred_s = eyring(room), sabine(room)
    sweep = Sweep(rate=RATE, f_low=20, f_high=20000, duration=sc.sweep_s, level_dbfs=-12,
                  silence_pre=0.5, silence_post=2.5)
    playback = sweep_signal(sweep)
    settings = {"scenario": "Linden Hall (fictional)", "quick": quick, "seed": SEED,
                "sweep": sweep.to_dict()}
    n_pos = len(sc.sources) * len(sc.receivers)
    steps = n_pos * 2 + 3 + len(sc.clips) + 1
    written: list[Path] = []

    def save_audio(path, data, inputs=(), extra=None):
        write_audio(path, data, RATE, force=True)
        write_provenance(path, inputs, {**settings, **(extra or {})}, force=True)
        written.append(path)

    with Progress(steps, "demo", enabled=False if quiet else None) as bar:
        # 1. The hall and its true responses (what a real hall would be).
        truths = {}
        for si, src in enumerate(sc.sources, 1):
            for ri, rcv in enumerate(sc.receivers, 1):
                res = synthesize(room, src, rcv, rate=RATE, seed=SEED + 10 * si + ri,
                                 length_s=2.5)
                truths[(si, ri)] = res.ir[:, 0]
                bar.update()
        # 2. Measure each position through the simulated chain and extract the IR.
        rng = np.random.default_rng(SEED)
        irs, qualities = {}, {}
        for (si, ri), h in truths.items():
            n_rec = playback.size + int(0.5 * RATE)
            device = SimulatedDevice(h, latency_samples=384, loopback=True,
                                     distortion=(0.02, 0.01),
                                     noise=pink_noise(n_rec, rng, -72.0))
            rec = run_measurement(device, playback, RATE, tail_s=0.5)
            name = f"S{si}R{ri}"
            if (si, ri) == (1, 1):
                save_audio(out / "recordings" / f"{name}_recording.wav", rec,
                           extra={"what": "simulated recording, mic + loopback"})
            ex = extract_ir(rec, RATE, sweep=sweep, reference_channel=1, length_s=2.4)
            irs[name], qualities[name] = ex.ir[:, 0], ex.quality
            save_audio(out / "irs" / f"{name}.wav", ex.ir, extra={"position": name,
                                                                  "quality": ex.quality})
            if (si, ri) == (1, 1):
                for k, hk in ex.harmonics.items():
                    save_audio(out / "harmonics" / f"{name}_h{k}.wav", hk,
                               extra={"position": name, "harmonic": k})
            bar.update()
        # 3. ISO 3382 analysis of all positions.
        study = analyse_arrays([(n, irs[n][:, None], RATE) for n in irs], bands="octave")
        for p in study.document["positions"]:
            p["file"] = f"irs/{p['file']}.wav"
        study.curves = {(f"irs/{k[0]}.wav", k[1]): v for k, v in study.curves.items()}
        bar.update()
        doc = study.document
        doc["settings"].update(settings)
        doc["prediction"] = {"eyring_s": {str(b): v for b, v in pred_e.items()},
                             "sabine_s": {str(b): v for b, v in pred_s.items()}}
        doc["quality"] = {n: _verdict(q) for n, q in qualities.items()}
        comparison = []
        for r in doc["average"]["bands"]:
            b = int(r["band_hz"]) if r["band_hz"] >= 63 else None
            m = r["t30_s"]["mean"]
            if b in pred_e and m is not None:
                comparison.append({"band_hz": r["band_hz"], "measured_t30_s": m,
                                   "eyring_s": pred_e[b], "sabine_s": pred_s[b],
                                   "deviation_pct": 100 * (m / pred_e[b] - 1)})
        doc["measured_vs_predicted"] = comparison
        write_json(out / "results.json", doc, force=True)
        write_provenance(out / "results.json", [], settings, force=True)
        write_text(out / "results.csv", csv_text(doc), force=True)
        write_provenance(out / "results.csv", [], settings, force=True)
        written += [out / "results.json", out / "results.csv"]
        bar.update()
        # 4. Renders: a measured stereo pair (two mics of source 1) and the synthetic twin.
        pair = np.stack([irs["S1R1"], irs["S1R2"]], axis=1)
        save_audio(out / "irs" / "measured_pair_S1.wav", pair,
                   extra={"what": "S1R1 (left) and S1R2 (right) as a stereo pair"})
        twin = synthesize(room, sc.sources[0], sc.receivers[0], rate=RATE,
                          receivers=Receivers.parse("spaced:0.6"), seed=SEED, length_s=2.4)
        save_audio(out / "irs" / "predicted_pair_S1.wav", twin.ir,
                   extra={"what": "synthetic prediction, spaced pair 0.6 m at R1"})
        bar.update()
        rs = RenderSettings(mix=0.85, normalize="truepeak", target=-1.0, subtype="PCM_24",
                            match_ir_level=True)
        renders = []
        for clip in sc.clips:
            dry = demo_clip(clip)
            if dry is None:
                log(f"note: demo clip {clip} is missing; skipped")
                bar.update()
                continue
            for label, ir_path in (("measured", out / "irs" / "measured_pair_S1.wav"),
                                   ("predicted", out / "irs" / "predicted_pair_S1.wav")):
                if label == "predicted" and clip != sc.clips[0]:
                    continue
                target = out / "renders" / f"{dry.stem}__{label}.wav"
                rep = render_file(dry, ir_path, target, rs, force=True)
                write_provenance(target, [dry, ir_path], rs.as_dict(), force=True)
                written.append(target)
                renders.append((target, rep))
            bar.update()
        # 5. The report.
        sections = _report_sections(room, sweep, doc["quality"], comparison, renders, out)
        extra = {"Eyring prediction": {float(b): v for b, v in pred_e.items()},
                 "Sabine prediction": {float(b): v for b, v in pred_s.items()}}
        page = html_report(study, title="Linden Hall — room acoustic study (demo)",
                           sections=sections, extra_series=extra)
        write_text(out / "report.html", page, force=True)
        write_provenance(out / "report.html", [], settings, force=True)
        written.append(out / "report.html")
        bar.update()

    summary = _summary(doc, time.monotonic() - t_start, out)
    write_json(out / "summary.json", summary, force=True)
    for line in _summary_lines(summary, doc):
        log(line)
    log("files:")
    for p in [out / "report.html", out / "results.json", out / "results.csv",
              out / "irs", out / "harmonics", out / "renders"]:
        log(f"  {p}")
    return summary


def _verdict(q: dict) -> dict:
    from .measure.quality import REQUIRED_INR_DB
    inr = min(q["ir"]["inr_db"])
    clipped = sum(q["recording"]["clipped_samples"])
    if clipped:
        v = "fail: clipped recording"
    elif inr >= REQUIRED_INR_DB["t30"]:
        v = ("pass: T30 evaluable (impulse-to-noise ratio (INR) "
             f"≥ {REQUIRED_INR_DB['t30']:.0f} dB)")
    elif inr >= REQUIRED_INR_DB["t20"]:
        v = "limited: T20 only"
    else:
        v = "fail: too noisy for decay times"
    return {"verdict": v, "inr_db": inr, "clipped_samples": clipped,
            "latency_samples": q.get("reference_latency_samples"),
            "warnings": q.get("warnings", [])}


def _report_sections(room, sweep, verdicts, comparison, renders, out):
    from .analysis.report import _html_table
    surf = [[s, room.surfaces[s], f"{room.surface_area(s):.0f}"] for s in room.surfaces]
    surf += [[f"{p.surface} (part)", p.material, f"{p.area_m2:.0f}"] for p in room.patches]
    desc = (f"<p>Linden Hall is a fictional multi-purpose hall invented for this demo: "
            f"{room.length:g} × {room.width:g} × {room.height:g} m, V = {room.volume:.0f} m³, "
            f"S = {room.total_area:.0f} m², 20 °C, 50 % RH. It is synthesized by roomconv's "
            "image-source model with a per-band diffuse tail.</p>"
            + _html_table(["surface", "material", "area m²"], surf))
    chain = (f"<p>Exponential sweep {sweep.f_low:g} Hz–{sweep.f_high / 1000:g} kHz, "
             f"{sweep.duration:g} s at {sweep.level_dbfs:g} dBFS, {sweep.silence_post:g} s of "
             "silence after it; a simulated loudspeaker with 2nd/3rd-order distortion "
             "(x + 0.02x² + 0.01x³), a sound card with 384 samples of latency and a loopback "
             "reference channel, and pink HVAC-like background noise at −72 dBFS. Each "
             "recording is deconvolved with the sweep's analytic inverse and divided by the "
             "loopback response.</p>")
    rows = [[n, v["verdict"], f"{v['inr_db']:.1f}", str(v["clipped_samples"]),
             str(v["latency_samples"])] for n, v in verdicts.items()]
    quality = _html_table(["position", "verdict", "INR dB", "clipped", "latency removed"],
                          rows)
    comp = _html_table(["band", "measured T30 s", "Eyring s", "Sabine s", "deviation %"],
                       [[f"{c['band_hz']:g}", f"{c['measured_t30_s']:.2f}",
                         f"{c['eyring_s']:.2f}", f"{c['sabine_s']:.2f}",
                         f"{c['deviation_pct']:+.1f}"] for c in comparison])
    rend = "<ul>" + "".join(
        f"<li>{html.escape(str(p.relative_to(out)))}: peak {r.peak_dbfs:+.1f} dBFS, true peak "
        f"{r.true_peak_dbtp:+.1f} dBTP</li>" for p, r in renders) + "</ul>"
    return [("The room", desc), ("Measurement chain", chain), ("Data quality", quality),
            ("Measured against predicted reverberation time", comp),
            ("Listening (A/B: measured vs predicted)", rend)]


def _summary(doc, seconds, out) -> dict:
    per_pos = {}
    for p in doc["positions"]:
        bands = {r["band_hz"]: r for r in p["bands"]}
        mids = [bands.get(500), bands.get(1000)]
        def mid(key):
            vals = [m[key] for m in mids if m and m[key] is not None]
            return float(np.mean(vals)) if len(vals) == 2 else None
        per_pos[Path(p["file"]).stem] = {"t30_mid_s": mid("t30_s"), "edt_mid_s": mid("edt_s"),
                                         "c80_mid_db": mid("c80_db"), "d50_mid": mid("d50")}
    return {"positions": per_pos, "average": doc["average"]["single_numbers"],
            "seconds": seconds, "output": str(out), "roomconv_version": __version__}


def _summary_lines(summary, doc):
    lines = ["", "Linden Hall (demo) — headline figures, mid-frequency (500 Hz / 1 kHz)",
             f"{'position':<10}{'T30 s':>8}{'EDT s':>8}{'C80 dB':>8}{'D50':>7}  quality"]
    fmt = lambda v, f: "—" if v is None else f.format(v)  # noqa: E731
    for name, v in summary["positions"].items():
        lines.append(f"{name:<10}{fmt(v['t30_mid_s'], '{:.2f}'):>8}"
                     f"{fmt(v['edt_mid_s'], '{:.2f}'):>8}{fmt(v['c80_mid_db'], '{:+.1f}'):>8}"
                     f"{fmt(v['d50_mid'], '{:.2f}'):>7}  {doc['quality'][name]['verdict']}")
    a = summary["average"]
    lines.append(f"{'average':<10}{fmt(a['t30_mid_s'], '{:.2f}'):>8}"
                 f"{fmt(a['edt_mid_s'], '{:.2f}'):>8}{fmt(a['c80_mid_db'], '{:+.1f}'):>8}"
                 f"{fmt(a['d50_mid'], '{:.2f}'):>7}")
    dev = [c["deviation_pct"] for c in doc["measured_vs_predicted"]]
    if dev:
        lines.append(f"measured T30 vs Eyring prediction: {min(dev):+.1f} % to {max(dev):+.1f} %"
                     " across bands")
    lines.append(f"done in {summary['seconds']:.1f} s")
    return lines


@command("demo", "run the built-in room study on our own demo hall")
def cmd_demo(a):
    run_demo(a.out, quick=a.quick, force=a.force, quiet=a.quiet,
             log=(lambda *_: None) if a.quiet else print)
    return 0


def _cfg(p):
    p.add_argument("--out", type=Path, default=Path("demo_out"), help="output folder (demo_out)")
    p.add_argument("--quick", action="store_true", help="a smaller study (for tests)")
    p.add_argument("--force", action="store_true", help="overwrite the demo's earlier files")


cmd_demo.configure = _cfg
