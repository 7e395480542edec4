"""The ``sweep``, ``extract`` and ``measure`` commands: parse, call the measurement jobs,
present the quality report."""

from __future__ import annotations

from pathlib import Path

from .. import safety, validate
from ..errors import InputError
from ..jobs import measure as jobs
from .common import Command, budget, confirm_caution, device_spec, note, opt, out, settings_of
from .display import progress_bar

__all__ = ["COMMANDS", "format_quality"]


def _sweep_options(p, level_default: float):
    v = validate
    g = p.add_argument_group("sweep")
    g.add_argument(
        "--rate",
        type=opt(v.sample_rate),
        default=48000,
        help=f"sample rate in Hz, {v.RATE_MIN}-{v.RATE_MAX} (default 48000)",
    )
    g.add_argument(
        "--low",
        type=opt(v.positive, "sweep start frequency", unit="Hz"),
        default=20.0,
        help="start frequency, Hz (20)",
    )
    g.add_argument(
        "--high",
        type=opt(v.positive, "sweep stop frequency", unit="Hz"),
        default=20000.0,
        help="stop frequency, Hz (20000; at most half the rate)",
    )
    g.add_argument(
        "--duration",
        type=opt(v.positive, "sweep duration", unit="s"),
        default=5.0,
        help="sweep length in seconds, without silences (5)",
    )
    g.add_argument(
        "--level",
        type=opt(v.in_range, "sweep level", -120.0, 0.0, unit="dBFS"),
        default=level_default,
        help=f"peak level in dBFS, -120 to 0 ({level_default:g})",
    )
    g.add_argument(
        "--pre",
        type=opt(v.non_negative, "silence before the sweep", unit="s"),
        default=0.5,
        help="silence before the first sweep, s (0.5)",
    )
    g.add_argument(
        "--silence",
        type=opt(v.non_negative, "silence after the sweep", unit="s"),
        default=2.0,
        help="silence after each sweep, s; longer than the room's decay (2)",
    )
    g.add_argument(
        "--repeat",
        type=opt(v.count, "number of sweeps", 1, 100),
        default=1,
        help="back-to-back sweeps to average, 1-100 (1)",
    )
    g.add_argument(
        "--fade-in",
        type=opt(v.non_negative, "sweep fade-in", unit="s"),
        default=0.05,
        help="fade-in, s (0.05)",
    )
    g.add_argument(
        "--fade-out",
        type=opt(v.non_negative, "sweep fade-out", unit="s"),
        default=0.01,
        help="fade-out, s (0.01)",
    )


def _sweep_budget(a, channels: int = 1) -> None:
    """Refuse, before anything is allocated, a sweep file longer than the memory budget; the
    refusal names the option that contributes most."""
    parts = {"--pre": a.pre, "--silence": a.repeat * a.silence, "--duration": a.repeat * a.duration}
    total = sum(parts.values())
    worst = max(parts, key=lambda k: parts[k])
    if a.repeat * (a.duration + a.silence) > 0.5 * total and a.repeat > 1:
        worst = f"{worst} (with --repeat {a.repeat})"
    budget(worst, validate.memory_budget, total * a.rate, "the sweep file", channels=channels)
    if a.fade_in + a.fade_out > a.duration:
        raise InputError(
            f"--fade-in/--fade-out: fades of {a.fade_in:g} s and {a.fade_out:g} s "
            f"do not fit in a {a.duration:g} s sweep (shorten them)"
        )


#: Which options set the value a sweep refusal is about (the library names values only).
_SWEEP_OPTIONS = (
    ("sweep band", "--low/--high"),
    ("sweep end", "--high/--rate"),
    ("sweep duration", "--duration"),
    ("fades", "--fade-in/--fade-out"),
    ("silence", "--pre/--silence"),
    ("number of sweeps", "--repeat"),
    ("sample rate", "--rate"),
    ("level", "--level"),
)


def _sweep_from_args(a):
    from ..measure.sweep import Sweep

    try:
        return Sweep(
            rate=a.rate,
            f_low=a.low,
            f_high=a.high,
            duration=a.duration,
            level_dbfs=a.level,
            fade_in=a.fade_in,
            fade_out=a.fade_out,
            silence_pre=a.pre,
            silence_post=a.silence,
            repeats=a.repeat,
        )
    except InputError as exc:
        text = str(exc)
        option = next((o for key, o in _SWEEP_OPTIONS if text.startswith(key)), None)
        raise (InputError(f"{option}: {text}") if option else exc) from None


