"""The ``render``, ``batch`` and ``live`` commands."""

from __future__ import annotations

import sys
from pathlib import Path

from .. import validate
from ..errors import InputError
from ..jobs import render as jobs
from ..sofa import is_sofa
from .common import Command, budget, confirm_caution, device_spec, note, opt, out
from .display import BatchView, progress_bar

__all__ = ["COMMANDS", "render_options", "settings_from_args", "describe_report"]


def render_options(p):
    """Add the rendering options that ``render`` and ``batch`` share (mix, pre-delay, gain,
    normalization, format, routing) to the parser ``p``.
    """
    v = validate
    g = p.add_argument_group("rendering")
    g.add_argument(
        "--mix",
        type=opt(v.in_range, "wet/dry mix", 0.0, 1.0),
        default=1.0,
        help="wet/dry: 0 dry only … 1 wet only (1). The response is first scaled "
        "to unit energy per output, so wet and dry are level-matched for "
        "broadband sound and the mix alone sets their balance "
        "(20·log10(mix/(1−mix)) dB, printed); see --keep-ir-level",
    )
    g.add_argument(
        "--keep-ir-level",
        action="store_true",
        help="use the response at its own level (no unit-energy scaling); the "
        "wet/dry balance then also depends on the file's level",
    )
    g.add_argument(
        "--predelay",
        type=opt(v.non_negative, "pre-delay", unit="ms"),
        default=0.0,
        metavar="MS",
        help="delay of the wet signal, ms (0; limited by a 2 GiB memory budget)",
    )
    g.add_argument(
        "--gain",
        type=opt(v.in_range, "output gain", -100.0, 60.0, unit="dB"),
        default=0.0,
        metavar="DB",
        help="output gain, -100 to +60 dB (0)",
    )
    g.add_argument(
        "--normalize",
        choices=("none", "peak", "truepeak", "loudness"),
        default=None,
        help="normalize the output (none; --target alone implies loudness)",
    )
    g.add_argument(
        "--target",
        type=opt(v.in_range, "normalization target", -100.0, 0.0),
        default=None,
        metavar="VALUE",
        help="normalization target: dBFS (peak, -1), dBTP (truepeak, -1) or LUFS "
        "(loudness, -23); -100 to 0, loudness -60 to 0. Loudness is measured "
        "again after the gain and corrected until within ±0.05 LU. Given "
        "without --normalize it implies --normalize loudness (and says so)",
    )
    g.add_argument(
        "--subtype",
        default="FLOAT",
        help="output sample format: FLOAT (default), DOUBLE, PCM_24, PCM_16 …; "
        "integer formats get TPDF dither",
    )
    g.add_argument(
        "--precision",
        choices=("auto", "float64", "float32"),
        default="auto",
        help="engine precision: auto = float32 (about -130 dB error, faster) "
        "unless --subtype DOUBLE, which computes in float64",
    )
    g.add_argument(
        "--outputs",
        type=opt(v.count, "number of outputs", 1, 64),
        default=None,
        metavar="M",
        help="general matrix routing: the IR holds inputs×M channels, input-major",
    )
    g.add_argument(
        "--shared", action="store_true", help="use the IR's first channel for every input"
    )
    g.add_argument(
        "--no-tail",
        action="store_true",
        help="cut the output at the dry file's length (the tail is kept by default)",
    )
    g.add_argument("--no-dither", action="store_true", help="no dither for integer formats")
    g.add_argument(
        "--measurement",
        type=opt(v.count, "measurement", 1, 1_000_000),
        default=None,
        metavar="N",
        help="for a SOFA response set (.sofa): the measurement to render through, counted "
        "from 1; its receivers are the response's channels (a set of one needs none)",
    )
    g.add_argument("--force", action="store_true", help="replace existing outputs")


