"""The ``analyze`` command: ISO 3382 parameters of one or many impulse responses."""

from __future__ import annotations

from pathlib import Path

from ..errors import InputError
from ..jobs.analyze import analyze_study
from .common import Command, note, out
from .display import print_table, progress_bar

__all__ = ["COMMANDS", "show_study"]


def show_study(doc: dict) -> None:
    """Per-position tables, the average with its uncertainty, the single numbers, notes."""
    from ..analysis.report import (
        HEADERS,
        LEGEND,
        band_label,
        mean_with_spread,
        metrics_of,
        single_number_lines,
        table_rows,
    )

    metrics = metrics_of(doc)
    header = ["band"] + [HEADERS[m] for m in metrics] + ["verdict"]
    right = range(1, len(metrics) + 1)
    for p in doc["positions"]:
        print_table(
            header,
            table_rows(p, metrics),
            right=right,
            title=f"{p['file']}  channel {p['channel']}",
        )
        if "layout" in p:
            _show_layout(p)
        for w in (w for r in p["bands"] + [p["wideband"]] for w in r["warnings"]):
            print(f"  ! {w}")
    if len(doc["positions"]) > 1:
        rows = []
        for r in doc["average"]["bands"]:
            u = r["t30_s"].get("uncertainty")
            rows.append(
                [
                    band_label(r["band_hz"]),
                    *(mean_with_spread(m, r) for m in ("edt_s", "t20_s", "t30_s")),
                    "—" if u is None else f"{u:.3f}",
                    *(mean_with_spread(m, r) for m in ("c80_db", "d50", "ts_ms")),
                ]
            )
        print_table(
            ["band", "EDT s", "T20 s", "T30 s", "u(T30) s", "C80 dB", "D50", "Ts ms"],
            rows,
            right=range(1, 8),
            title=f"Average over {len(doc['positions'])} positions (mean ± std; "
            "T uncertainty per ISO 3382-2)",
        )
    print("Mid-frequency values:")
    for line in single_number_lines(doc):
        print(f"  {line}")
    print(LEGEND)
    for n in doc.get("notes", []):
        print(f"note: {n}")
    for e in doc.get("errors", []):
        print(f"error: {e}")


def _show_layout(p: dict) -> None:
    """The stage, lateral or interaural parameters of one position, and their averages."""
    from ..analysis.layouts import layout_table, single_number_lines

    header, rows = layout_table(p)
    print_table(header, rows, right=range(1, len(header)), title=f"channels: {p['layout']}")
    for line in single_number_lines(
        p["layout_single_numbers"],
        p["layout_single_number_verdicts"],
        p.get("layout_single_number_reasons"),
    ):
        print(f"  {line}")
    for n in p.get("layout_notes", []):
        print(f"  note: {n}")


def run_analyze(a):
    """Run ``roomconv analyze``: ISO 3382 parameters of the responses given (or of a study file's)
    through :func:`roomconv.jobs.analyze.analyze_study`, shown as tables and written as
    JSON, CSV and a report when asked.

    Parameters
    ----------
    a : argparse.Namespace
        The parsed options of the command.

    Returns
    -------
    int
        The exit code: 0 on success (a refused input raises and exits with 2).
    """
    layout_opts = [o for o, on in _layout_options(a) if on]
    if len(layout_opts) > 1:
        raise InputError(f"analyze: {' and '.join(layout_opts)} exclude each other; give one")
    if layout_opts and a.study is not None:
        raise InputError(
            f"analyze: {layout_opts[0]} works on IR files; with --study, say what the "
            "channels are in the study file's [channels] layout"
        )
    if layout_opts and a.bands != "octave":
        raise InputError(
            f"analyze: {layout_opts[0]}: these parameters are defined in octave bands "
            "(ISO 3382-1); leave --bands at octave"
        )
    if a.study is not None:
        return _run_study(a)
    if not a.irs:
        raise InputError("analyze: give impulse responses (IR.wav ...) or --study FILE.toml")
    from .speech import speech_from_args

    sti = speech_from_args(a)
    with progress_bar("analysing", quiet=a.quiet) as progress:
        res = analyze_study(
            a.irs,
            bands=a.bands,
            filtering=a.filtering,
            calibration=a.calibration,
            json_path=a.json,
            csv_path=a.csv,
            report_dir=a.report,
            force=a.force,
            progress=progress,
            sti=sti,
            channels=a.channels,
            binaural=a.binaural,
            stage=a.stage,
        )
    if not a.quiet:
        show_study(res.study.document)
    if sti is not None:
        from .speech import show_sti

        show_sti(res.study.document, a)
    for p in res.written:
        out(f"wrote {p}", a)
    for e in res.errors:  # the outputs above hold the readable files; say which were not
        note(f"skipped: {e}")
    return 2 if res.errors else 0


