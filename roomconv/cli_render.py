"""The ``render``, ``batch`` and ``live`` commands."""

from __future__ import annotations

from pathlib import Path

from .audio import WriteGuard, sidecar_path, write_provenance
from .cli import _note, _out, command, device_spec
from .progress import Progress


def render_options(p):
    from . import validate as v
    from .cli import opt
    g = p.add_argument_group("rendering")
    g.add_argument("--mix", type=opt(v.in_range, "wet/dry mix", 0.0, 1.0), default=1.0,
                   help="wet/dry: 0 dry only … 1 wet only (1). The response is first scaled "
                        "to unit energy per output, so wet and dry are level-matched for "
                        "broadband sound and the mix alone sets their balance "
                        "(20·log10(mix/(1−mix)) dB, printed); see --keep-ir-level")
    g.add_argument("--keep-ir-level", action="store_true",
                   help="use the response at its own level (no unit-energy scaling); the "
                        "wet/dry balance then also depends on the file's level")
    g.add_argument("--predelay", type=opt(v.non_negative, "pre-delay", unit="ms"), default=0.0,
                   metavar="MS",
                   help="delay of the wet signal, ms (0; limited by a 2 GiB memory budget)")
    g.add_argument("--gain", type=opt(v.in_range, "output gain", -100.0, 60.0, unit="dB"),
                   default=0.0, metavar="DB", help="output gain, -100 to +60 dB (0)")
    g.add_argument("--normalize", choices=("none", "peak", "truepeak", "loudness"),
                   default=None,
                   help="normalize the output (none; --target alone implies loudness)")
    g.add_argument("--target", type=opt(v.in_range, "normalization target", -100.0, 0.0),
                   default=None, metavar="VALUE",
                   help="normalization target: dBFS (peak, -1), dBTP (truepeak, -1) or LUFS "
                        "(loudness, -23); -100 to 0, loudness -60 to 0. Loudness is measured "
                        "again after the gain and corrected until within ±0.05 LU. Given "
                        "without --normalize it implies --normalize loudness (and says so)")
    g.add_argument("--subtype", default="FLOAT",
                   help="output sample format: FLOAT (default), DOUBLE, PCM_24, PCM_16 …; "
                        "integer formats get TPDF dither")
    g.add_argument("--precision", choices=("auto", "float64", "float32"), default="auto",
                   help="engine precision: auto = float32 (about -130 dB error, faster) "
                        "unless --subtype DOUBLE, which computes in float64")
    g.add_argument("--outputs", type=opt(v.count, "number of outputs", 1, 64), default=None,
                   metavar="M",
                   help="general matrix routing: the IR holds inputs×M channels, input-major")
    g.add_argument("--shared", action="store_true",
                   help="use the IR's first channel for every input")
    g.add_argument("--no-tail", action="store_true",
                   help="cut the output at the dry file's length (the tail is kept by default)")
    g.add_argument("--no-dither", action="store_true", help="no dither for integer formats")
    g.add_argument("--force", action="store_true", help="replace existing outputs")


def settings_from_args(a):
    from .render.offline import RenderSettings
    normalize = a.normalize
    if normalize is None:
        normalize = "none"
        if a.target is not None:
            # A target nobody acts on would be silently ignored; loudness is what a bare
            # target most often means, and the note says so.
            normalize = "loudness"
            _note(f"--target {a.target:g} without --normalize: normalizing loudness to "
                  f"{a.target:g} LUFS")
    elif normalize == "none" and a.target is not None:
        from .errors import InputError
        raise InputError("--target: given with --normalize none; drop one of the two")
    if normalize == "loudness" and a.target is not None:
        from . import validate
        from .cli import budget
        from .render.offline import LOUDNESS_TARGET_MIN
        budget("--target", validate.in_range, a.target, "loudness target",
               LOUDNESS_TARGET_MIN, 0.0, unit="LUFS")
    return RenderSettings(mix=a.mix, predelay_ms=a.predelay, gain_db=a.gain,
                          normalize=normalize, target=a.target, subtype=a.subtype.upper(),
                          precision=a.precision, outputs=a.outputs, shared=a.shared,
                          keep_tail=not a.no_tail, dither=not a.no_dither,
                          match_ir_level=not a.keep_ir_level).check()


def check_predelay(a, paths) -> None:
    """Refuse a pre-delay whose buffer would not fit, at the rate of the files it applies to,
    before any work (files that cannot be read are reported later by the render itself)."""
    from .audio import audio_info
    from .cli import budget
    from . import validate
    for p in paths:
        try:
            info = audio_info(p)
        except Exception:  # noqa: BLE001 - unreadable inputs get their own message later
            continue
        budget("--predelay", validate.seconds_budget, a.predelay / 1000.0, info.samplerate,
               "this pre-delay", channels=info.channels)


def describe_report(r) -> str:
    from .render.mix import describe_balance
    parts = [f"wrote {r.output}: {r.channels} channel(s), {r.frames / r.rate:.2f} s at "
             f"{r.rate} Hz, routing {r.routing}, peak {r.peak_dbfs:+.1f} dBFS"]
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


