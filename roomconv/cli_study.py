"""The ``study`` command: write a commented study-file template, or check a study file."""

from __future__ import annotations

from pathlib import Path

from .audio import write_text
from .cli import _out, command


@command("study", "write a commented study file to fill in (init), or check one (check)")
def cmd_study(a):
    from .study import load_study, template_text
    if a.action == "init":
        if a.path.suffix.lower() != ".toml":
            from .errors import InputError
            raise InputError(f"{a.path}: a study file ends in .toml; choose a name such as "
                             "study.toml")
        write_text(a.path, template_text(a.title), force=a.force)
        _out(f"wrote {a.path}: fill it in, then 'roomconv analyze --study {a.path} "
             "--report DIR'", a)
        return 0
    s = load_study(a.path)
    missing = [s.display_path(r.file) for r in s.responses if not r.file.is_file()]
    _out(f"{a.path}: {s.title}; room {s.room.name}; {len(s.sources)} source(s), "
         f"{len(s.receivers)} receiver(s), {len(s.responses)} response(s)", a)
    if missing:
        from .errors import InputError
        raise InputError(f"{a.path}: responses not found: {', '.join(missing)}; check the "
                         "paths (relative to the study file)")
    return 0


def _cfg(p):
    p.add_argument("action", choices=("init", "check"),
                   help="init: write a template; check: validate a study file and its paths")
    p.add_argument("path", type=Path, metavar="STUDY.toml", help="the study file")
    p.add_argument("--title", default="Acoustic measurements",
                   help="title written into the template (init)")
    p.add_argument("--force", action="store_true", help="replace an existing file (init)")


cmd_study.configure = _cfg
