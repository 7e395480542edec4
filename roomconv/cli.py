"""The ``roomconv`` command line: argparse sub-commands over the library.

Each command loads, calls the numerics and saves. Errors from :mod:`roomconv.errors` become a
one-line message and exit code 2 (bad input) or 1 (internal); ``--debug`` shows tracebacks.
"""

from __future__ import annotations

import argparse
import re
import sys
import traceback
from pathlib import Path

from . import __version__, safety, validate
from .errors import InputError, RoomconvError

COMMANDS = {}


def command(name: str, help: str):
    """Register ``func(args)`` as a sub-command; ``func.configure(parser)`` adds its options."""
    def deco(func):
        COMMANDS[name] = (func, help)
        return func
    return deco


class Parser(argparse.ArgumentParser):
    """argparse with two changes: a value that starts with ``-`` and a digit, a point,
    ``inf`` or ``nan`` is a value (so ``--room -5x4x3`` reaches the check that refuses it),
    and an error is one line that points to ``--help``."""

    def __init__(self, *args, **kwargs):
        super().__init__(*args, **kwargs)
        # argparse only takes "-5" and "-.5" as values; "-5x4x3" or "-inf" would be read as
        # unknown options and the real problem never reported.
        self._negative_number_matcher = re.compile(r"^-(\d|\.\d|inf|nan)", re.IGNORECASE)

    def error(self, message):
        self.exit(2, f"{self.prog}: error: {message} (see {self.prog} --help)\n")


def _common(suppress: bool = False) -> argparse.ArgumentParser:
    # Sub-command parsers must not reset a --debug given before the sub-command, so there
    # the options have no default of their own.
    kw = {"default": argparse.SUPPRESS} if suppress else {}
    p = argparse.ArgumentParser(add_help=False)
    p.add_argument("--debug", action="store_true", help="show tracebacks on errors", **kw)
    p.add_argument("--quiet", action="store_true",
                   help="no progress bars or reports on stdout", **kw)
    return p


def opt(check, *cargs, **ckw):
    """An argparse ``type=`` built from a :mod:`roomconv.validate` check; argparse puts the
    option's name in front of the check's message."""
    def conv(text):
        try:
            return check(text, *cargs, **ckw)
        except InputError as exc:
            raise argparse.ArgumentTypeError(str(exc)) from None
    conv.__name__ = getattr(check, "__name__", "value")
    return conv


def budget(option: str, check, *cargs, **ckw):
    """Run a size check at the top of a command; its refusal names ``option``."""
    try:
        return check(*cargs, **ckw)
    except InputError as exc:
        raise InputError(f"{option}: {exc}") from None


def device_spec(text: str) -> int | str:
    """``--device``: a number is PortAudio's device index, anything else part of its name
    (sounddevice would otherwise look for a device whose *name* contains "0")."""
    return int(text) if text.strip().isdigit() else text


def _out(msg: str, args) -> None:
    if not getattr(args, "quiet", False):
        print(msg)


def _note(msg: str) -> None:
    print(f"roomconv: {msg}", file=sys.stderr)


# --- sweep ---------------------------------------------------------------------------------
def _sweep_options(p, level_default: float):
    v = validate
    g = p.add_argument_group("sweep")
    g.add_argument("--rate", type=opt(v.sample_rate), default=48000,
                   help=f"sample rate in Hz, {v.RATE_MIN}-{v.RATE_MAX} (default 48000)")
    g.add_argument("--low", type=opt(v.positive, "sweep start frequency", unit="Hz"),
                   default=20.0, help="start frequency, Hz (20)")
    g.add_argument("--high", type=opt(v.positive, "sweep stop frequency", unit="Hz"),
                   default=20000.0, help="stop frequency, Hz (20000; at most half the rate)")
    g.add_argument("--duration", type=opt(v.positive, "sweep duration", unit="s"), default=5.0,
                   help="sweep length in seconds, without silences (5)")
    g.add_argument("--level", type=opt(v.in_range, "sweep level", -120.0, 0.0, unit="dBFS"),
                   default=level_default,
                   help=f"peak level in dBFS, -120 to 0 ({level_default:g})")
    g.add_argument("--pre", type=opt(v.non_negative, "silence before the sweep", unit="s"),
                   default=0.5, help="silence before the first sweep, s (0.5)")
    g.add_argument("--silence", type=opt(v.non_negative, "silence after the sweep", unit="s"),
                   default=2.0,
                   help="silence after each sweep, s; longer than the room's decay (2)")
    g.add_argument("--repeat", type=opt(v.count, "number of sweeps", 1, 100), default=1,
                   help="back-to-back sweeps to average, 1-100 (1)")
    g.add_argument("--fade-in", type=opt(v.non_negative, "sweep fade-in", unit="s"),
                   default=0.05, help="fade-in, s (0.05)")
    g.add_argument("--fade-out", type=opt(v.non_negative, "sweep fade-out", unit="s"),
                   default=0.01, help="fade-out, s (0.01)")


