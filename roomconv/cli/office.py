"""The ``office`` command: an open-plan office line of positions (ISO 3382-3) from a study
file: speech level and STI per position, D2,S, Lp,A,S,4m, rD, rC and rP."""

from __future__ import annotations

from pathlib import Path

from ..jobs.office import office_study
from .common import Command, out
from .display import print_table, progress_bar
from .speech import print_cautions

__all__ = ["COMMANDS"]


def _v(x, spec="{:.2f}"):
    return "—" if x is None else spec.format(x)


def show_office(doc: dict) -> None:
    """Print the office document: a table of positions (distance, speech level, STI and
    its band), each position's STI warnings, then D2,S, Lp,A,S,4m, rD, rC and rP, each
    value or "not evaluable" with its reason, and the regressions' warnings.

    Parameters
    ----------
    doc : dict
        The document of :func:`roomconv.jobs.office.office_study` (``positions`` and
        ``office``).
    """
    rows = [
        [
            f"{p['source']}-{p['receiver']}",
            f"{p['distance_m']:.2f}",
            _v(p["speech_level_a_db"], "{:.1f}"),
            _v(p["sti"]["value"]),
            p["sti"]["band"] or "—",
        ]
        for p in doc["positions"]
    ]
    print_table(
        ["position", "distance m", "speech dB(A)", "STI", "band"],
        rows,
        right=range(1, 5),
        title=f"{doc['title']}: open-plan office positions",
    )
    for p in doc["positions"]:
        for w in p["sti"]["warnings"]:
            print(f"  ! {p['source']}-{p['receiver']}: {w}")
    o = doc["office"]
    print(f"Single numbers ({o['edition']}; regressions over {o['fit_range_m'][0]:g}-"
          f"{o['fit_range_m'][1]:g} m):")  # fmt: skip
    for key, name, unit, spec in (
        ("d2s_db", "D2,S", "dB", "{:.1f}"),
        ("lp_a_s_4m_db", "Lp,A,S,4m", "dB(A)", "{:.1f}"),
        ("r_d_m", "rD", "m", "{:.1f}"),
        ("r_c_m", "rC", "m", "{:.1f}"),
        ("r_p_m", "rP (2012 edition)", "m", "{:.1f}"),
    ):
        v = o[key]
        text = (
            f"{spec.format(v)} {unit}" if v is not None else f"not evaluable ({o['reasons'][key]})"
        )
        print(f"  {name}: {text}")
    for w in o["warnings"]:
        print(f"  ! {w}")


def run_office(a):
    """Run ``roomconv office``: an open-plan office line of positions (ISO 3382-3:2022) from
    a study file through :func:`roomconv.jobs.office.office_study`, shown as a table with
    the single numbers, the cautions printed, and written as JSON and a report when asked.

    Parameters
    ----------
    a : argparse.Namespace
        The parsed options of the command.

    Returns
    -------
    int
        The exit code: 0 on success (a refused input raises and exits with 2).
    """
    with progress_bar("office", quiet=a.quiet) as progress:
        res = office_study(
            a.study,
            json_path=a.json,
            report_dir=a.report,
            voice=a.voice,
            force=a.force,
            progress=progress,
        )
    if not a.quiet:
        show_office(res.document)
    print_cautions(res.document, a)
    for p in res.written:
        out(f"wrote {p}", a)
    return 0


def configure_office(p):
    """Add the options of ``roomconv office`` to its sub-parser ``p`` (an argparse parser)."""
    p.add_argument(
        "study",
        type=Path,
        metavar="STUDY.toml",
        help="a study file with an [office] table and a distance for every response "
        "(see 'roomconv study init')",
    )
    p.add_argument("--json", type=Path, default=None, metavar="OUT.json", help="write the results")
    p.add_argument(
        "--report", type=Path, default=None, metavar="DIR", help="write DIR/office.html with plots"
    )
    p.add_argument(
        "--voice",
        choices=("male", "female"),
        default="male",
        help="band weighting of the STI (default male)",
    )
    p.add_argument("--force", action="store_true", help="replace existing outputs")


COMMANDS = [
    Command(
        "office",
        "open-plan office line (ISO 3382-3): speech level, STI and their distances",
        configure_office,
        run_office,
    )
]