def settings_from_args(a):
    """The render settings from the options; ``--target`` alone implies loudness."""
    from ..render.offline import LOUDNESS_TARGET_MIN, RenderSettings

    normalize = a.normalize
    if normalize is None:
        normalize = "none"
        if a.target is not None:
            # A target nobody acts on would be silently ignored; loudness is what a bare
            # target most often means, and the note says so.
            normalize = "loudness"
            note(
                f"--target {a.target:g} without --normalize: normalizing loudness to "
                f"{a.target:g} LUFS"
            )
    elif normalize == "none" and a.target is not None:
        raise InputError("--target: given with --normalize none; drop one of the two")
    if normalize == "loudness" and a.target is not None:
        budget(
            "--target",
            validate.in_range,
            a.target,
            "loudness target",
            LOUDNESS_TARGET_MIN,
            0.0,
            unit="LUFS",
        )
    return RenderSettings(
        mix=a.mix,
        predelay_ms=a.predelay,
        gain_db=a.gain,
        normalize=normalize,
        target=a.target,
        subtype=a.subtype.upper(),
        precision=a.precision,
        outputs=a.outputs,
        shared=a.shared,
        keep_tail=not a.no_tail,
        dither=not a.no_dither,
        match_ir_level=not a.keep_ir_level,
        ir_measurement=a.measurement,
    ).check()


def describe_report(r) -> str:
    """One line on what a render wrote."""
    from ..render.mix import describe_balance

    parts = [
        f"wrote {r.output}: {r.channels} channel(s), {r.frames / r.rate:.2f} s at "
        f"{r.rate} Hz, routing {r.routing}, peak {r.peak_dbfs:+.1f} dBFS"
    ]
    if r.true_peak_dbtp is not None:
        parts.append(f"true peak {r.true_peak_dbtp:+.1f} dBTP")
    if r.loudness_lufs is not None:
        parts.append(f"loudness {r.loudness_lufs:.2f} LUFS (measured)")
    if r.gain_db:
        parts.append(f"gain {r.gain_db:+.1f} dB")
    if r.wet_dry_db is not None:
        parts.append(f"wet/dry balance {describe_balance(r.wet_dry_db)}")
    if r.ir_resampled_from:
        parts.append(f"IR resampled from {r.ir_resampled_from} Hz")
    return ", ".join(parts)


def _named(exc: InputError, ir=None) -> InputError:
    """The job's refusal with the options that change what it is about."""
    text = str(exc)
    if "cannot route" in text:
        return InputError(f"{text} (see --shared and --outputs)")
    if "Dask cluster" in text:
        return InputError(f"--scheduler: {text}")
    return _sofa_named(exc, ir)


def _sofa_named(exc: InputError, ir=None) -> InputError:
    """A refusal about a SOFA response set with the option it is about."""
    text = str(exc)
    if "measurement" in text and (
        "choose one by its number" in text
        or "has no measurement" in text
        or "applies to SOFA" in text
    ):
        return InputError(f"--measurement: {text}")
    if ir is not None and is_sofa(ir) and text.startswith(f"{ir}: "):
        # A SOFA set's other refusals (convention, data type, layout) are about --ir.
        return InputError(f"--ir {text}")
    return exc


def _labelled_measurement(a) -> None:
    """``--source``/``--receiver``: the SOFA measurement with those study ids."""
    from ..sofa import measurement_number

    if a.source is None and a.receiver is None:
        return
    if a.measurement is not None:
        raise InputError("--measurement: give it or --source/--receiver, not both")
    a.measurement = budget(
        "--source/--receiver",
        measurement_number,
        a.ir,
        source=a.source,
        receiver=a.receiver,
    )


def run_render(a):
    """Run ``roomconv render``: one dry file through one response
    (:func:`roomconv.jobs.render.render_one`).

    Parameters
    ----------
    a : argparse.Namespace
        The parsed options of the command.

    Returns
    -------
    int
        The exit code: 0 on success (a refused input raises and exits with 2).
    """
    _labelled_measurement(a)
    s = settings_from_args(a)
    budget("--predelay", jobs.check_predelay, a.predelay, [a.dry])
    with progress_bar("rendering", quiet=a.quiet) as progress:
        try:
            rep = jobs.render_one(a.dry, a.ir, a.output, s, force=a.force, progress=progress)
        except InputError as exc:
            raise _named(exc, a.ir) from None
    for w in rep.warnings:
        note(f"warning: {w}")
    out(describe_report(rep), a)
    return 0


