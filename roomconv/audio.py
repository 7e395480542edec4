"""Reading and writing audio and JSON sidecars, safely.

Every write goes through a :class:`WriteGuard`: a temporary file in the destination folder,
moved into place by a no-clobber final step, so a crash never leaves half a file; an existing
output is refused unless ``force`` is given, and an input is never overwritten, whatever name
reaches it.
"""

from __future__ import annotations

import contextlib
import errno
import hashlib
import json
import os
import re
import secrets
import socket
import stat
import time
from pathlib import Path
from typing import Iterable, Iterator

import numpy as np
import soundfile as sf

from . import __version__
from .errors import InputError, OutputExistsError, RoomconvError, describe

#: Extensions we write, mapped to soundfile container names.
_FORMATS = {".wav": "WAV", ".flac": "FLAC", ".aif": "AIFF", ".aiff": "AIFF", ".w64": "W64"}
_WAV_LIMIT_BYTES = 4 * 1024**3 - 1024  # RIFF size fields are 32-bit


def read_audio(path, *, what: str = "audio file") -> tuple[np.ndarray, int]:
    """Read a whole audio file as float64, shape (samples, channels).

    Raises :class:`InputError` naming the file when it is missing, unreadable, truncated,
    empty or holds non-finite samples.
    """
    p = check_input_file(path, what)
    try:
        info = sf.info(str(p))
        data, rate = sf.read(str(p), dtype="float64", always_2d=True)
    except (sf.LibsndfileError, RuntimeError, ValueError) as exc:
        raise InputError(describe(p, f"cannot be read as audio: {exc}",
                                  "is it a complete WAV/FLAC/AIFF file?")) from None
    _check_truncation(p, info)
    if data.shape[0] == 0:
        raise InputError(describe(p, f"{what} holds no samples"))
    if not np.all(np.isfinite(data)):
        bad = int(np.count_nonzero(~np.isfinite(data)))
        raise InputError(describe(p, f"{what} holds {bad} NaN or infinite samples",
                                  "re-export it from the recording software"))
    return data, int(rate)


def _check_truncation(p: Path, info) -> None:
    """libsndfile quietly reads a WAV whose data chunk is cut short; we do not."""
    extra = getattr(info, "extra_info", "") or ""
    if re.search(r"^data\s*:\s*\d+\s*\(should be", extra, flags=re.MULTILINE):
        raise InputError(describe(p, "the WAV file is truncated (its header promises more data "
                                     "than the file holds)", "copy it again from the source"))


def audio_info(path) -> sf._SoundFileInfo:
    """soundfile's header information, with our error message on failure."""
    p = check_input_file(path, "audio file")
    try:
        info = sf.info(str(p))
    except (sf.LibsndfileError, RuntimeError) as exc:
        raise InputError(describe(p, f"cannot be read as audio: {exc}")) from None
    _check_truncation(p, info)
    return info


def check_output(path, *, force: bool = False, inputs: Iterable = ()) -> Path:
    """Validate one output path before any work is done (a one-file :class:`WriteGuard`)."""
    return WriteGuard(inputs, force=force).file(path)


@contextlib.contextmanager
def atomic_path(path, *, force: bool = False, inputs: Iterable = ()) -> Iterator[Path]:
    """Yield a temporary path beside ``path``; move it into place when the block succeeds."""
    with WriteGuard(inputs, force=force) as g, g.target(path) as tmp:
        yield tmp


def audio_format_for(path, n_bytes: int = 0) -> str:
    """Container for ``path``'s extension; RF64 once a WAV would pass the 4 GiB RIFF limit."""
    ext = Path(path).suffix.lower()
    if ext not in _FORMATS:
        raise InputError(describe(path, f"unsupported output extension '{ext}'",
                                  "use .wav, .flac, .aiff or .w64"))
    fmt = _FORMATS[ext]
    if fmt == "WAV" and n_bytes > _WAV_LIMIT_BYTES:
        fmt = "RF64"
    return fmt