@command("render", "render a dry recording through an impulse response")
def cmd_render(a):
    from .render.offline import render_file
    s = settings_from_args(a)
    check_predelay(a, [a.dry])
    # Plan the output and its provenance sidecar before any work, against both inputs.
    guard = WriteGuard([a.dry, a.ir], force=a.force)
    guard.file(a.output)
    guard.file(sidecar_path(a.output, "provenance"))
    with Progress(1.0, "rendering", enabled=False if a.quiet else None) as bar:
        def tick(frac, bar=bar):
            bar.update(frac - bar.done)
        rep = render_file(a.dry, a.ir, a.output, s, force=a.force, progress=tick, guard=guard)
    write_provenance(a.output, [a.dry, a.ir], s.as_dict(), guard=guard)
    for w in rep.warnings:
        _note(f"warning: {w}")
    _out(describe_report(rep), a)
    return 0


def _cfg_render(p):
    p.add_argument("dry", type=Path, help="dry recording")
    p.add_argument("--ir", type=Path, required=True, help="impulse response")
    p.add_argument("-o", "--output", type=Path, required=True, help="wet file to write")
    render_options(p)


cmd_render.configure = _cfg_render


class BatchDisplay:
    """Overall bar plus one line per running job (redrawn in place on a terminal)."""

    def __init__(self, total: int, stream=None, enabled: bool | None = None):
        import sys
        self.stream = stream or sys.stderr
        self.enabled = self.stream.isatty() if enabled is None else enabled
        self.total, self.finished = total, 0
        self.active: dict[str, float] = {}
        self._lines = 0
        self._last = 0.0

    def __call__(self, kind, payload):
        import time as _t
        if kind == "start":
            self.active[payload.name] = 0.0
        elif kind == "progress":
            name, frac = payload
            if name in self.active:
                self.active[name] = frac
        elif kind in ("done", "skip"):
            self.finished += 1
            self.active.pop(payload.job.name, None)
            mark = {"done": "ok", "skipped": "skip", "failed": "FAIL"}[payload.status]
            self._clear()
            line = f"[{self.finished}/{self.total}] {mark:<4} {payload.job.name}"
            if payload.message:
                line += f": {payload.message}"
            print(line, file=self.stream)
        now = _t.monotonic()
        if self.enabled and (now - self._last > 0.1 or kind != "progress"):
            self._last = now
            self._draw()

    def _clear(self):
        if self.enabled and self._lines:
            self.stream.write(f"\x1b[{self._lines}F\x1b[J")
            self._lines = 0

    def _draw(self):
        self._clear()
        lines = []
        for name, frac in sorted(self.active.items()):
            fill = int(frac * 20)
            lines.append(f"  {name[:40]:<40} [{'#' * fill}{'.' * (20 - fill)}] {100 * frac:3.0f}%")
        frac = self.finished / max(self.total, 1)
        fill = int(frac * 30)
        lines.append(f"overall [{'#' * fill}{'.' * (30 - fill)}] {self.finished}/{self.total}")
        self.stream.write("\n".join(lines) + "\n")
        self.stream.flush()
        self._lines = len(lines)

    def close(self):
        if self.enabled:
            self._draw()


@command("batch", "render many dry files through many IRs (local pool or Dask cluster)")
def cmd_batch(a):
    from .render.batch import dask_executor, local_executor, plan_jobs, run_batch
    s = settings_from_args(a)
    check_predelay(a, a.dry)
    # One guard knows every dry file and response of the batch: no output or sidecar may land
    # on any of them. The folder is created only when the first job starts.
    guard = WriteGuard([*a.dry, *a.ir], force=a.force)
    out_dir = guard.folder(a.out_dir)
    jobs = plan_jobs(a.dry, a.ir, out_dir, s, guard=guard)
    display = BatchDisplay(len(jobs), enabled=False if a.quiet else None)
    if a.scheduler:
        executor, progress, owner = dask_executor(a.scheduler)
    else:
        executor, progress, owner = local_executor(a.workers)
    try:
        with executor:
            outcomes = run_batch(jobs, executor, force=a.force, progress=progress,
                                 on_event=display,
                                 before_first=lambda: guard.make_folder(out_dir))
    finally:
        display.close()
        guard.close()
        owner_close = getattr(owner, "close", None) or getattr(owner, "shutdown", None)
        if owner_close:
            owner_close()
    done = sum(o.status == "done" for o in outcomes)
    skipped = sum(o.status == "skipped" for o in outcomes)
    failed = [o for o in outcomes if o.status == "failed"]
    _out(f"batch: {done} rendered, {skipped} already finished, {len(failed)} failed, "
         f"{len(jobs)} in all → {out_dir}", a)
    for o in failed:
        _note(f"failed: {o.job.name}: {o.message}")
    if failed:
        return 2 if all(o.exit_code == 2 for o in failed) else 1
    return 0