def configure_render(p):
    """Add the options of ``roomconv render`` to its sub-parser ``p`` (an argparse parser)."""
    p.add_argument("dry", type=Path, help="dry recording")
    p.add_argument("--ir", type=Path, required=True, help="impulse response")
    p.add_argument("-o", "--output", type=Path, required=True, help="wet file to write")
    p.add_argument(
        "--source",
        default=None,
        metavar="ID",
        help="for a SOFA set written from a study: the measurement of this source id",
    )
    p.add_argument(
        "--receiver",
        default=None,
        metavar="ID",
        help="for a SOFA set written from a study: the measurement of this receiver id",
    )
    render_options(p)


def run_batch(a):
    """Run ``roomconv batch``: every dry file through every response
    (:func:`roomconv.jobs.render.run_batch`); the exit code is 0 when nothing failed,
    2 when every failure was bad input, else 1.

    Parameters
    ----------
    a : argparse.Namespace
        The parsed options of the command.

    Returns
    -------
    int
        The exit code: 0 on success (a refused input raises and exits with 2).
    """
    s = settings_from_args(a)
    budget("--predelay", jobs.check_predelay, a.predelay, a.dry)
    view = BatchView(len(a.dry) * len(a.ir), quiet=a.quiet)
    try:
        with view:
            res = jobs.run_batch(
                a.dry,
                a.ir,
                a.out_dir,
                s,
                workers=a.workers,
                scheduler=a.scheduler,
                force=a.force,
                on_event=view,
            )
    except InputError as exc:
        raise _named(exc) from None
    failed = res.failed
    out(
        f"batch: {res.count('done')} rendered, {res.count('skipped')} already finished, "
        f"{len(failed)} failed, {len(res.outcomes)} in all → {res.out_dir}",
        a,
    )
    for o in failed:
        hint = " (pass --force to replace it)" if "other inputs or settings" in o.message else ""
        note(f"failed: {o.job.name}: {o.message}{hint}")
    return res.exit_code


def configure_batch(p):
    """Add the options of ``roomconv batch`` to its sub-parser ``p`` (an argparse parser)."""
    p.add_argument("dry", nargs="+", type=Path, help="dry files")
    p.add_argument("--ir", nargs="+", type=Path, required=True, help="impulse responses")
    p.add_argument("--out-dir", type=Path, required=True, help="folder for <dry>__<ir>.wav")
    p.add_argument(
        "--workers",
        type=opt(validate.count, "number of workers", 1, 256),
        default=None,
        help="local processes, 1-256 (all cores)",
    )
    p.add_argument(
        "--scheduler",
        default=None,
        metavar="tcp://HOST:PORT",
        help="run on a Dask distributed cluster instead of local processes",
    )
    render_options(p)


def _prepare_live(a):
    """The live job's setup from the parsed options (the SOFA measurement included)."""
    return jobs.prepare_live(
        a.ir,
        rate_hz=a.rate,
        device=a.device,
        block_samples=a.block,
        input_channels=a.input_channels,
        output_channels=a.output_channels,
        mix=a.mix,
        gain_db=a.gain,
        ceiling_dbfs=a.ceiling,
        precision=a.precision,
        match_ir_level=not a.keep_ir_level,
        measurement=a.measurement,
    )