def write_audio(path, data: np.ndarray, rate: int, *, subtype: str = "FLOAT",
                force: bool = False, inputs: Iterable = ()) -> Path:
    """Write ``data`` (samples × channels, or 1-D) through a one-file guard."""
    with WriteGuard(inputs, force=force) as g:
        return g.write_audio(path, data, rate, subtype=subtype)


def _check_subtype(path, fmt: str, subtype: str) -> None:
    if not sf.check_format(fmt, subtype):
        raise InputError(describe(path, f"the {fmt} format cannot hold subtype {subtype}",
                                  "try FLOAT or PCM_24"))


def write_json(path, obj, *, force: bool = False, inputs: Iterable = ()) -> Path:
    """Write ``obj`` as indented JSON (NaN written as null) through a one-file guard."""
    with WriteGuard(inputs, force=force) as g:
        return g.write_json(path, obj)


def write_text(path, text: str, *, force: bool = False, inputs: Iterable = ()) -> Path:
    """Write a text file through a one-file guard."""
    with WriteGuard(inputs, force=force) as g:
        return g.write_text(path, text)


def read_json(path, *, what: str = "JSON file") -> dict:
    p = check_input_file(path, what)
    try:
        return json.loads(p.read_text(encoding="utf-8"))
    except (json.JSONDecodeError, UnicodeDecodeError) as exc:
        raise InputError(describe(p, f"{what} is not valid JSON: {exc}")) from None


def _jsonable(obj):
    """Convert numpy scalars/arrays and non-finite floats into plain JSON values."""
    if isinstance(obj, dict):
        return {str(k): _jsonable(v) for k, v in obj.items()}
    if isinstance(obj, (list, tuple)):
        return [_jsonable(v) for v in obj]
    if isinstance(obj, np.ndarray):
        return [_jsonable(v) for v in obj.tolist()]
    if isinstance(obj, (np.floating, float)):
        f = float(obj)
        return f if np.isfinite(f) else None
    if isinstance(obj, np.integer):
        return int(obj)
    if isinstance(obj, np.bool_):
        return bool(obj)
    if isinstance(obj, Path):
        return str(obj)
    return obj


def sidecar_path(path, kind: str) -> Path:
    """``hall.wav`` → ``hall.<kind>.json``.

    When that name would pass the file-name limit (a legal long output name plus the
    sidecar's longer suffix), the stem is shortened and a hash of the full stem keeps the name
    unique and the same from run to run.
    """
    p = Path(path)
    name = f"{p.stem}.{kind}.json"
    limit = _name_max(p.parent if str(p.parent) else Path("."))
    if len(name.encode()) > limit:
        tag = hashlib.sha256(p.stem.encode()).hexdigest()[:12]
        keep = limit - len(f"~{tag}.{kind}.json".encode())
        stem = p.stem.encode()[:keep].decode(errors="ignore")
        name = f"{stem}~{tag}.{kind}.json"
    return p.with_name(name)


def file_sha256(path, chunk: int = 1 << 20) -> str:
    h = hashlib.sha256()
    with open(path, "rb") as fh:
        while block := fh.read(chunk):
            h.update(block)
    return h.hexdigest()


def output_record(path) -> dict:
    """What a later run checks to trust a finished output: frames and SHA-256."""
    rec = {"file": str(path), "sha256": file_sha256(path)}
    with contextlib.suppress(sf.LibsndfileError, RuntimeError):
        rec["frames"] = int(sf.info(str(path)).frames)
    return rec


def provenance(inputs: Iterable, settings: dict, output=None) -> dict:
    """A provenance record: inputs with their hashes, the settings, roomconv's version and,
    when given, the output's frame count and hash."""
    rec = {
        "roomconv_version": __version__,
        "inputs": [{"file": str(p), "sha256": file_sha256(p)} for p in inputs],
        "settings": settings,
    }
    if output is not None:
        rec["output"] = output_record(output)
    return rec