def _layout_options(a):
    return [
        ("--channels", a.channels is not None),
        ("--binaural", a.binaural),
        ("--stage", a.stage),
    ]


def _run_study(a):
    """``analyze --study``: the responses a study file names; the report as HTML and PDF."""
    from ..jobs.study import report_study
    from ..report.pdf import pdf_engine_problem

    if a.irs:
        raise InputError(
            "analyze: give either IR.wav files or --study, not both (the study "
            "file lists its responses)"
        )
    from .speech import speech_from_args

    sti = speech_from_args(a)
    if a.report is not None:
        problem = pdf_engine_problem()
        if problem is not None:
            raise InputError(f"--report: cannot write the PDF: {problem}")
    with progress_bar("analysing", quiet=a.quiet) as progress:
        res = report_study(
            a.study,
            bands=a.bands,
            filtering=a.filtering,
            calibration=a.calibration,
            json_path=a.json,
            csv_path=a.csv,
            report_dir=a.report,
            force=a.force,
            progress=progress,
            sti=sti,
        )
    doc = res.document
    if not a.quiet:
        show_study(doc)
    if sti is not None:
        from .speech import show_sti

        show_sti(doc, a)
    g = doc["grade"]
    out(f"measurement grade (ISO 3382-2): {g['name'] or 'below survey'}", a)
    for p in res.written:
        out(f"wrote {p}", a)
    return 2 if res.errors else 0


def configure_analyze(p):
    """Add the options of ``roomconv analyze`` to its sub-parser ``p`` (an argparse parser)."""
    p.add_argument(
        "irs",
        nargs="*",
        type=Path,
        metavar="IR.wav",
        help="impulse responses; every channel is its own position (or --study)",
    )
    p.add_argument(
        "--study",
        type=Path,
        default=None,
        metavar="STUDY.toml",
        help="a study file (see 'roomconv study init'): its responses, positions "
        "and details; with --report, DIR/report.html and DIR/report.pdf",
    )
    p.add_argument(
        "--bands",
        choices=("octave", "third"),
        default="octave",
        help="octave (31.5 Hz-16 kHz) or third-octave (25 Hz-20 kHz) bands",
    )
    p.add_argument(
        "--json", type=Path, default=None, metavar="OUT.json", help="write all results as JSON"
    )
    p.add_argument("--csv", type=Path, default=None, metavar="OUT.csv", help="write a CSV table")
    p.add_argument(
        "--report",
        type=Path,
        default=None,
        metavar="DIR",
        help="write DIR/report.html with tables and plots",
    )
    p.add_argument(
        "--calibration",
        default=None,
        metavar="FILE.json|DB",
        help="strength reference for G: a file from 'roomconv calibrate' (per band), "
        "or one number, 10 lg(∫p² dt) of the source at 10 m in a free field in "
        "full-scale²·s, which gives the wideband G only",
    )
    p.add_argument(
        "--filtering",
        choices=("auto", "forward", "reverse"),
        default="auto",
        help="band filtering: auto (default: backwards in time for decay times, "
        "zero-phase for C50/C80/D50/Ts, which keeps the filter's own response "
        "out of both); forward or reverse use one filter for everything, only "
        "for comparison with other methods",
    )
    p.add_argument(
        "--channels",
        choices=("omni,fig8", "fig8,omni", "acn-sn3d"),
        default=None,
        help="each file is one position: an omni and a figure-of-eight channel (its null "
        "towards the source, its on-axis gain the omni's), or a first-order ambisonic "
        "response in ACN order (W, Y, Z, X) with SN3D normalization; adds the lateral "
        "energy fractions J_LF, J_LFC and, with --calibration, L_J",
    )
    p.add_argument(
        "--binaural",
        action="store_true",
        help="each file is one position with two ear channels (left, right); adds IACC "
        "early, late and full and 1 - IACC_E3",
    )
    p.add_argument(
        "--stage",
        action="store_true",
        help="every channel is a response 1 m from the source on stage; adds ST_early and "
        "ST_late (250 Hz-2 kHz)",
    )
    p.add_argument("--force", action="store_true", help="replace existing outputs")
    from .speech import add_speech_options

    add_speech_options(p)


COMMANDS = [
    Command(
        "analyze",
        "room-acoustic parameters (ISO 3382) of impulse responses",
        configure_analyze,
        run_analyze,
    )
]
