"""The ``analyze`` command: ISO 3382 parameters of one or many impulse responses."""

from __future__ import annotations

from pathlib import Path

from ..jobs.analyze import analyze_study
from .common import Command, note, out
from .display import progress_bar

__all__ = ["COMMANDS"]


def run_analyze(a):
    from ..analysis.report import terminal_report
    with progress_bar("analysing", quiet=a.quiet) as progress:
        res = analyze_study(a.irs, bands=a.bands, filtering=a.filtering,
                            calibration=a.calibration, json_path=a.json, csv_path=a.csv,
                            report_dir=a.report, force=a.force, progress=progress)
    out(terminal_report(res.study.document), a)
    for p in res.written:
        out(f"wrote {p}", a)
    for e in res.errors:  # the outputs above hold the readable files; say which were not
        note(f"skipped: {e}")
    return 2 if res.errors else 0


def configure_analyze(p):
    p.add_argument("irs", nargs="+", type=Path, metavar="IR.wav",
                   help="impulse responses; every channel is its own position")
    p.add_argument("--bands", choices=("octave", "third"), default="octave",
                   help="octave (31.5 Hz-16 kHz) or third-octave (25 Hz-20 kHz) bands")
    p.add_argument("--json", type=Path, default=None, metavar="OUT.json",
                   help="write all results as JSON")
    p.add_argument("--csv", type=Path, default=None, metavar="OUT.csv", help="write a CSV table")
    p.add_argument("--report", type=Path, default=None, metavar="DIR",
                   help="write DIR/report.html with tables and plots")
    p.add_argument("--calibration", default=None, metavar="FILE.json|DB",
                   help="strength reference for G: a file from 'roomconv calibrate' (per band), "
                        "or one number, 10 lg(∫p² dt) of the source at 10 m in a free field in "
                        "full-scale²·s, which gives the wideband G only")
    p.add_argument("--filtering", choices=("auto", "forward", "reverse"), default="auto",
                   help="band filtering: auto (default: backwards in time for decay times, "
                        "zero-phase for C50/C80/D50/Ts, which keeps the filter's own response "
                        "out of both); forward or reverse use one filter for everything, only "
                        "for comparison with other methods")
    p.add_argument("--force", action="store_true", help="replace existing outputs")


COMMANDS = [Command("analyze", "room-acoustic parameters (ISO 3382) of impulse responses",
                    configure_analyze, run_analyze)]