def _sweep_budget(a, channels: int = 1) -> None:
    """Refuse, before anything is allocated, a sweep file longer than the memory budget; the
    refusal names the option that contributes most."""
    parts = {"--pre": a.pre, "--silence": a.repeat * a.silence,
             "--duration": a.repeat * a.duration}
    total = sum(parts.values())
    worst = max(parts, key=parts.get)
    if a.repeat * (a.duration + a.silence) > 0.5 * total and a.repeat > 1:
        worst = f"{worst} (with --repeat {a.repeat})"
    budget(worst, validate.memory_budget, total * a.rate, "the sweep file", channels=channels)
    if a.fade_in + a.fade_out > a.duration:
        raise InputError(f"--fade-in/--fade-out: fades of {a.fade_in:g} s and {a.fade_out:g} s "
                         f"do not fit in a {a.duration:g} s sweep (shorten them)")


def _sweep_from_args(a):
    from .measure.sweep import Sweep
    return Sweep(rate=a.rate, f_low=a.low, f_high=a.high, duration=a.duration,
                 level_dbfs=a.level, fade_in=a.fade_in, fade_out=a.fade_out,
                 silence_pre=a.pre, silence_post=a.silence, repeats=a.repeat)


@command("sweep", "write an exponential sine sweep (WAV + .sweep.json sidecar)")
def cmd_sweep(a):
    from .measure.files import save_sweep
    _sweep_budget(a)
    s = _sweep_from_args(a)
    save_sweep(a.output, s, subtype=a.subtype, force=a.force)
    _out(f"wrote {a.output} ({s.n_total / s.rate:.2f} s, {s.repeats} sweep(s) "
         f"{s.f_low:g}-{s.f_high:g} Hz at {s.level_dbfs:g} dBFS) and its sidecar", a)
    return 0


def _cfg_sweep(p):
    p.add_argument("output", type=Path, help="the sweep WAV to write")
    _sweep_options(p, level_default=-6.0)
    p.add_argument("--subtype", default="FLOAT", help="WAV sample format (FLOAT, PCM_24, ...)")
    p.add_argument("--force", action="store_true", help="replace an existing output")


cmd_sweep.configure = _cfg_sweep


# --- extract -------------------------------------------------------------------------------
@command("extract", "deconvolve a recorded sweep into an impulse response")
def cmd_extract(a):
    from .audio import WriteGuard
    from .measure.files import (extract_files, format_quality, plan_extraction,
                                save_extraction, sweep_inputs)
    # The sweep's sidecar is read too, so it is an input no output may replace.
    inputs = [a.recording, *sweep_inputs(a.sweep)]
    guard = WriteGuard(inputs, force=a.force)
    plan_extraction(guard, a.output, harmonics_dir=a.harmonics, json_path=a.json)
    ex, notes = extract_files(a.recording, a.sweep, reference_channel=a.reference_channel,
                              length_s=a.length, trim=a.trim, harmonics=a.harmonics is not None,
                              allow_clipped=a.allow_clipped)
    for n in notes:
        _note(n)
    save_extraction(ex, a.output, harmonics_dir=a.harmonics, json_path=a.json, force=a.force,
                    inputs=[a.recording, a.sweep], settings=_settings(a), guard=guard)
    _out(format_quality(ex.quality), a)
    if ex.trimmed_samples:
        _out(f"trimmed {ex.trimmed_samples} samples ({1000 * ex.trimmed_samples / ex.rate:.1f} ms)"
             " of leading silence", a)
    _out(f"wrote {a.output} ({ex.ir.shape[1]} channel(s), {ex.ir.shape[0] / ex.rate:.2f} s)", a)
    return 0