def _cfg_batch(p):
    p.add_argument("dry", nargs="+", type=Path, help="dry files")
    p.add_argument("--ir", nargs="+", type=Path, required=True, help="impulse responses")
    p.add_argument("--out-dir", type=Path, required=True, help="folder for <dry>__<ir>.wav")
    from . import validate
    from .cli import opt
    p.add_argument("--workers", type=opt(validate.count, "number of workers", 1, 256),
                   default=None, help="local processes, 1-256 (all cores)")
    p.add_argument("--scheduler", default=None, metavar="tcp://HOST:PORT",
                   help="run on a Dask distributed cluster instead of local processes")
    render_options(p)


cmd_batch.configure = _cfg_batch


@command("live", "convolve a sound-card input with an IR in real time")
def cmd_live(a):
    import sys
    from .audio import read_audio
    from .cli import confirm_caution
    from .errors import InputError
    from .render.offline import resample_ir
    from .render.mix import describe_balance
    from .render.stream import LiveProcessor, run_live
    from .measure.capture import load_sounddevice
    ir, ir_rate = read_audio(a.ir, what="impulse response")
    ins, outs = a.input_channels, a.output_channels
    sd = load_sounddevice()
    rate = a.rate
    if rate is None:
        try:
            rate = int(sd.query_devices(a.device, "output")["default_samplerate"])
        except Exception:
            rate = ir_rate
    if ir_rate != rate:
        ir = resample_ir(ir, ir_rate, rate)
    if a.ceiling > -1.0:
        raise InputError(f"--ceiling {a.ceiling} dBFS is above the output cap of -1 dBFS")
    proc = LiveProcessor(ir, rate, block=a.block, n_in=len(ins), mix=a.mix, gain_db=a.gain,
                         ceiling_dbfs=a.ceiling, precision=a.precision,
                         match_ir_level=not a.keep_ir_level)
    confirm_caution(a)
    n_st = len(proc.engine.stages)
    _note(f"live: {proc.block}-sample blocks at {rate} Hz, {n_st} stage{'s' if n_st > 1 else ''}, "
          f"routing {proc.routing.name}, wet/dry balance {describe_balance(proc.wet_dry_db)}; "
          "Ctrl-C stops")

    def meter(st):
        if a.quiet:
            return
        sys.stderr.write(f"\rin {st.in_peak_dbfs:6.1f} dBFS  out {st.out_peak_dbfs:6.1f} dBFS  "
                         f"limiter {st.limiter_db:4.1f} dB  dropouts {st.dropouts}  ")
        sys.stderr.flush()

    st = run_live(proc, rate, device=a.device, input_channels=ins, output_channels=outs,
                  duration_s=a.duration, on_meter=meter)
    per_block = proc.block / rate
    _out(f"\nlive: {st.frames / rate:.1f} s processed, {st.dropouts} dropouts, peak out "
         f"{st.out_peak_dbfs:.1f} dBFS, limiter max {st.limiter_db:.1f} dB, compute mean "
         f"{100 * st.compute.mean_s / per_block:.1f} % / p99 "
         f"{100 * st.compute.percentile_s(99) / per_block:.1f} % of a block"
         + (f", {st.nonfinite} non-finite blocks silenced" if st.nonfinite else ""), a)
    return 0


def _cfg_live(p):
    from . import validate as v
    from .cli import opt
    p.add_argument("--ir", type=Path, required=True, help="impulse response")
    p.add_argument("--block", type=opt(v.count, "block size", 32, 1024), default=128,
                   help="block size, 32-1024 samples (128)")
    p.add_argument("--rate", type=opt(v.sample_rate), default=None,
                   help=f"sample rate, {v.RATE_MIN}-{v.RATE_MAX} Hz (the device's default)")
    p.add_argument("--device", type=device_spec, default=None,
                   help="PortAudio device: its index, or part of its name")
    p.add_argument("--input-channels", type=opt(v.channel_list, "input channels"),
                   default=(1,), help="1-based inputs, comma-separated (1)")
    p.add_argument("--output-channels", type=opt(v.channel_list, "output channels"),
                   default=(1,), help="1-based outputs (1)")
    p.add_argument("--mix", type=opt(v.in_range, "wet/dry mix", 0.0, 1.0), default=1.0,
                   help="wet/dry 0..1 (1), on level-matched wet and dry as for render")
    p.add_argument("--keep-ir-level", action="store_true",
                   help="use the response at its own level (no unit-energy scaling)")
    p.add_argument("--gain", type=opt(v.in_range, "output gain", -100.0, 20.0, unit="dB"),
                   default=-6.0, help="output gain, -100 to +20 dB (-6); the output is "
                                      "limited to the ceiling anyway")
    p.add_argument("--ceiling", type=opt(v.in_range, "limiter ceiling", -60.0, -1.0,
                                         unit="dBFS"),
                   default=-1.0, help="limiter ceiling, -60 to -1 dBFS (-1)")
    p.add_argument("--precision", choices=("auto", "float64", "float32"), default="auto",
                   help="engine precision: auto = float32, as the sound card stream is "
                        "float32 (about -135 dB error); float64 is exact to about -300 dB")
    p.add_argument("--duration", type=opt(v.positive, "live duration", 86400.0, unit="s"),
                   default=None, help="stop after S seconds (at most 86400)")
    p.add_argument("--yes", action="store_true",
                   help="confirm you have read the hearing and equipment caution")


cmd_live.configure = _cfg_live