def format_quality(quality: dict) -> str:
    """The quality report as a short readable text block (channels counted from 1)."""
    from ..measure.distortion import describe_levels

    lines = ["Quality report"]
    rec = quality.get("recording", {})
    for c, pk in enumerate(rec.get("peak_dbfs", [])):
        nf = rec.get("noise_floor_dbfs")
        nf_txt = f", noise floor {nf[c]:.1f} dBFS" if nf else ""
        lines.append(
            f"  input {c + 1}: peak {pk:.1f} dBFS, clipped samples "
            f"{rec['clipped_samples'][c]}{nf_txt}"
        )
    ir = quality.get("ir", {})
    for c, inr in enumerate(ir.get("inr_db", [])):
        lines.append(
            f"  IR {c + 1}: impulse-to-noise ratio (INR) {inr:.1f} dB, peak at sample "
            f"{ir['peak_sample'][c]}"
        )
    for c, lv in enumerate((quality.get("distortion") or {}).get("channels", [])):
        lines.append(f"  IR {c + 1} harmonic distortion (dB re linear): {describe_levels(lv)}")
    if "reference_latency_samples" in quality:
        lines.append(f"  loopback latency removed: {quality['reference_latency_samples']} samples")
    if "repeats" in quality:
        r = quality["repeats"]
        lines.append(
            f"  {r['count']} repeats averaged: noise down {r['snr_gain_db']:.1f} dB "
            f"(theory {r['expected_snr_gain_db']:.1f} dB), repeat mismatch "
            f"{r['repeat_mismatch_db']:.1f} dB"
        )
    lines.append(f"  method: {quality.get('method')}, band {quality.get('band_hz')} Hz")
    if quality.get("trimmed_samples"):
        lines.append(f"  trimmed {quality['trimmed_samples']} leading samples")
    for w in quality.get("warnings", []):
        lines.append(f"  warning: {w}")
    return "\n".join(lines)


# --- sweep ---------------------------------------------------------------------------------
def run_sweep(a):
    """Run ``roomconv sweep``: write an exponential sweep and its description
    (:func:`roomconv.jobs.measure.write_sweep`).

    Parameters
    ----------
    a : argparse.Namespace
        The parsed options of the command.

    Returns
    -------
    int
        The exit code: 0 on success (a refused input raises and exits with 2).
    """
    _sweep_budget(a)
    s = _sweep_from_args(a)
    jobs.write_sweep(a.output, s, subtype=a.subtype, force=a.force)
    out(
        f"wrote {a.output} ({s.n_total / s.rate:.2f} s, {s.repeats} sweep(s) "
        f"{s.f_low:g}-{s.f_high:g} Hz at {s.level_dbfs:g} dBFS) and its sidecar",
        a,
    )
    return 0


def configure_sweep(p):
    """Add the options of ``roomconv sweep`` to its sub-parser ``p`` (an argparse parser)."""
    p.add_argument("output", type=Path, help="the sweep WAV to write")
    _sweep_options(p, level_default=-6.0)
    p.add_argument("--subtype", default="FLOAT", help="WAV sample format (FLOAT, PCM_24, ...)")
    p.add_argument("--force", action="store_true", help="replace an existing output")


# --- extract -------------------------------------------------------------------------------
def _extract_options(p):
    p.add_argument(
        "--reference-channel",
        type=opt(validate.count, "reference channel", 1, validate.MAX_CHANNEL),
        default=None,
        metavar="N",
        help="channel of the recording that holds the loopback, counting from 1",
    )
    p.add_argument(
        "--length",
        type=opt(validate.positive, "response length", 600.0, unit="s"),
        default=None,
        metavar="S",
        help="IR length in seconds, at most 600 (default: the silence after the sweep)",
    )
    p.add_argument(
        "--harmonics",
        type=Path,
        default=None,
        metavar="DIR",
        help="also write harmonic IRs (orders 2-5) into DIR",
    )
    p.add_argument("--trim", action="store_true", help="cut leading silence before the onset")
    p.add_argument(
        "--json", type=Path, default=None, metavar="FILE", help="write the quality report as JSON"
    )
    p.add_argument(
        "--allow-clipped",
        action="store_true",
        help="accept a clipped recording (results will be distorted)",
    )
    p.add_argument("--force", action="store_true", help="replace existing outputs")


def _present(res, a) -> None:
    for n in res.notes:
        note(n)
    out(format_quality(res.quality), a)
    ex = res.extraction
    if ex.trimmed_samples:
        out(
            f"trimmed {ex.trimmed_samples} samples ({1000 * ex.trimmed_samples / ex.rate:.1f} ms)"
            " of leading silence",
            a,
        )
    out(f"wrote {a.output} ({ex.ir.shape[1]} channel(s), {ex.ir.shape[0] / ex.rate:.2f} s)", a)


def _named(exc: InputError) -> InputError:
    """The job's refusal with the option it comes from, where one option is to blame."""
    text = str(exc)
    if text.startswith("reference channel"):
        return InputError(f"--reference-channel: {text}")
    if "the simulated room is at" in text:
        return InputError(f"{text} (pass --rate with the room's rate)")
    if "is clipped on channel" in text:
        return InputError(f"{text}: --allow-clipped accepts it")
    return exc


