"""Speech-intelligibility options shared by ``analyze --sti`` and ``office``: parsing, and
the STI lines with their cautions on the terminal."""

from __future__ import annotations

from pathlib import Path

from ..jobs.speech import parse_octave_levels, speech_conditions
from .common import budget, opt, out

__all__ = ["add_speech_options", "speech_from_args", "show_sti", "print_cautions"]


def add_speech_options(p, *, switch: bool = True) -> None:
    """``--sti`` (when ``switch``), speech level, noise, voice and STIPA."""
    if switch:
        p.add_argument(
            "--sti",
            action="store_true",
            help="speech transmission index per position and averaged (IEC 60268-16:2011, "
            "indirect method, from the response)",
        )
    p.add_argument(
        "--speech-level",
        type=float,
        default=None,
        metavar="DB",
        help="A-weighted speech level at the listener, dB(A) (default 60, normal effort); "
        "sets the masking and reception-threshold terms",
    )
    noise = p.add_mutually_exclusive_group()
    noise.add_argument(
        "--noise",
        type=opt(parse_octave_levels),
        default=None,
        metavar="L125,...,L8k",
        help="background noise at the listener: seven octave levels 125 Hz-8 kHz, dB SPL",
    )
    noise.add_argument(
        "--noise-file",
        type=Path,
        default=None,
        metavar="FILE",
        help="background noise as a recording (first channel); needs --noise-calibration",
    )
    p.add_argument(
        "--noise-calibration",
        type=float,
        default=None,
        metavar="DB",
        help="dB SPL that a full-scale sine represents in --noise-file (from a calibrator "
        "tone recorded at the same gain)",
    )
    p.add_argument(
        "--voice",
        choices=("male", "female"),
        default="male",
        help="weighting of the octave bands (default male)",
    )
    p.add_argument(
        "--stipa",
        action="store_true",
        help="use the STIPA subset of modulation frequencies (two per octave)",
    )


def speech_from_args(a, *, required: bool = False):
    """The conditions from the options, or None without ``--sti`` (unless ``required``)."""
    if not (required or getattr(a, "sti", False)):
        used = [
            name
            for name, v in (
                ("--speech-level", a.speech_level),
                ("--noise", a.noise),
                ("--noise-file", a.noise_file),
                ("--noise-calibration", a.noise_calibration),
                ("--stipa", a.stipa or None),
                ("--voice", None if a.voice == "male" else a.voice),
            )
            if v is not None
        ]
        if used:
            from ..errors import InputError

            raise InputError(f"{used[0]}: only used with --sti; add --sti or leave it out")
        return None
    if a.noise_calibration is not None and a.noise_file is None:
        from ..errors import InputError

        raise InputError("--noise-calibration: only used with --noise-file")
    if a.speech_level is not None:
        from ..analysis.sti import SpeechConditions

        budget("--speech-level", SpeechConditions.from_level, a.speech_level)
    option = "--noise-file" if a.noise_file is not None else "--noise"
    return budget(
        option,
        speech_conditions,
        speech_level_dba=a.speech_level,
        noise_db=a.noise,
        noise_file=a.noise_file,
        noise_calibration_db=a.noise_calibration,
        voice=a.voice,
        stipa=a.stipa,
    )


_OCTAVE_LABELS = ("125", "250", "500", "1k", "2k", "4k", "8k")


def _fmt(v) -> str:
    return "—" if v is None else f"{v:.2f}"


def print_cautions(doc: dict, a) -> None:
    """Print the document's ``cautions`` (if any), one line each, prefixed ``caution:``.

    Parameters
    ----------
    doc : dict
        An analysis or office document.
    a : argparse.Namespace
        The parsed options (``--quiet`` silences the lines).
    """
    for c in doc.get("cautions", []):
        out(f"caution: {c}", a)


def show_sti(doc: dict, a) -> None:
    """STI per position (value, qualification band, MTI per octave) and the average."""
    from .display import print_table

    if not getattr(a, "quiet", False):
        rows = []
        for p in doc["positions"]:
            s = p.get("sti")
            if s is None:
                continue
            rows.append(
                [
                    f"{Path(p['file']).name} ch{p['channel']}",
                    _fmt(s["value"]),
                    s["band"] or "—",
                    *(_fmt(m) for m in s["mti"]),
                ]
            )
        print_table(
            [
                "position",
                "STI",
                "band",
                *(f"MTI {f}" for f in ("125", "250", "500", "1k", "2k", "4k", "8k")),
            ],
            rows,
            right=range(1, 10),
            title="Speech transmission index (" + doc["settings"]["sti"]["origin"] + ")",
        )
        for p in doc["positions"]:
            for w in (p.get("sti") or {}).get("warnings", []):
                print(f"  ! {Path(p['file']).name} ch{p['channel']}: {w}")
    avg = doc["average"].get("sti")
    if avg is not None:
        if avg["value"] is None:
            out(f"STI: not evaluable ({avg['reason']})", a)
        else:
            spread = "" if avg["std"] is None else f" ± {avg['std']:.2f}, min {avg['min']:.2f}"
            out(
                f"STI: {avg['value']:.2f}{spread} over {avg['n']} position(s), band {avg['band']}",
                a,
            )
        for w in avg["warnings"]:
            out(f"  ! {w}", a)
    print_cautions(doc, a)