def _cfg_extract(p):
    p.add_argument("recording", type=Path, help="the recorded sweep (one or more channels)")
    p.add_argument("--sweep", type=Path, required=True, help="the sweep WAV that was played")
    p.add_argument("-o", "--output", type=Path, required=True, help="IR WAV to write")
    _extract_options(p)


def _extract_options(p):
    p.add_argument("--reference-channel", type=opt(validate.count, "reference channel", 0,
                                                   validate.MAX_CHANNEL - 1),
                   default=None, metavar="K",
                   help="0-based index of a loopback channel in the recording")
    p.add_argument("--length", type=opt(validate.positive, "response length", 600.0, unit="s"),
                   default=None, metavar="S",
                   help="IR length in seconds, at most 600 (default: the silence after the sweep)")
    p.add_argument("--harmonics", type=Path, default=None, metavar="DIR",
                   help="also write harmonic IRs (orders 2-5) into DIR")
    p.add_argument("--trim", action="store_true", help="cut leading silence before the onset")
    p.add_argument("--json", type=Path, default=None, metavar="FILE",
                   help="write the quality report as JSON")
    p.add_argument("--allow-clipped", action="store_true",
                   help="accept a clipped recording (results will be distorted)")
    p.add_argument("--force", action="store_true", help="replace existing outputs")


cmd_extract.configure = _cfg_extract


def _settings(a) -> dict:
    skip = {"func", "debug", "quiet", "force"}
    return {k: (str(v) if isinstance(v, Path) else v) for k, v in vars(a).items() if k not in skip}


# --- measure -------------------------------------------------------------------------------
def confirm_caution(a) -> None:
    """Show the caution; require --yes or a typed 'yes' on a terminal."""
    print(safety.caution_text(), file=sys.stderr)
    if a.yes:
        return
    if not sys.stdin.isatty():
        raise InputError("sound would be played: read the caution above and pass --yes to "
                         "confirm (no terminal to ask on)")
    reply = input("Type 'yes' to play the signal: ").strip().lower()
    if reply != "yes":
        raise InputError("measurement cancelled: the caution was not confirmed")