def run_extract(a):
    """Run ``roomconv extract``: impulse responses from a recording on disk
    (:func:`roomconv.jobs.measure.extract_recording`), with their quality figures.

    Parameters
    ----------
    a : argparse.Namespace
        The parsed options of the command.

    Returns
    -------
    int
        The exit code: 0 on success (a refused input raises and exits with 2).
    """
    with progress_bar("extracting", quiet=a.quiet) as progress:
        try:
            res = jobs.extract_recording(
                a.recording,
                a.sweep,
                a.output,
                reference_channel=a.reference_channel,
                length_s=a.length,
                trim=a.trim,
                harmonics_dir=a.harmonics,
                json_path=a.json,
                allow_clipped=a.allow_clipped,
                force=a.force,
                settings=settings_of(a),
                progress=progress,
            )
        except InputError as exc:
            raise _named(exc) from None
    _present(res, a)
    return 0


def configure_extract(p):
    """Add the options of ``roomconv extract`` to its sub-parser ``p`` (an argparse parser)."""
    p.add_argument("recording", type=Path, help="the recorded sweep (one or more channels)")
    p.add_argument("--sweep", type=Path, required=True, help="the sweep WAV that was played")
    p.add_argument("-o", "--output", type=Path, required=True, help="IR WAV to write")
    _extract_options(p)


# --- measure -------------------------------------------------------------------------------
def run_measure(a):
    """Run ``roomconv measure``: play a sweep and record it through a sound card, or
    through a simulated room, after the hearing caution
    (:func:`roomconv.jobs.measure.measure_position`).

    Parameters
    ----------
    a : argparse.Namespace
        The parsed options of the command.

    Returns
    -------
    int
        The exit code: 0 on success (a refused input raises and exits with 2).
    """
    budget("--level", safety.check_level, a.level)
    _sweep_budget(a, channels=1 + len(a.input_channels) if a.simulate is None else 2)
    budget("--sim-latency", validate.memory_budget, a.sim_latency, "this simulated latency")
    s = _sweep_from_args(a)
    with progress_bar("measuring", quiet=a.quiet) as progress:
        try:
            res = jobs.measure_position(
                a.output,
                s,
                simulate=a.simulate,
                confirm=None if a.simulate is not None else confirm_caution(a),
                device=a.device,
                output_channel=a.output_channel,
                input_channels=a.input_channels,
                reference_channel=a.reference_channel,
                sim_latency_samples=a.sim_latency,
                sim_noise_dbfs=a.sim_noise,
                seed=a.seed,
                length_s=a.length,
                trim=a.trim,
                harmonics_dir=a.harmonics,
                json_path=a.json,
                save_recording=a.save_recording,
                allow_clipped=a.allow_clipped,
                force=a.force,
                settings=settings_of(a),
                progress=progress,
            )
        except InputError as exc:
            raise _named(exc) from None
    _present(res, a)
    return 0


def configure_measure(p):
    """Add the options of ``roomconv measure`` to its sub-parser ``p`` (an argparse parser)."""
    p.add_argument("output", type=Path, help="IR WAV to write")
    _sweep_options(p, level_default=safety.START_LEVEL_DBFS)
    g = p.add_argument_group("device")
    g.add_argument(
        "--device",
        type=device_spec,
        default=None,
        help="PortAudio device: its index, or part of its name",
    )
    g.add_argument(
        "--output-channel",
        type=opt(validate.count, "output channel", 1, validate.MAX_CHANNEL),
        default=1,
        help="output channel, counting from 1 (1)",
    )
    g.add_argument(
        "--input-channels",
        type=opt(validate.channel_list, "input channels"),
        default=(1,),
        help="input channels counting from 1, comma-separated (1); include the loopback",
    )
    g.add_argument(
        "--yes", action="store_true", help="confirm you have read the hearing and equipment caution"
    )
    g.add_argument(
        "--save-recording",
        type=Path,
        default=None,
        metavar="FILE",
        help="also keep the raw recording",
    )
    g = p.add_argument_group("rehearsal without a sound card")
    g.add_argument(
        "--simulate",
        type=Path,
        default=None,
        metavar="IR.wav",
        help="measure a simulated room with this response instead of a sound card; "
        "the simulated loopback, if any, is the channel after the room's",
    )
    g.add_argument(
        "--sim-noise",
        type=opt(validate.in_range, "simulated noise level", -300.0, 0.0, unit="dBFS"),
        default=-90.0,
        help="simulated noise, dBFS, -300 to 0 (-90)",
    )
    g.add_argument(
        "--sim-latency",
        type=opt(validate.count, "simulated latency", 0),
        default=0,
        help="simulated latency, samples (0)",
    )
    g.add_argument(
        "--seed",
        type=opt(validate.count, "noise seed", 0, 2**32 - 1),
        default=0,
        help="noise seed for --simulate (0)",
    )
    _extract_options(p)


COMMANDS = [
    Command(
        "sweep",
        "write an exponential sine sweep (WAV + .sweep.json sidecar)",
        configure_sweep,
        run_sweep,
    ),
    Command(
        "extract",
        "deconvolve a recorded sweep into an impulse response",
        configure_extract,
        run_extract,
    ),
    Command(
        "measure",
        "play a sweep through a sound card, record and extract the IR",
        configure_measure,
        run_measure,
    ),
]