def write_provenance(output, inputs: Iterable, settings: dict, *, force: bool = False,
                     guard: "WriteGuard | None" = None) -> Path:
    """Write ``<output stem>.provenance.json`` beside ``output`` through ``guard`` (or a
    one-file guard that knows ``inputs``); like any output it is replaced only with ``force``."""
    inputs = list(inputs)
    side = sidecar_path(output, "provenance")
    doc = provenance(inputs, settings, output=output if Path(output).is_file() else None)
    if guard is not None:
        return guard.write_json(side, doc)
    with WriteGuard([*inputs, output], force=force) as g:
        return g.write_json(side, doc)


# --- one guard for every write ------------------------------------------------------------
#
# Temporary files are named ``.rc-<host>-<pid>-<random>.tmp``: short, so that a final name
# of the longest legal length still fits, and distinctive, so that a later run can recognise
# (and only ever remove) leftovers of a run that was killed before it could clean up. The
# host tag keeps a run from judging process ids of another machine on a shared folder.
TEMP_PREFIX = ".rc-"
TEMP_SUFFIX = ".tmp"
_HOST = hashlib.sha256(socket.gethostname().encode()).hexdigest()[:4]
_TEMP_RE = re.compile(r"^\.rc-([0-9a-f]{4})-(\d+)-[A-Za-z0-9_]{4,16}\.tmp$")
_PROCESS_START = time.time()
_LIVE_TEMPS: set[Path] = set()
_LIVE_GUARDS: list["WriteGuard"] = []
_SWEPT: set[str] = set()
_LINK_UNSUPPORTED = {errno.EPERM, errno.ENOTSUP, errno.EOPNOTSUPP, errno.EXDEV, errno.EMLINK,
                     errno.ENOSYS}
_FULL = {errno.ENOSPC, errno.EDQUOT}


def _name_max(folder: Path) -> int:
    try:
        return os.pathconf(folder if folder.is_dir() else ".", "PC_NAME_MAX")
    except (OSError, ValueError):
        return 255


def _path_max() -> int:
    try:
        return os.pathconf(".", "PC_PATH_MAX")
    except (OSError, ValueError):
        return 4096


def _stat(p: Path, *, follow: bool = True):
    """``os.stat`` that turns the path problems a user can make into InputError."""
    try:
        return os.stat(p, follow_symlinks=follow)
    except FileNotFoundError:
        return None
    except NotADirectoryError:
        raise InputError(describe(_short(p), "a part of this path is a file, not a folder",
                                  "check the path")) from None
    except OSError as exc:
        if exc.errno == errno.ELOOP:
            raise InputError(describe(_short(p), "is a loop of symbolic links",
                                      "fix or remove the link")) from None
        if exc.errno == errno.ENAMETOOLONG:
            raise InputError(describe(_short(p), f"the path is too long ({len(str(p))} "
                                      "characters)", "use a shorter name or folder")) from None
        raise InputError(describe(_short(p), f"cannot be examined: {exc.strerror}")) from None


def _short(p) -> str:
    """A path short enough for a one-line message."""
    s = str(p)
    return s if len(s) <= 160 else f"{s[:70]}…{s[-70:]} ({len(s)} characters)"


def check_input_file(path, what: str = "file") -> Path:
    """Refuse an input that is missing, a folder, or not a regular file (a FIFO would block
    the reader forever; a device would never end) before anything opens it."""
    p = Path(path)
    st = _stat(p)
    if st is None:
        if os.path.islink(p):
            raise InputError(describe(_short(p), f"{what} is a broken symbolic link",
                                      "check the path"))
        raise InputError(describe(_short(p), f"{what} not found", "check the path"))
    if stat.S_ISDIR(st.st_mode):
        raise InputError(describe(_short(p), f"is a directory, not a file ({what} expected)"))
    if not stat.S_ISREG(st.st_mode):
        raise InputError(describe(_short(p), "is not a regular file but a pipe, socket or "
                                  f"device ({what} expected)", "copy it to a file first"))
    return p


def _identity(p: Path) -> tuple[str, tuple[int, int] | None]:
    """What makes two names the same file: the resolved path, and device + inode for an
    existing file (which also catches hard links)."""
    st = _stat(p)
    return os.path.realpath(p), ((st.st_dev, st.st_ino) if st is not None else None)


