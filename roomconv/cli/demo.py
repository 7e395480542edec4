"""The ``demo`` command: run the Quillmere Hall scenario and show its headline figures."""

from __future__ import annotations

from pathlib import Path

from .common import Command, note, out
from .display import print_table, progress_bar

__all__ = ["COMMANDS"]


def run_demo_command(a):
    """Run ``roomconv demo``: the demo study of our own hall (:func:`roomconv.demo.run_demo`)
    with a progress bar, then its mid-frequency summary and the files written.

    Parameters
    ----------
    a : argparse.Namespace
        The parsed options of the command.

    Returns
    -------
    int
        The exit code: 0 on success (a refused input raises and exits with 2).
    """
    from ..demo import run_demo

    with progress_bar("demo", quiet=a.quiet) as progress:
        summary = run_demo(a.out, quick=a.quick, force=a.force, progress=progress, log=note)
    if a.quiet:
        return 0

    def fmt(v, f):
        return "—" if v is None else f.format(v)

    rows = [
        [
            name,
            fmt(v["t30_mid_s"], "{:.2f}"),
            fmt(v["edt_mid_s"], "{:.2f}"),
            fmt(v["c80_mid_db"], "{:+.1f}"),
            fmt(v["d50_mid"], "{:.2f}"),
            summary["quality"][name],
        ]
        for name, v in summary["positions"].items()
    ]
    avg = summary["average"]
    rows.append(
        [
            "average",
            fmt(avg["t30_mid_s"], "{:.2f}"),
            fmt(avg["edt_mid_s"], "{:.2f}"),
            fmt(avg["c80_mid_db"], "{:+.1f}"),
            fmt(avg["d50_mid"], "{:.2f}"),
            "",
        ]
    )
    print_table(
        ["position", "T30 s", "EDT s", "C80 dB", "D50", "quality"],
        rows,
        title="Quillmere Hall (demo) — mid-frequency figures (500 Hz / 1 kHz)",
        right=(1, 2, 3, 4),
    )
    dev = summary["t30_vs_eyring_pct"]
    if dev:
        out(
            f"measured T30 against the Eyring prediction: {dev[0]:+.1f} % to {dev[1]:+.1f} % "
            "across bands",
            a,
        )
    out(f"done in {summary['seconds']:.1f} s; files:", a)
    for p in summary["files"]:
        out(f"  {p}", a)
    return 0


def configure_demo(p):
    """Add the options of ``roomconv demo`` to its sub-parser ``p`` (an argparse parser)."""
    p.add_argument("--out", type=Path, default=Path("demo_out"), help="output folder (demo_out)")
    p.add_argument("--quick", action="store_true", help="a smaller study (for tests)")
    p.add_argument("--force", action="store_true", help="overwrite the demo's earlier files")


COMMANDS = [
    Command(
        "demo", "run the built-in room study on our own demo hall", configure_demo, run_demo_command
    )
]