@command("measure", "play a sweep through a sound card, record and extract the IR")
def cmd_measure(a):
    from .audio import WriteGuard, read_audio
    from .measure.capture import SimulatedDevice, SoundCard, run_measurement
    from .measure.deconvolve import extract_ir
    from .measure.files import format_quality, plan_extraction, save_extraction
    from .measure.sweep import sweep_signal
    budget("--level", safety.check_level, a.level)
    _sweep_budget(a, channels=1 + len(a.input_channels) if a.simulate is None else 2)
    budget("--sim-latency", validate.memory_budget, a.sim_latency, "this simulated latency")
    if a.reference_channel is not None and a.simulate is None \
            and a.reference_channel >= len(a.input_channels):
        raise InputError(f"--reference-channel {a.reference_channel}: the recording has "
                         f"{len(a.input_channels)} channel(s) (0-based index expected)")
    s = _sweep_from_args(a)
    # Every output is planned against the simulated room (the one input) before any sound.
    guard = WriteGuard([a.simulate], force=a.force)
    plan_extraction(guard, a.output, harmonics_dir=a.harmonics, json_path=a.json)
    if a.save_recording is not None:
        guard.file(a.save_recording)
    inputs = []
    if a.simulate is not None:
        ir, ir_rate = read_audio(a.simulate, what="simulated room IR")
        if ir_rate != s.rate:
            raise InputError(f"{a.simulate}: the simulated room is at {ir_rate} Hz but the sweep "
                             f"at {s.rate} Hz (pass --rate {ir_rate})")
        n_rec = (ir.shape[1] if ir.ndim == 2 else 1) + (a.reference_channel is not None)
        if a.reference_channel is not None and a.reference_channel >= n_rec:
            raise InputError(f"--reference-channel {a.reference_channel}: the simulated "
                             f"recording has {n_rec} channel(s), 0 to {n_rec - 1}")
        device = SimulatedDevice(ir, latency_samples=a.sim_latency, noise_dbfs=a.sim_noise,
                                 loopback=a.reference_channel is not None, seed=a.seed)
        _note("simulated device: no sound will be played")
        inputs = [a.simulate]
    else:
        chans = a.input_channels
        device = SoundCard(device=a.device, output_channel=a.output_channel, input_channels=chans)
        confirm_caution(a)
    rec = run_measurement(device, sweep_signal(s), s.rate, tail_s=0.5)
    # Extract before writing anything, so a failed extraction leaves no recording behind.
    ex = extract_ir(rec, s.rate, sweep=s, reference_channel=a.reference_channel,
                    length_s=a.length, harmonics=a.harmonics is not None, trim=a.trim,
                    allow_clipped=a.allow_clipped)
    if a.save_recording is not None:
        guard.write_audio(a.save_recording, rec, s.rate)
    save_extraction(ex, a.output, harmonics_dir=a.harmonics, json_path=a.json, force=a.force,
                    inputs=inputs, settings={**_settings(a), "sweep": s.to_dict()}, guard=guard)
    _out(format_quality(ex.quality), a)
    _out(f"wrote {a.output}", a)
    return 0


def _cfg_measure(p):
    p.add_argument("output", type=Path, help="IR WAV to write")
    _sweep_options(p, level_default=safety.START_LEVEL_DBFS)
    g = p.add_argument_group("device")
    g.add_argument("--device", type=device_spec, default=None,
                   help="PortAudio device: its index, or part of its name")
    g.add_argument("--output-channel", type=opt(validate.count, "output channel", 1,
                                                 validate.MAX_CHANNEL),
                   default=1, help="1-based output channel (1)")
    g.add_argument("--input-channels", type=opt(validate.channel_list, "input channels"),
                   default=(1,),
                   help="1-based input channels, comma-separated (1); include the loopback")
    g.add_argument("--yes", action="store_true",
                   help="confirm you have read the hearing and equipment caution")
    g.add_argument("--save-recording", type=Path, default=None, metavar="FILE",
                   help="also keep the raw recording")
    g = p.add_argument_group("rehearsal without a sound card")
    g.add_argument("--simulate", type=Path, default=None, metavar="IR.wav",
                   help="measure a simulated room with this response instead of a sound card")
    g.add_argument("--sim-noise", type=opt(validate.in_range, "simulated noise level", -300.0,
                                           0.0, unit="dBFS"),
                   default=-90.0, help="simulated noise, dBFS, -300 to 0 (-90)")
    g.add_argument("--sim-latency", type=opt(validate.count, "simulated latency", 0),
                   default=0, help="simulated latency, samples (0)")
    g.add_argument("--seed", type=opt(validate.count, "noise seed", 0, 2 ** 32 - 1), default=0,
                   help="noise seed for --simulate (0)")
    _extract_options(p)


cmd_measure.configure = _cfg_measure


# --- tui --------------------------------------------------------------------------------
@command("tui", "the terminal workbench (Textual)")
def cmd_tui(a):
    from tui.app import main as tui_main
    return tui_main([])


cmd_tui.configure = lambda p: None


# --- entry point ---------------------------------------------------------------------------
def build_parser() -> argparse.ArgumentParser:
    parser = Parser(
        prog="roomconv", parents=[_common()],
        description="Measure, analyse, synthesize and render through room impulse responses.")
    parser.add_argument("--version", action="version", version=f"roomconv {__version__}")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND")
    for name, (func, help_) in COMMANDS.items():
        p = sub.add_parser(name, help=help_, description=help_, parents=[_common(True)])
        func.configure(p)
        p.set_defaults(func=func)
    return parser