def _same(a, b) -> bool:
    return a[0] == b[0] or (a[1] is not None and a[1] == b[1])


def _pid_alive(pid: int) -> bool:
    try:
        os.kill(pid, 0)
    except ProcessLookupError:
        return False
    except OSError:  # it exists but belongs to someone else
        return True
    return True


def sweep_stale_temps(folder) -> list[Path]:
    """Remove temporary files of our own pattern left in ``folder`` by a run that was killed.

    Only names matching ``.rc-<host>-<pid>-<random>.tmp`` made on this machine by a process
    that no longer exists, and older than this process, are removed; anything else is left
    alone.
    """
    folder = Path(folder) if str(folder) else Path(".")
    removed = []
    try:
        entries = list(os.scandir(folder))
    except OSError:
        return removed
    for e in entries:
        m = _TEMP_RE.match(e.name)
        if not m or m.group(1) != _HOST:
            continue
        pid = int(m.group(2))
        if pid == os.getpid() or _pid_alive(pid):
            continue
        try:
            st = e.stat(follow_symlinks=False)
            if stat.S_ISREG(st.st_mode) and st.st_mtime < _PROCESS_START:
                os.unlink(e.path)
                removed.append(Path(e.path))
        except OSError:
            continue
    return removed


def new_temp(folder, target=None) -> Path:
    """A fresh temporary file of our pattern in ``folder`` (registered for clean-up);
    ``target``, the file it will become, is named in error messages."""
    folder = Path(folder) if str(folder) else Path(".")
    for _ in range(100):
        p = folder / f"{TEMP_PREFIX}{_HOST}-{os.getpid()}-{secrets.token_hex(4)}{TEMP_SUFFIX}"
        # Registered before it exists, so an interrupt at any point cannot orphan it.
        _LIVE_TEMPS.add(p)
        try:
            fd = os.open(p, os.O_WRONLY | os.O_CREAT | os.O_EXCL, 0o600)
        except FileExistsError:
            _LIVE_TEMPS.discard(p)
            continue
        except OSError as exc:
            _LIVE_TEMPS.discard(p)
            raise write_error(exc, target or folder, folder) or exc from None
        os.close(fd)
        return p
    raise RoomconvError(describe(folder, "cannot find a free temporary file name"))


def drop_temp(p: Path) -> None:
    with contextlib.suppress(FileNotFoundError):
        os.unlink(p)
    _LIVE_TEMPS.discard(Path(p))


def _umask() -> int:
    m = os.umask(0)
    os.umask(m)
    return m


def _nearly_full(folder: Path) -> bool:
    try:
        st = os.statvfs(folder)
    except OSError:
        return False
    return st.f_blocks > 0 and st.f_bavail * st.f_frsize < 1 << 20


def write_error(exc: BaseException, target, folder: Path | None = None) -> RoomconvError | None:
    """Translate a failed write into one line; ``None`` when it is not ours to explain."""
    folder = folder or Path(target).parent
    err = getattr(exc, "errno", None)
    if isinstance(exc, OSError) and err is not None:
        full = err in _FULL
    else:
        # libsndfile reports a full disk only as "System error": look at the disk itself
        # (a pseudo file system reports no blocks at all, and is not "full").
        full = _nearly_full(folder)
    if full:
        return InputError(f"no space left on device while writing {_short(target)} (free some "
                          "space or write elsewhere; nothing was left behind)")
    if err in (errno.EACCES, errno.EROFS, errno.EPERM):
        return InputError(describe(_short(target), "cannot be written: "
                                   f"{getattr(exc, 'strerror', exc)}", "check the permissions"))
    if isinstance(exc, OSError):
        return InputError(describe(_short(target), f"cannot be written: {exc.strerror or exc}"))
    return None


