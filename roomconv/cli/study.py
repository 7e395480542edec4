"""The ``study`` command: write a commented study-file template, or check a study file."""

from __future__ import annotations

from pathlib import Path

from ..errors import InputError
from ..jobs.study import check_study, init_study
from .common import Command, out

__all__ = ["COMMANDS"]


def run_study(a):
    """Run ``roomconv study``: write a study-file template (``init``) or check one
    (``check``) through :mod:`roomconv.jobs.study`.

    Parameters
    ----------
    a : argparse.Namespace
        The parsed options of the command.

    Returns
    -------
    int
        The exit code: 0 on success (a refused input raises and exits with 2).
    """
    if a.action == "init":
        init_study(a.path, title=a.title, force=a.force)
        out(f"wrote {a.path}: fill it in, then 'roomconv analyze --study {a.path} --report DIR'", a)
        return 0
    res = check_study(a.path)
    s = res.study
    out(
        f"{a.path}: {s.title}; room {s.room.name}; {len(s.sources)} source(s), "
        f"{len(s.receivers)} receiver(s), {len(s.responses)} response(s)",
        a,
    )
    if res.missing:
        raise InputError(
            f"{a.path}: responses not found: {', '.join(res.missing)}; check the "
            "paths (relative to the study file)"
        )
    return 0


def configure_study(p):
    """Add the options of ``roomconv study`` to its sub-parser ``p`` (an argparse parser)."""
    p.add_argument(
        "action",
        choices=("init", "check"),
        help="init: write a template; check: validate a study file and its paths",
    )
    p.add_argument("path", type=Path, metavar="STUDY.toml", help="the study file")
    p.add_argument(
        "--title", default="Acoustic measurements", help="title written into the template (init)"
    )
    p.add_argument("--force", action="store_true", help="replace an existing file (init)")


COMMANDS = [
    Command(
        "study",
        "write a commented study file to fill in (init), or check one (check)",
        configure_study,
        run_study,
    )
]
