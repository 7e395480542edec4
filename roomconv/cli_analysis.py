"""The ``analyze`` command: ISO 3382 parameters of one or many impulse responses."""

from __future__ import annotations

from pathlib import Path

from .audio import WriteGuard
from .cli import _note, _out, command
from .progress import Progress


@command("analyze", "room-acoustic parameters (ISO 3382) of impulse responses")
def cmd_analyze(a):
    from .analysis.report import csv_text, html_report, terminal_report
    from .analysis.study import analyse_files, parse_calibration
    from .audio import audio_info
    inputs = list(a.irs)
    # Plan every output (the report folder is created only when its page is written) against
    # every input, a calibration file included, before any analysis.
    guard = WriteGuard(inputs, force=a.force)
    if a.calibration is not None and Path(a.calibration).is_file():
        guard.add_input(a.calibration)
    report_file = guard.folder(a.report) / "report.html" if a.report is not None else None
    for p in (a.json, a.csv, report_file):
        if p is not None:
            guard.file(p)
    cal = parse_calibration(a.calibration)
    total = 0
    for p in inputs:
        try:
            total += audio_info(p).channels
        except Exception:  # unreadable files are reported by the analysis itself
            total += 1
    with Progress(total, "analysing", enabled=None if not a.quiet else False) as bar:
        study = analyse_files(inputs, bands=a.bands, filtering=a.filtering,
                              calibration=cal, progress=bar)
    doc = study.document
    _out(terminal_report(doc), a)
    if a.json is not None:
        guard.write_json(a.json, doc)
        _out(f"wrote {a.json}", a)
    if a.csv is not None:
        guard.write_text(a.csv, csv_text(doc))
        _out(f"wrote {a.csv}", a)
    if report_file is not None:
        guard.write_text(report_file, html_report(study))
        _out(f"wrote {report_file}", a)
    for e in study.errors:  # the outputs above hold the readable files; say which were not
        _note(f"skipped: {e}")
    return 2 if study.errors else 0


def _cfg(p):
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


cmd_analyze.configure = _cfg
