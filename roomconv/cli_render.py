"""The ``render``, ``batch`` and ``live`` commands."""

from __future__ import annotations

from pathlib import Path

from .audio import write_provenance
from .cli import _note, _out, command
from .progress import Progress


def render_options(p, *, single: bool = True):
    g = p.add_argument_group("rendering")
    g.add_argument("--mix", type=float, default=1.0, help="wet/dry: 0 dry only … 1 wet only (1)")
    g.add_argument("--predelay", type=float, default=0.0, metavar="MS",
                   help="delay of the wet signal, ms (0)")
    g.add_argument("--gain", type=float, default=0.0, metavar="DB", help="output gain, dB (0)")
    g.add_argument("--normalize", choices=("none", "peak", "truepeak", "loudness"),
                   default="none", help="normalize the output (none)")
    g.add_argument("--target", type=float, default=None, metavar="VALUE",
                   help="normalization target: dBFS (peak, -1), dBTP (truepeak, -1) or LUFS "
                        "(loudness, -23)")
    g.add_argument("--subtype", default="FLOAT",
                   help="output sample format: FLOAT (default), DOUBLE, PCM_24, PCM_16 …; "
                        "integer formats get TPDF dither")
    g.add_argument("--precision", choices=("float64", "float32"), default="float64",
                   help="engine precision (float32 is faster; about -130 dB error)")
    g.add_argument("--outputs", type=int, default=None, metavar="M",
                   help="general matrix routing: the IR holds inputs×M channels, input-major")
    g.add_argument("--shared", action="store_true",
                   help="use the IR's first channel for every input")
    g.add_argument("--no-tail", action="store_true",
                   help="cut the output at the dry file's length (the tail is kept by default)")
    g.add_argument("--no-dither", action="store_true", help="no dither for integer formats")
    g.add_argument("--force", action="store_true", help="replace existing outputs")


def settings_from_args(a):
    from .render.offline import RenderSettings
    return RenderSettings(mix=a.mix, predelay_ms=a.predelay, gain_db=a.gain,
                          normalize=a.normalize, target=a.target, subtype=a.subtype.upper(),
                          precision=a.precision, outputs=a.outputs, shared=a.shared,
                          keep_tail=not a.no_tail, dither=not a.no_dither).check()


def describe_report(r) -> str:
    parts = [f"wrote {r.output}: {r.channels} channel(s), {r.frames / r.rate:.2f} s at "
             f"{r.rate} Hz, routing {r.routing}, peak {r.peak_dbfs:+.1f} dBFS"]
    if r.true_peak_dbtp is not None:
        parts.append(f"true peak {r.true_peak_dbtp:+.1f} dBTP")
    if r.loudness_lufs is not None:
        parts.append(f"loudness {r.loudness_lufs:.1f} LUFS")
    if r.gain_db:
        parts.append(f"gain {r.gain_db:+.1f} dB")
    if r.ir_resampled_from:
        parts.append(f"IR resampled from {r.ir_resampled_from} Hz")
    return ", ".join(parts)


@command("render", "render a dry recording through an impulse response")
def cmd_render(a):
    from .render.offline import render_file
    s = settings_from_args(a)
    with Progress(1.0, "rendering", enabled=False if a.quiet else None) as bar:
        def tick(frac, bar=bar):
            bar.update(frac - bar.done)
        rep = render_file(a.dry, a.ir, a.output, s, force=a.force, progress=tick)
    write_provenance(a.output, [a.dry, a.ir], s.as_dict())
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