def commit(tmp: Path, final: Path, *, force: bool) -> None:
    """Move a finished temporary file to its final name.

    Without ``force`` the last step never replaces anything: a hard link to the final name
    succeeds only if that name is still free, so of two processes racing for one new file
    exactly one wins. Where hard links are not supported an exclusive create reserves the name
    first. With ``force`` the file is renamed over the old one atomically.
    """
    os.chmod(tmp, 0o666 & ~_umask())
    if force:
        os.replace(tmp, final)
        _LIVE_TEMPS.discard(tmp)
        return
    try:
        os.link(tmp, final)
    except FileExistsError:
        raise OutputExistsError(describe(_short(final), "appeared while this run was working "
                                         "(another process wrote it)",
                                         "nothing was replaced"))
    except OSError as exc:
        if exc.errno not in _LINK_UNSUPPORTED:
            raise
        try:
            fd = os.open(final, os.O_WRONLY | os.O_CREAT | os.O_EXCL, 0o666)
        except FileExistsError:
            raise OutputExistsError(describe(_short(final), "appeared while this run was "
                                             "working (another process wrote it)",
                                             "nothing was replaced")) from None
        # Until the rename, the reserved (empty) name counts as ours to remove on interrupt.
        _LIVE_TEMPS.add(final)
        os.close(fd)
        os.replace(tmp, final)
        _LIVE_TEMPS.discard(final)
    else:
        os.unlink(tmp)
    _LIVE_TEMPS.discard(tmp)