class Interrupted(KeyboardInterrupt):
    """SIGTERM or SIGHUP, raised where the program is so that clean-up code runs as on
    Ctrl-C."""

    def __init__(self, signum: int):
        super().__init__(signum)
        self.signum = signum


_STOP_SIGNALS = ("SIGINT", "SIGTERM", "SIGHUP")


def _ignore_stop_signals() -> None:
    import signal
    for name in _STOP_SIGNALS:
        sig = getattr(signal, name, None)
        if sig is not None:
            signal.signal(sig, signal.SIG_IGN)


def _raise_interrupted(signum, _frame):
    # One interrupt is enough: a second one must not cut the clean-up short.
    _ignore_stop_signals()
    raise Interrupted(signum)


def _install_signal_handlers() -> dict:
    """Ctrl-C, SIGTERM and SIGHUP end a run the same way: temporary files removed, exit
    128+n."""
    import signal
    import threading
    if threading.current_thread() is not threading.main_thread():
        return {}
    old = {}
    for name in _STOP_SIGNALS:
        sig = getattr(signal, name, None)
        if sig is not None:
            old[sig] = signal.signal(sig, _raise_interrupted)
    return old


def _restore_signal_handlers(old: dict) -> None:
    import signal
    for sig, handler in old.items():
        signal.signal(sig, handler)


def main(argv: list[str] | None = None) -> int:
    _load_plugins()
    parser = build_parser()
    try:
        args = parser.parse_args(argv)
    except SystemExit as exc:  # --help, --version or a refused option: already printed
        return exc.code if isinstance(exc.code, int) else 2
    if not getattr(args, "func", None):
        parser.print_help()
        return 2
    from . import audio
    audio.reset_run_state()
    # The terminal workbench keeps its own key and signal handling.
    old = _install_signal_handlers() if args.command != "tui" else {}
    try:
        return _run(args)
    finally:
        # After a failure this removes what the run left unfinished; after success there
        # is nothing of that kind, and only folders created but left empty go. A signal
        # now would only interrupt the clean-up.
        if old:
            _ignore_stop_signals()
        audio.end_run()
        _restore_signal_handlers(old)


def _roll_back() -> None:
    """A command that fails half-way leaves none of its own files: what it wrote new goes."""
    from . import audio
    audio.end_run(failed=True)


def _run(args) -> int:
    import signal
    try:
        return int(args.func(args) or 0)
    except RoomconvError as exc:
        if args.debug:
            traceback.print_exc()
        _roll_back()
        print(f"roomconv: error: {exc}", file=sys.stderr)
        return exc.exit_code
    except KeyboardInterrupt as exc:
        signum = getattr(exc, "signum", signal.SIGINT)
        from . import audio
        audio.end_run()
        print(f"roomconv: interrupted by {signal.Signals(signum).name}; unfinished files "
              "removed, finished outputs kept", file=sys.stderr)
        return 128 + int(signum)
    except Exception as exc:  # noqa: BLE001 - the last line of defence for users
        if args.debug:
            traceback.print_exc()
        _roll_back()
        print(f"roomconv: internal error: {type(exc).__name__}: {exc} "
              "(run again with --debug for details and report it)", file=sys.stderr)
        return 1


def _load_plugins() -> None:
    """Import the modules that register further sub-commands."""
    import importlib
    for mod in ("roomconv.cli_analysis", "roomconv.cli_synth", "roomconv.cli_render",
                "roomconv.cli_calibrate", "roomconv.cli_study", "roomconv.demo"):
        try:
            importlib.import_module(mod)
        except ModuleNotFoundError as exc:
            if exc.name != mod:
                raise


if __name__ == "__main__":
    # Run through the package module so that sub-commands registered by the other cli_*
    # modules land in the same COMMANDS table.
    from roomconv.cli import main as _main
    sys.exit(_main())