def run_live(a):
    """Run ``roomconv live``: convolve a sound-card input in real time, after the hearing
    caution, with a capped and ramped output (:func:`roomconv.jobs.render.run_live`).

    Parameters
    ----------
    a : argparse.Namespace
        The parsed options of the command.

    Returns
    -------
    int
        The exit code: 0 on success (a refused input raises and exits with 2).
    """
    from ..render.mix import describe_balance

    budget("--ceiling", jobs.check_ceiling, a.ceiling)
    try:
        setup = _prepare_live(a)
    except InputError as exc:
        raise _sofa_named(exc, a.ir) from None
    confirm_caution(a)()
    proc, rate = setup.processor, setup.rate_hz
    n_st = len(proc.engine.stages)
    note(
        f"live: {proc.block}-sample blocks at {rate} Hz, {n_st} stage{'s' if n_st > 1 else ''}, "
        f"routing {proc.routing.name}, wet/dry balance {describe_balance(proc.wet_dry_db)}; "
        "Ctrl-C stops"
    )

    def meter(st):
        if a.quiet:
            return
        sys.stderr.write(
            f"\rin {st.in_peak_dbfs:6.1f} dBFS  out {st.out_peak_dbfs:6.1f} dBFS  "
            f"limiter {st.limiter_db:4.1f} dB  dropouts {st.dropouts}  "
        )
        sys.stderr.flush()

    try:
        st = jobs.run_live(setup, duration_s=a.duration, on_meter=meter)
    except InputError as exc:
        if "output channel" in str(exc):
            raise InputError(f"--output-channels: {exc}") from None
        raise
    per_block = proc.block / rate
    out(
        f"\nlive: {st.frames / rate:.1f} s processed, {st.dropouts} dropouts, peak out "
        f"{st.out_peak_dbfs:.1f} dBFS, limiter max {st.limiter_db:.1f} dB, compute mean "
        f"{100 * st.compute.mean_s / per_block:.1f} % / p99 "
        f"{100 * st.compute.percentile_s(99) / per_block:.1f} % of a block"
        + (f", {st.nonfinite} non-finite blocks silenced" if st.nonfinite else ""),
        a,
    )
    return 0


def configure_live(p):
    """Add the options of ``roomconv live`` to its sub-parser ``p`` (an argparse parser)."""
    v = validate
    p.add_argument("--ir", type=Path, required=True, help="impulse response")
    p.add_argument(
        "--block",
        type=opt(v.count, "block size", 32, 1024),
        default=128,
        help="block size, 32-1024 samples (128)",
    )
    p.add_argument(
        "--rate",
        type=opt(v.sample_rate),
        default=None,
        help=f"sample rate, {v.RATE_MIN}-{v.RATE_MAX} Hz (the device's default)",
    )
    p.add_argument(
        "--device",
        type=device_spec,
        default=None,
        help="PortAudio device: its index, or part of its name",
    )
    p.add_argument(
        "--input-channels",
        type=opt(v.channel_list, "input channels"),
        default=(1,),
        help="inputs counting from 1, comma-separated (1)",
    )
    p.add_argument(
        "--output-channels",
        type=opt(v.channel_list, "output channels"),
        default=(1,),
        help="outputs counting from 1 (1)",
    )
    p.add_argument(
        "--mix",
        type=opt(v.in_range, "wet/dry mix", 0.0, 1.0),
        default=1.0,
        help="wet/dry 0..1 (1), on level-matched wet and dry as for render",
    )
    p.add_argument(
        "--keep-ir-level",
        action="store_true",
        help="use the response at its own level (no unit-energy scaling)",
    )
    p.add_argument(
        "--gain",
        type=opt(v.in_range, "output gain", -100.0, 20.0, unit="dB"),
        default=-6.0,
        help="output gain, -100 to +20 dB (-6); the output is limited to the ceiling anyway",
    )
    p.add_argument(
        "--ceiling",
        type=opt(v.in_range, "limiter ceiling", -60.0, -1.0, unit="dBFS"),
        default=-1.0,
        help="limiter ceiling, -60 to -1 dBFS (-1)",
    )
    p.add_argument(
        "--precision",
        choices=("auto", "float64", "float32"),
        default="auto",
        help="engine precision: auto = float32, as the sound card stream is "
        "float32 (about -135 dB error); float64 is exact to about -300 dB",
    )
    p.add_argument(
        "--duration",
        type=opt(v.positive, "live duration", 86400.0, unit="s"),
        default=None,
        help="stop after S seconds (at most 86400)",
    )
    p.add_argument(
        "--measurement",
        type=opt(v.count, "measurement", 1, 1_000_000),
        default=None,
        metavar="N",
        help="for a SOFA response set (.sofa): the measurement, counted from 1",
    )
    p.add_argument(
        "--yes", action="store_true", help="confirm you have read the hearing and equipment caution"
    )


COMMANDS = [
    Command(
        "render", "render a dry recording through an impulse response", configure_render, run_render
    ),
    Command(
        "batch",
        "render many dry files through many IRs (local pool or Dask cluster)",
        configure_batch,
        run_batch,
    ),
    Command(
        "live", "convolve a sound-card input with an IR in real time", configure_live, run_live
    ),
]