class WriteGuard:
    """Every file and folder one command writes, checked against all of its inputs.

    Plan each output with :meth:`file` or :meth:`folder` before any work starts, so a refusal
    never leaves half of a command's outputs behind; then write through :meth:`target` (or
    :meth:`write_audio` / :meth:`write_json` / :meth:`write_text`). The guard

    - refuses an output that is one of the inputs, whatever name reaches it (symbolic links,
      ``..``, hard links), even with ``force``;
    - refuses two outputs of the same command that are the same file;
    - refuses an existing output without ``force`` (checked when planned, and again at the
      no-clobber final step of :func:`commit`);
    - creates planned folders only when something is written into them, and :meth:`abort`
      removes the folders it created (when empty) and its temporary files.
    """

    def __init__(self, inputs: Iterable = (), *, force: bool = False):
        self.force = force
        self._inputs: list[tuple[Path, tuple]] = []
        self._outputs: list[tuple[Path, tuple]] = []
        self._folders: list[Path] = []
        self._created: list[Path] = []
        self._new_files: list[tuple[Path, tuple[int, int]]] = []
        for p in inputs:
            self.add_input(p)

    # -- planning ------------------------------------------------------------------------
    def add_input(self, path) -> None:
        if path is None:
            return
        p = Path(path)
        self._inputs.append((p, _identity(p)))

    def _check_name(self, p: Path, *, folder: bool = False) -> None:
        if str(p) in ("", ".") and not folder:
            # argparse turns '' into Path('.'), so both read the same here.
            raise InputError("an output file name is empty or '.' (give a file name)")
        if len(str(p)) >= _path_max():
            raise InputError(describe(_short(p), f"the path is too long ({len(str(p))} "
                                      f"characters; the limit here is {_path_max() - 1})"))
        limit = _name_max(p.parent if str(p.parent) else Path("."))
        if len(p.name.encode()) > limit:
            raise InputError(describe(_short(p), f"the file name is {len(p.name.encode())} "
                                      f"bytes long; the limit here is {limit}",
                                      "use a shorter name"))

    def _check_against(self, p: Path, ident) -> None:
        for src, sid in self._inputs:
            if _same(ident, sid):
                alias = "" if str(src) == str(p) else f" (as {_short(src)})"
                raise InputError(describe(_short(p), f"is also an input{alias}; roomconv "
                                          "never writes over an input",
                                          "choose another output name"))
        for other, oid in self._outputs:
            if _same(ident, oid):
                alias = "" if str(other) == str(p) else f" (also as {_short(other)})"
                raise InputError(describe(_short(p), f"would be written twice by this "
                                          f"command{alias}", "choose distinct output names"))

    def _folder_ok(self, p: Path, folder: Path) -> None:
        if any(_same(_identity(folder), _identity(f)) for f in self._folders):
            return
        st = _stat(folder)
        if st is None:
            raise InputError(describe(_short(p), f"folder {_short(folder)} does not exist",
                                      "create it first"))
        if not stat.S_ISDIR(st.st_mode):
            raise InputError(describe(_short(p), f"{_short(folder)} is not a folder"))
        if not os.access(folder, os.W_OK | os.X_OK):
            raise InputError(describe(_short(p), f"folder {_short(folder)} is not writable"))

    def file(self, path, *, exists_ok: bool = False) -> Path:
        """Plan an output file; returns it as a Path. ``exists_ok`` leaves the decision about
        an existing file to the caller (a batch resume)."""
        p = Path(path)
        self._check_name(p)
        folder = p.parent if str(p.parent) else Path(".")
        self._folder_ok(p, folder)
        st = _stat(p)
        if st is None and os.path.lexists(p):
            # A dangling symbolic link: the name is taken, and the final step would either
            # fail on it or replace it, so it counts as an existing output.
            st = os.lstat(p)
        if st is not None and stat.S_ISDIR(st.st_mode):
            raise InputError(describe(_short(p), "is a directory, expected a file name",
                                      "give a file name inside it"))
        if st is not None and not (stat.S_ISREG(st.st_mode) or stat.S_ISLNK(st.st_mode)):
            raise InputError(describe(_short(p), "exists and is not a regular file",
                                      "choose another output name"))
        ident = _identity(p)
        self._check_against(p, ident)
        if st is not None and not (self.force or exists_ok):
            raise OutputExistsError(describe(_short(p), "exists already",
                                             "nothing was replaced"))
        self._outputs.append((p, ident))
        if str(folder) not in _SWEPT and folder.is_dir():
            _SWEPT.add(str(folder))
            sweep_stale_temps(folder)
        return p

    def folder(self, path) -> Path:
        """Plan an output folder (created on first use by :meth:`make_folder`)."""
        p = Path(path)
        self._check_name(p, folder=True)
        st = _stat(p)
        if st is not None and not stat.S_ISDIR(st.st_mode):
            raise InputError(describe(_short(p), "exists and is not a folder",
                                      "give a folder name, or remove the file"))
        ident = _identity(p)
        for src, sid in self._inputs:
            if _same(ident, sid):
                raise InputError(describe(_short(p), "is also an input"))
        if st is None:
            parent = p.parent if str(p.parent) else Path(".")
            anc = parent
            while _stat(anc) is None and anc != anc.parent:
                anc = anc.parent
            ast = _stat(anc)
            if ast is not None and not stat.S_ISDIR(ast.st_mode):
                raise InputError(describe(_short(p), f"{_short(anc)} is a file, not a folder"))
            if ast is not None and not os.access(anc, os.W_OK | os.X_OK):
                raise InputError(describe(_short(p), f"folder {_short(anc)} is not writable"))
        self._folders.append(p)
        return p

    def make_folder(self, path) -> Path:
        """Create a planned folder (and missing parents), remembering what this run made."""
        p = Path(path)
        missing = []
        q = p
        while not q.exists() and q != q.parent:
            missing.append(q)
            q = q.parent
        for q in reversed(missing):
            try:
                q.mkdir()
            except FileExistsError:
                continue
            except OSError as exc:
                raise write_error(exc, q, q.parent) or exc from None
            self._created.append(q)
            if self not in _LIVE_GUARDS:  # so that end_run() can tidy after a failure
                _LIVE_GUARDS.append(self)
        return p

    # -- writing -------------------------------------------------------------------------
    def planned(self, path) -> bool:
        """Whether ``path`` is one of the outputs planned already."""
        ident = _identity(Path(path))
        return any(_same(ident, oid) for _, oid in self._outputs)

    @contextlib.contextmanager
    def target(self, path) -> Iterator[Path]:
        """Yield a temporary path beside ``path``; move it into place if the block succeeds.

        ``path`` is planned now if it was not before.
        """
        out = Path(path)
        folder = out.parent if str(out.parent) else Path(".")
        if any(_same(_identity(folder), _identity(f)) for f in self._folders):
            self.make_folder(folder)
        if not self.planned(out):
            self.file(out)
        tmp = new_temp(folder, out)
        try:
            try:
                yield tmp
            except (OSError, sf.LibsndfileError, RuntimeError) as exc:
                translated = write_error(exc, out, folder)
                if translated is None:
                    raise
                raise translated from None
            self.commit(tmp, out)
        finally:
            drop_temp(tmp)

    def commit(self, tmp: Path, final) -> None:
        """:func:`commit` with this guard's ``force``, remembering files that are new, so
        that :meth:`rollback` can remove them if the command fails later."""
        final = Path(final)
        existed = os.path.lexists(final)
        commit(tmp, final, force=self.force)
        if not existed:
            st = os.stat(final)
            self._new_files.append((final, (st.st_dev, st.st_ino)))
            if self not in _LIVE_GUARDS:
                _LIVE_GUARDS.append(self)

    def write_audio(self, path, data: np.ndarray, rate: int, *, subtype: str = "FLOAT") -> Path:
        arr = np.asarray(data)
        if arr.ndim == 1:
            arr = arr[:, None]
        if not np.all(np.isfinite(arr)):
            raise InputError(describe(path, "refusing to write non-finite samples"))
        bytes_per = 8 if subtype == "DOUBLE" else 4
        fmt = audio_format_for(path, arr.size * bytes_per)
        _check_subtype(path, fmt, subtype)
        with self.target(path) as tmp:
            sf.write(str(tmp), arr, int(rate), subtype=subtype, format=fmt)
            # libsndfile can stop short without an error; a file that is not whole is not kept.
            if sf.info(str(tmp)).frames != arr.shape[0]:
                raise OSError(errno.EIO, "the file came out shorter than its data")
        return Path(path)

    def write_json(self, path, obj) -> Path:
        text = json.dumps(_jsonable(obj), indent=2, allow_nan=False)
        with self.target(path) as tmp:
            tmp.write_text(text + "\n", encoding="utf-8")
        return Path(path)

    def write_text(self, path, text: str) -> Path:
        with self.target(path) as tmp:
            tmp.write_text(text, encoding="utf-8")
        return Path(path)

    # -- ending --------------------------------------------------------------------------
    def tidy(self) -> None:
        """Remove folders this run created that are still empty."""
        for q in reversed(self._created):
            with contextlib.suppress(OSError):
                q.rmdir()
        self._created = [q for q in self._created if q.exists()]

    def rollback(self) -> None:
        """After a failed command: remove the files it created new (still the very files it
        wrote), then the folders it created that are now empty. Files replaced with
        ``force`` cannot be restored and stay, complete."""
        for path, ident in reversed(self._new_files):
            with contextlib.suppress(OSError):
                st = os.stat(path)
                if (st.st_dev, st.st_ino) == ident:
                    os.unlink(path)
        self._new_files = []
        self.tidy()

    def close(self) -> None:
        self.tidy()
        with contextlib.suppress(ValueError):
            _LIVE_GUARDS.remove(self)

    def __enter__(self) -> "WriteGuard":
        return self

    def __exit__(self, *exc) -> None:
        self.close()


def drop_live_temps() -> None:
    """Remove every temporary file this process has open (on an interrupt)."""
    for p in list(_LIVE_TEMPS):
        drop_temp(p)


def end_run(*, failed: bool = False) -> None:
    """Remove every temporary file of this process and the folders its guards created that
    are empty; with ``failed``, also the files its guards created new, so that a command that
    fails half-way leaves nothing of its own behind. The CLI calls it when a command ends."""
    drop_live_temps()
    if failed:
        for g in list(_LIVE_GUARDS):
            g.rollback()
    for g in list(_LIVE_GUARDS):
        g.close()


def reset_run_state() -> None:
    """Forget what an earlier in-process run planned (the CLI calls it on entry)."""
    _LIVE_GUARDS.clear()
    _SWEPT.clear()
