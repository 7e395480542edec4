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
from collections.abc import Iterable, Iterator
from pathlib import Path

import numpy as np
import soundfile as sf

from . import __version__
from .errors import InputError, OutputExistsError, RoomconvError, describe

__all__ = [
    "TEMP_PREFIX",
    "TEMP_SUFFIX",
    "read_audio",
    "audio_info",
    "check_output",
    "atomic_path",
    "audio_format_for",
    "write_audio",
    "write_json",
    "write_text",
    "read_json",
    "sidecar_path",
    "file_sha256",
    "output_record",
    "provenance",
    "write_provenance",
    "check_input_file",
    "sweep_stale_temps",
    "new_temp",
    "drop_temp",
    "write_error",
    "commit",
    "WriteGuard",
    "drop_live_temps",
    "end_run",
    "reset_run_state",
]

#: Extensions we write, mapped to soundfile container names.
_FORMATS = {".wav": "WAV", ".flac": "FLAC", ".aif": "AIFF", ".aiff": "AIFF", ".w64": "W64"}
_WAV_LIMIT_BYTES = 4 * 1024**3 - 1024  # RIFF size fields are 32-bit


def read_audio(
    path, *, what: str = "audio file", measurement: int | None = None, single: bool = False
) -> tuple[np.ndarray, int]:
    """Read a whole audio file as float64, shape (samples, channels).

    A SOFA response set (``.sofa``) is read by :func:`roomconv.sofa.sofa_audio`: every
    measurement's receivers as channels, or one measurement's.

    Parameters
    ----------
    path : str or Path
    what : str
        What the file is ("impulse response"), used in a refusal.
    measurement : int, optional
        For a SOFA file: one measurement, counted from 1 (refused for other files).
    single : bool
        For a SOFA file without ``measurement``: refuse one of several measurements.

    Returns
    -------
    data : ndarray, shape (samples, channels)
        float64, full scale = 1.
    rate : int
        Sample rate, Hz.

    Raises
    ------
    InputError
        Naming the file when it is missing, unreadable, truncated, empty or holds non-finite
        samples.

    Examples
    --------
    >>> import tempfile
    >>> tmp = tempfile.TemporaryDirectory()
    >>> d = Path(tmp.name)
    >>> _ = write_audio(d / "a.wav", np.array([0.5, -0.5]), 48000)
    >>> data, rate = read_audio(d / "a.wav")
    >>> data.tolist(), rate
    ([[0.5], [-0.5]], 48000)
    >>> tmp.cleanup()
    """
    p = check_input_file(path, what)
    from .sofa.read import is_sofa

    if is_sofa(p):
        from .sofa.read import sofa_audio

        return sofa_audio(p, measurement=measurement, single=single)
    if measurement is not None:
        raise InputError(
            describe(p, "a measurement number applies to SOFA response sets only", "omit it")
        )
    try:
        info = sf.info(str(p))
        data, rate = sf.read(str(p), dtype="float64", always_2d=True)
    except (sf.LibsndfileError, RuntimeError, ValueError) as exc:
        raise InputError(
            describe(p, f"cannot be read as audio: {exc}", "is it a complete WAV/FLAC/AIFF file?")
        ) from None
    _check_truncation(p, info)
    if data.shape[0] == 0:
        raise InputError(describe(p, f"{what} holds no samples"))
    if not np.all(np.isfinite(data)):
        bad = int(np.count_nonzero(~np.isfinite(data)))
        raise InputError(
            describe(
                p,
                f"{what} holds {bad} NaN or infinite samples",
                "re-export it from the recording software",
            )
        )
    return data, int(rate)


def _check_truncation(p: Path, info) -> None:
    """libsndfile quietly reads a WAV whose data chunk is cut short; we do not."""
    extra = getattr(info, "extra_info", "") or ""
    if re.search(r"^data\s*:\s*\d+\s*\(should be", extra, flags=re.MULTILINE):
        raise InputError(
            describe(
                p,
                "the WAV file is truncated (its header promises more data than the file holds)",
                "copy it again from the source",
            )
        )


def audio_info(path) -> sf._SoundFileInfo:
    """soundfile's header information, with our refusal on failure.

    Parameters
    ----------
    path : str or Path

    Returns
    -------
    soundfile._SoundFileInfo
        ``frames``, ``samplerate`` (Hz), ``channels``, ``format``, ``subtype``.

    Raises
    ------
    InputError
        Naming the file when it is missing, unreadable or truncated.

    Examples
    --------
    >>> import tempfile
    >>> tmp = tempfile.TemporaryDirectory()
    >>> d = Path(tmp.name)
    >>> _ = write_audio(d / "a.wav", np.zeros((10, 2)), 44100)
    >>> i = audio_info(d / "a.wav")
    >>> i.frames, i.samplerate, i.channels
    (10, 44100, 2)
    >>> tmp.cleanup()
    """
    p = check_input_file(path, "audio file")
    try:
        info = sf.info(str(p))
    except (sf.LibsndfileError, RuntimeError) as exc:
        raise InputError(describe(p, f"cannot be read as audio: {exc}")) from None
    _check_truncation(p, info)
    return info


def check_output(path, *, force: bool = False, inputs: Iterable = ()) -> Path:
    """Validate one output path before any work is done (a one-file :class:`WriteGuard`).

    Parameters
    ----------
    path : str or Path
    force : bool
        Accept an existing file (to be replaced).
    inputs : iterable of path
        The command's inputs; the output may never be one of them.

    Returns
    -------
    Path

    Raises
    ------
    InputError
        When the output exists (without ``force``), is an input, or cannot be written there.

    Examples
    --------
    >>> import tempfile
    >>> tmp = tempfile.TemporaryDirectory()
    >>> d = Path(tmp.name)
    >>> check_output(d / "new.wav").name
    'new.wav'
    >>> tmp.cleanup()
    """
    return WriteGuard(inputs, force=force).file(path)


@contextlib.contextmanager
def atomic_path(path, *, force: bool = False, inputs: Iterable = ()) -> Iterator[Path]:
    """Context manager: a temporary path beside ``path``, moved into place when the block
    succeeds (and removed when it fails).

    Parameters
    ----------
    path : str or Path
    force : bool
    inputs : iterable of path

    Yields
    ------
    Path
        The temporary file to write.

    Examples
    --------
    >>> import tempfile
    >>> tmp = tempfile.TemporaryDirectory()
    >>> d = Path(tmp.name)
    >>> with atomic_path(d / "notes.txt") as t:
    ...     _ = t.write_text("hello")
    >>> (d / "notes.txt").read_text()
    'hello'
    >>> tmp.cleanup()
    """
    with WriteGuard(inputs, force=force) as g, g.target(path) as tmp:
        yield tmp


def audio_format_for(path, n_bytes: int = 0) -> str:
    """Container for ``path``'s extension; RF64 once a WAV would pass the 4 GiB RIFF limit.

    Parameters
    ----------
    path : str or Path
    n_bytes : int
        Expected size of the sample data, bytes.

    Returns
    -------
    str
        soundfile format name.

    Raises
    ------
    InputError
        For an extension roomconv does not write.

    Examples
    --------
    >>> audio_format_for("x.flac"), audio_format_for("x.wav", 5 * 1024**3)
    ('FLAC', 'RF64')
    """
    ext = Path(path).suffix.lower()
    if ext not in _FORMATS:
        raise InputError(
            describe(
                path, f"unsupported output extension '{ext}'", "use .wav, .flac, .aiff or .w64"
            )
        )
    fmt = _FORMATS[ext]
    if fmt == "WAV" and n_bytes > _WAV_LIMIT_BYTES:
        fmt = "RF64"
    return fmt


def write_audio(
    path,
    data: np.ndarray,
    rate: int,
    *,
    subtype: str = "FLOAT",
    force: bool = False,
    inputs: Iterable = (),
) -> Path:
    """Write ``data`` through a one-file guard (temporary file, then no-clobber rename).

    Parameters
    ----------
    path : str or Path
    data : ndarray, shape (samples,) or (samples, channels)
        Full scale = 1; must be finite.
    rate : int
        Sample rate, Hz.
    subtype : str
        soundfile subtype (``"FLOAT"``, ``"DOUBLE"``, ``"PCM_24"``, ...).
    force : bool
        Replace an existing file.
    inputs : iterable of path
        Files the output may never be.

    Returns
    -------
    Path

    Raises
    ------
    InputError
        When the file exists (without ``force``), the data are not finite, or the format cannot
        hold the subtype.

    Examples
    --------
    >>> import tempfile
    >>> tmp = tempfile.TemporaryDirectory()
    >>> d = Path(tmp.name)
    >>> _ = write_audio(d / "a.wav", np.zeros(4), 48000)
    >>> write_audio(d / "a.wav", np.zeros(4), 48000)
    Traceback (most recent call last):
    ...
    roomconv.errors.OutputExistsError: ...a.wav: exists already (...)
    >>> tmp.cleanup()
    """
    with WriteGuard(inputs, force=force) as g:
        return g.write_audio(path, data, rate, subtype=subtype)


def _check_subtype(path, fmt: str, subtype: str) -> None:
    if not sf.check_format(fmt, subtype):
        raise InputError(
            describe(path, f"the {fmt} format cannot hold subtype {subtype}", "try FLOAT or PCM_24")
        )


def write_json(path, obj, *, force: bool = False, inputs: Iterable = ()) -> Path:
    """Write ``obj`` as indented JSON (NaN and ±inf written as null) through a one-file guard.

    Parameters
    ----------
    path : str or Path
    obj : object
        dicts, lists, numbers (numpy ones too), strings, Paths.
    force : bool
    inputs : iterable of path

    Returns
    -------
    Path

    Examples
    --------
    >>> import tempfile
    >>> tmp = tempfile.TemporaryDirectory()
    >>> d = Path(tmp.name)
    >>> _ = write_json(d / "q.json", {"inr_db": np.float64(52.5), "c80_db": float("nan")})
    >>> read_json(d / "q.json")
    {'inr_db': 52.5, 'c80_db': None}
    >>> tmp.cleanup()
    """
    with WriteGuard(inputs, force=force) as g:
        return g.write_json(path, obj)


def write_text(path, text: str, *, force: bool = False, inputs: Iterable = ()) -> Path:
    """Write a text file (UTF-8) through a one-file guard.

    Parameters
    ----------
    path : str or Path
    text : str
    force : bool
    inputs : iterable of path

    Returns
    -------
    Path

    Examples
    --------
    >>> import tempfile
    >>> tmp = tempfile.TemporaryDirectory()
    >>> d = Path(tmp.name)
    >>> write_text(d / "r.txt", "T30 1.2 s").read_text()
    'T30 1.2 s'
    >>> tmp.cleanup()
    """
    with WriteGuard(inputs, force=force) as g:
        return g.write_text(path, text)


def read_json(path, *, what: str = "JSON file") -> dict:
    """Read a JSON file, refusing a missing, unreadable or malformed one with its name.

    Parameters
    ----------
    path : str or Path
    what : str
        What the file is, used in a refusal.

    Returns
    -------
    object
        The parsed content (any JSON value; callers check its shape).

    Raises
    ------
    InputError

    Examples
    --------
    >>> import tempfile
    >>> tmp = tempfile.TemporaryDirectory()
    >>> d = Path(tmp.name)
    >>> _ = (d / "x.json").write_text('{"rate": 48000}')
    >>> read_json(d / "x.json")
    {'rate': 48000}
    >>> tmp.cleanup()
    """
    p = check_input_file(path, what)
    try:
        return json.loads(p.read_text(encoding="utf-8"))
    except RecursionError:
        raise InputError(describe(p, f"{what} is nested too deeply to be read")) from None
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

    Parameters
    ----------
    path : str or Path
    kind : str
        ``"sweep"``, ``"provenance"``, ...

    Returns
    -------
    Path

    Examples
    --------
    >>> sidecar_path("out/hall.wav", "provenance").as_posix()
    'out/hall.provenance.json'
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
    """SHA-256 of a file's bytes, read in chunks.

    Parameters
    ----------
    path : str or Path
    chunk : int
        Read size, bytes.

    Returns
    -------
    str
        Hex digest.

    References
    ----------
    FIPS 180-4 (2015), Secure Hash Standard.

    Examples
    --------
    >>> import tempfile
    >>> tmp = tempfile.TemporaryDirectory()
    >>> d = Path(tmp.name)
    >>> _ = (d / "e").write_bytes(b"")
    >>> file_sha256(d / "e")[:16]  # the digest of no bytes
    'e3b0c44298fc1c14'
    >>> tmp.cleanup()
    """
    h = hashlib.sha256()
    with open(path, "rb") as fh:
        while block := fh.read(chunk):
            h.update(block)
    return h.hexdigest()


def output_record(path) -> dict:
    """What a later run checks to trust a finished output: its frames and SHA-256.

    Parameters
    ----------
    path : str or Path

    Returns
    -------
    dict
        ``file``, ``sha256`` and, for audio, ``frames``.

    Examples
    --------
    >>> import tempfile
    >>> tmp = tempfile.TemporaryDirectory()
    >>> d = Path(tmp.name)
    >>> _ = write_audio(d / "a.wav", np.zeros(7), 48000)
    >>> output_record(d / "a.wav")["frames"]
    7
    >>> tmp.cleanup()
    """
    rec: dict[str, str | int] = {"file": str(path), "sha256": file_sha256(path)}
    with contextlib.suppress(sf.LibsndfileError, RuntimeError):
        rec["frames"] = int(sf.info(str(path)).frames)
    return rec


def provenance(inputs: Iterable, settings: dict, output=None) -> dict:
    """A provenance record: inputs with their hashes, the settings, roomconv's version and,
    when given, the output's frame count and hash.

    Parameters
    ----------
    inputs : iterable of path
    settings : dict
    output : str or Path, optional

    Returns
    -------
    dict

    Examples
    --------
    >>> import tempfile
    >>> tmp = tempfile.TemporaryDirectory()
    >>> d = Path(tmp.name)
    >>> _ = (d / "in.wav").write_bytes(b"")
    >>> rec = provenance([d / "in.wav"], {"mix": 0.5})
    >>> sorted(rec), rec["settings"]
    (['inputs', 'roomconv_version', 'settings'], {'mix': 0.5})
    >>> tmp.cleanup()
    """
    rec = {
        "roomconv_version": __version__,
        "inputs": [{"file": str(p), "sha256": file_sha256(p)} for p in inputs],
        "settings": settings,
    }
    if output is not None:
        rec["output"] = output_record(output)
    return rec


def write_provenance(
    output,
    inputs: Iterable,
    settings: dict,
    *,
    force: bool = False,
    guard: WriteGuard | None = None,
) -> Path:
    """Write ``<output stem>.provenance.json`` beside ``output``.

    Through ``guard``, or a one-file guard that knows ``inputs``; like any output it is
    replaced only with ``force``.

    Parameters
    ----------
    output : str or Path
    inputs : iterable of path
    settings : dict
    force : bool
    guard : WriteGuard, optional

    Returns
    -------
    Path
        The sidecar.

    Examples
    --------
    >>> import tempfile
    >>> tmp = tempfile.TemporaryDirectory()
    >>> d = Path(tmp.name)
    >>> _ = write_audio(d / "wet.wav", np.zeros(3), 48000)
    >>> write_provenance(d / "wet.wav", [], {"gain_db": 0.0}).name
    'wet.provenance.json'
    >>> tmp.cleanup()
    """
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
_LIVE_GUARDS: list[WriteGuard] = []
_SWEPT: set[str] = set()
_LINK_UNSUPPORTED = {
    errno.EPERM,
    errno.ENOTSUP,
    errno.EOPNOTSUPP,
    errno.EXDEV,
    errno.EMLINK,
    errno.ENOSYS,
}
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
        raise InputError(
            describe(_short(p), "a part of this path is a file, not a folder", "check the path")
        ) from None
    except OSError as exc:
        if exc.errno == errno.ELOOP:
            raise InputError(
                describe(_short(p), "is a loop of symbolic links", "fix or remove the link")
            ) from None
        if exc.errno == errno.ENAMETOOLONG:
            raise InputError(
                describe(
                    _short(p),
                    f"the path is too long ({len(str(p))} characters)",
                    "use a shorter name or folder",
                )
            ) from None
        raise InputError(describe(_short(p), f"cannot be examined: {exc.strerror}")) from None


def _short(p) -> str:
    """A path short enough for a one-line message."""
    s = str(p)
    return s if len(s) <= 160 else f"{s[:70]}…{s[-70:]} ({len(s)} characters)"


def check_input_file(path, what: str = "file") -> Path:
    """Refuse an input that is missing, a folder, or not a regular file (a FIFO would block).

    Parameters
    ----------
    path : str or Path
    what : str
        What the file is, used in a refusal.

    Returns
    -------
    Path

    Raises
    ------
    InputError

    Examples
    --------
    >>> check_input_file("/nonexistent/dry.wav", "dry file")
    Traceback (most recent call last):
    ...
    roomconv.errors.InputError: /nonexistent/dry.wav: dry file not found (check the path)
    """
    p = Path(path)
    st = _stat(p)
    if st is None:
        if os.path.islink(p):
            raise InputError(
                describe(_short(p), f"{what} is a broken symbolic link", "check the path")
            )
        raise InputError(describe(_short(p), f"{what} not found", "check the path"))
    if stat.S_ISDIR(st.st_mode):
        raise InputError(describe(_short(p), f"is a directory, not a file ({what} expected)"))
    if not stat.S_ISREG(st.st_mode):
        raise InputError(
            describe(
                _short(p),
                f"is not a regular file but a pipe, socket or device ({what} expected)",
                "copy it to a file first",
            )
        )
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

    Parameters
    ----------
    folder : str or Path

    Returns
    -------
    list of Path
        The files removed.

    Examples
    --------
    >>> import tempfile
    >>> tmp = tempfile.TemporaryDirectory()
    >>> d = Path(tmp.name)
    >>> sweep_stale_temps(d)
    []
    >>> tmp.cleanup()
    """
    folder = Path(folder) if str(folder) else Path(".")
    removed: list[Path] = []
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
    """A fresh, empty temporary file of our pattern in ``folder``, registered for clean-up.

    Parameters
    ----------
    folder : str or Path
    target : str or Path, optional
        The file it will become, named in error messages.

    Returns
    -------
    Path

    Examples
    --------
    >>> import tempfile
    >>> tmp = tempfile.TemporaryDirectory()
    >>> d = Path(tmp.name)
    >>> t = new_temp(d)
    >>> t.name.startswith(TEMP_PREFIX), t.name.endswith(TEMP_SUFFIX)
    (True, True)
    >>> drop_temp(t)
    >>> tmp.cleanup()
    """
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
    """Remove a temporary file (if it is still there) and forget it.

    Parameters
    ----------
    p : Path

    Returns
    -------
    None

    Examples
    --------
    >>> import tempfile
    >>> tmp = tempfile.TemporaryDirectory()
    >>> d = Path(tmp.name)
    >>> t = new_temp(d)
    >>> drop_temp(t)
    >>> t.exists()
    False
    >>> tmp.cleanup()
    """
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
    """Translate a failed write into one line; ``None`` when it is not ours to explain.

    Parameters
    ----------
    exc : BaseException
        What the write raised.
    target : str or Path
        The file being written.
    folder : Path, optional
        Its folder (to tell a full disk from other failures).

    Returns
    -------
    RoomconvError or None

    Examples
    --------
    >>> import errno
    >>> print(write_error(OSError(errno.ENOSPC, "No space left"), "/data/out.wav"))
    no space left on device while writing /data/out.wav (free some space ...)
    """
    folder = folder or Path(target).parent
    err = getattr(exc, "errno", None)
    if isinstance(exc, OSError) and err is not None:
        full = err in _FULL
    else:
        # libsndfile reports a full disk only as "System error": look at the disk itself
        # (a pseudo file system reports no blocks at all, and is not "full").
        full = _nearly_full(folder)
    if full:
        return InputError(
            f"no space left on device while writing {_short(target)} (free some "
            "space or write elsewhere; nothing was left behind)"
        )
    if err in (errno.EACCES, errno.EROFS, errno.EPERM):
        return InputError(
            describe(
                _short(target),
                f"cannot be written: {getattr(exc, 'strerror', exc)}",
                "check the permissions",
            )
        )
    if isinstance(exc, OSError):
        return InputError(describe(_short(target), f"cannot be written: {exc.strerror or exc}"))
    return None


def commit(tmp: Path, final: Path, *, force: bool) -> None:
    """Move a finished temporary file to its final name.

    Without ``force`` the last step never replaces anything: a hard link to the final name
    succeeds only if that name is still free, so of two processes racing for one new file
    exactly one wins. Where hard links are not supported an exclusive create reserves the name
    first. With ``force`` the file is renamed over the old one atomically.

    Parameters
    ----------
    tmp : Path
    final : Path
    force : bool

    Returns
    -------
    None

    Raises
    ------
    OutputExistsError
        When ``final`` appeared meanwhile (without ``force``).

    Examples
    --------
    >>> import tempfile
    >>> tmp = tempfile.TemporaryDirectory()
    >>> d = Path(tmp.name)
    >>> t = new_temp(d)
    >>> commit(t, d / "out.bin", force=False)
    >>> (d / "out.bin").exists(), t.exists()
    (True, False)
    >>> tmp.cleanup()
    """
    os.chmod(tmp, 0o666 & ~_umask())
    if force:
        os.replace(tmp, final)
        _LIVE_TEMPS.discard(tmp)
        return
    try:
        os.link(tmp, final)
    except FileExistsError:
        raise OutputExistsError(
            describe(
                _short(final),
                "appeared while this run was working (another process wrote it)",
                "nothing was replaced",
            )
        ) from None
    except OSError as exc:
        if exc.errno not in _LINK_UNSUPPORTED:
            raise
        try:
            fd = os.open(final, os.O_WRONLY | os.O_CREAT | os.O_EXCL, 0o666)
        except FileExistsError:
            raise OutputExistsError(
                describe(
                    _short(final),
                    "appeared while this run was working (another process wrote it)",
                    "nothing was replaced",
                )
            ) from None
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
    - creates planned folders only when something is written into them; :meth:`close`
      removes the folders it created that stayed empty, and :meth:`rollback` the files it
      created new.

    Parameters
    ----------
    inputs : iterable of path
        The command's inputs (None entries are ignored).
    force : bool
        Replace existing outputs (never inputs).

    Examples
    --------
    >>> import tempfile
    >>> tmp = tempfile.TemporaryDirectory()
    >>> d = Path(tmp.name)
    >>> _ = (d / "dry.wav").write_bytes(b"")
    >>> with WriteGuard([d / "dry.wav"]) as g:
    ...     out = g.file(d / "wet.wav")
    ...     g.file(d / "." / "dry.wav")
    Traceback (most recent call last):
    ...
    roomconv.errors.InputError: ...dry.wav: is also an input; roomconv never writes over an input...
    >>> tmp.cleanup()
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
        """Add an input the outputs must never be (None is ignored).

        Parameters
        ----------
        path : str or Path or None

        Returns
        -------
        None

        Examples
        --------
        >>> g = WriteGuard()
        >>> g.add_input("/data/dry.wav")
        """
        if path is None:
            return
        p = Path(path)
        self._inputs.append((p, _identity(p)))

    def _check_name(self, p: Path, *, folder: bool = False) -> None:
        if str(p) in ("", ".") and not folder:
            # argparse turns '' into Path('.'), so both read the same here.
            raise InputError("an output file name is empty or '.' (give a file name)")
        if len(str(p)) >= _path_max():
            raise InputError(
                describe(
                    _short(p),
                    f"the path is too long ({len(str(p))} "
                    f"characters; the limit here is {_path_max() - 1})",
                )
            )
        limit = _name_max(p.parent if str(p.parent) else Path("."))
        if len(p.name.encode()) > limit:
            raise InputError(
                describe(
                    _short(p),
                    f"the file name is {len(p.name.encode())} "
                    f"bytes long; the limit here is {limit}",
                    "use a shorter name",
                )
            )

    def _check_against(self, p: Path, ident) -> None:
        for src, sid in self._inputs:
            if _same(ident, sid):
                alias = "" if str(src) == str(p) else f" (as {_short(src)})"
                raise InputError(
                    describe(
                        _short(p),
                        f"is also an input{alias}; roomconv never writes over an input",
                        "choose another output name",
                    )
                )
        for other, oid in self._outputs:
            if _same(ident, oid):
                alias = "" if str(other) == str(p) else f" (also as {_short(other)})"
                raise InputError(
                    describe(
                        _short(p),
                        f"would be written twice by this command{alias}",
                        "choose distinct output names",
                    )
                )

    def _folder_ok(self, p: Path, folder: Path) -> None:
        if any(_same(_identity(folder), _identity(f)) for f in self._folders):
            return
        st = _stat(folder)
        if st is None:
            raise InputError(
                describe(_short(p), f"folder {_short(folder)} does not exist", "create it first")
            )
        if not stat.S_ISDIR(st.st_mode):
            raise InputError(describe(_short(p), f"{_short(folder)} is not a folder"))
        if not os.access(folder, os.W_OK | os.X_OK):
            raise InputError(describe(_short(p), f"folder {_short(folder)} is not writable"))

    def file(self, path, *, exists_ok: bool = False) -> Path:
        """Plan an output file.

        Parameters
        ----------
        path : str or Path
        exists_ok : bool
            Leave the decision about an existing file to the caller (a batch resume).

        Returns
        -------
        Path

        Raises
        ------
        InputError
            When it is an input, planned twice, a folder, in a missing or read-only folder, or
            exists (without ``force`` or ``exists_ok``).

        Examples
        --------
        >>> import tempfile
        >>> with tempfile.TemporaryDirectory() as tmp:
        ...     WriteGuard().file(Path(tmp) / "wet.wav").name
        'wet.wav'
        """
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
            raise InputError(
                describe(
                    _short(p), "is a directory, expected a file name", "give a file name inside it"
                )
            )
        if st is not None and not (stat.S_ISREG(st.st_mode) or stat.S_ISLNK(st.st_mode)):
            raise InputError(
                describe(
                    _short(p), "exists and is not a regular file", "choose another output name"
                )
            )
        ident = _identity(p)
        self._check_against(p, ident)
        if any(_same(ident, _identity(f)) for f in self._folders):
            raise InputError(
                describe(
                    _short(p),
                    "is planned as a folder and as a file by this run",
                    "give the two outputs different names",
                )
            )
        if st is not None and not (self.force or exists_ok):
            raise OutputExistsError(describe(_short(p), "exists already", "nothing was replaced"))
        self._outputs.append((p, ident))
        if str(folder) not in _SWEPT and folder.is_dir():
            _SWEPT.add(str(folder))
            sweep_stale_temps(folder)
        return p

    def folder(self, path) -> Path:
        """Plan an output folder (created on first use by :meth:`make_folder`).

        Parameters
        ----------
        path : str or Path

        Returns
        -------
        Path

        Raises
        ------
        InputError
            When it is a file, an input, or under a file or a read-only folder.

        Examples
        --------
        >>> import tempfile
        >>> with tempfile.TemporaryDirectory() as tmp:
        ...     g = WriteGuard()
        ...     sub = g.folder(Path(tmp) / "renders")
        ...     sub.exists()  # not created yet
        False
        """
        p = Path(path)
        self._check_name(p, folder=True)
        st = _stat(p)
        if st is not None and not stat.S_ISDIR(st.st_mode):
            raise InputError(
                describe(
                    _short(p),
                    "exists and is not a folder",
                    "give a folder name, or remove the file",
                )
            )
        ident = _identity(p)
        for _src, sid in self._inputs:
            if _same(ident, sid):
                raise InputError(describe(_short(p), "is also an input"))
        if any(_same(ident, oid) for _, oid in self._outputs):
            raise InputError(
                describe(
                    _short(p),
                    "is planned as a file and as a folder by this run",
                    "give the two outputs different names",
                )
            )
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
        """Create a planned folder (and missing parents), remembering what this run made.

        Parameters
        ----------
        path : str or Path

        Returns
        -------
        Path

        Examples
        --------
        >>> import tempfile
        >>> with tempfile.TemporaryDirectory() as tmp:
        ...     with WriteGuard() as g:
        ...         sub = g.make_folder(g.folder(Path(tmp) / "a" / "b"))
        ...         made = sub.is_dir()
        ...     made, sub.exists()  # close() removed the folders that stayed empty
        (True, False)
        """
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
        """Whether ``path`` is one of the outputs planned already (whatever name reaches it).

        Parameters
        ----------
        path : str or Path

        Returns
        -------
        bool

        Examples
        --------
        >>> g = WriteGuard()
        >>> g.planned("/tmp/never-planned.wav")
        False
        """
        ident = _identity(Path(path))
        return any(_same(ident, oid) for _, oid in self._outputs)

    @contextlib.contextmanager
    def target(self, path) -> Iterator[Path]:
        """Context manager: a temporary path beside ``path``, moved into place if the block
        succeeds; ``path`` is planned now if it was not before.

        Parameters
        ----------
        path : str or Path

        Yields
        ------
        Path
            The temporary file to write.

        Examples
        --------
        >>> import tempfile
        >>> tmp = tempfile.TemporaryDirectory()
        >>> d = Path(tmp.name)
        >>> with WriteGuard() as g, g.target(d / "r.csv") as t:
        ...     _ = t.write_text("band_hz,t30_s")
        >>> (d / "r.csv").read_text()
        'band_hz,t30_s'
        >>> tmp.cleanup()
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
        that :meth:`rollback` can remove them if the command fails later.

        Parameters
        ----------
        tmp : Path
        final : str or Path

        Returns
        -------
        None

        Examples
        --------
        >>> import tempfile
        >>> tmp = tempfile.TemporaryDirectory()
        >>> d = Path(tmp.name)
        >>> g = WriteGuard()
        >>> g.commit(new_temp(d), d / "x.bin")
        >>> g.rollback()  # the command failed later: the new file goes
        >>> (d / "x.bin").exists()
        False
        >>> tmp.cleanup()
        """
        final = Path(final)
        existed = os.path.lexists(final)
        commit(tmp, final, force=self.force)
        if not existed:
            st = os.stat(final)
            self._new_files.append((final, (st.st_dev, st.st_ino)))
            if self not in _LIVE_GUARDS:
                _LIVE_GUARDS.append(self)

    def write_audio(self, path, data: np.ndarray, rate: int, *, subtype: str = "FLOAT") -> Path:
        """Write audio through :meth:`target`; a file that libsndfile wrote short is not kept.

        Parameters
        ----------
        path : str or Path
        data : ndarray, shape (samples,) or (samples, channels)
            Full scale = 1; must be finite.
        rate : int
            Sample rate, Hz.
        subtype : str
            soundfile subtype (``"FLOAT"``, ``"DOUBLE"``, ``"PCM_24"``, ...).

        Returns
        -------
        Path

        Examples
        --------
        >>> import tempfile
        >>> tmp = tempfile.TemporaryDirectory()
        >>> d = Path(tmp.name)
        >>> WriteGuard().write_audio(d / "a.flac", np.zeros((5, 2)), 48000, subtype="PCM_24").name
        'a.flac'
        >>> tmp.cleanup()
        """
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
        """Write JSON through :meth:`target` (NaN and ±inf written as null).

        Parameters
        ----------
        path : str or Path
        obj : object
            dicts, lists, numbers (numpy ones too), strings, Paths.

        Returns
        -------
        Path

        Examples
        --------
        >>> import tempfile
        >>> tmp = tempfile.TemporaryDirectory()
        >>> d = Path(tmp.name)
        >>> WriteGuard().write_json(d / "s.json", {"band_hz": [500, 1000]}).name
        's.json'
        >>> tmp.cleanup()
        """
        text = json.dumps(_jsonable(obj), indent=2, allow_nan=False)
        with self.target(path) as tmp:
            tmp.write_text(text + "\n", encoding="utf-8")
        return Path(path)

    def write_text(self, path, text: str) -> Path:
        """Write UTF-8 text through :meth:`target`.

        Parameters
        ----------
        path : str or Path
        text : str

        Returns
        -------
        Path

        Examples
        --------
        >>> import tempfile
        >>> tmp = tempfile.TemporaryDirectory()
        >>> d = Path(tmp.name)
        >>> WriteGuard().write_text(d / "n.txt", "ok").read_text()
        'ok'
        >>> tmp.cleanup()
        """
        with self.target(path) as tmp:
            tmp.write_text(text, encoding="utf-8")
        return Path(path)

    # -- ending --------------------------------------------------------------------------
    def tidy(self) -> None:
        """Remove folders this run created that are still empty.

        Examples
        --------
        >>> WriteGuard().tidy()
        """
        for q in reversed(self._created):
            with contextlib.suppress(OSError):
                q.rmdir()
        self._created = [q for q in self._created if q.exists()]

    def rollback(self) -> None:
        """After a failed command: remove the files it created new (still the very files it
        wrote), then the folders it created that are now empty. Files replaced with ``force``
        cannot be restored and stay, complete.

        Examples
        --------
        >>> import tempfile
        >>> tmp = tempfile.TemporaryDirectory()
        >>> d = Path(tmp.name)
        >>> g = WriteGuard()
        >>> _ = g.write_text(d / "part.txt", "half")
        >>> g.rollback()
        >>> (d / "part.txt").exists()
        False
        >>> tmp.cleanup()
        """
        for path, ident in reversed(self._new_files):
            with contextlib.suppress(OSError):
                st = os.stat(path)
                if (st.st_dev, st.st_ino) == ident:
                    os.unlink(path)
        self._new_files = []
        self.tidy()

    def close(self) -> None:
        """End the guard's run: remove empty folders it created and stop tracking it.

        Examples
        --------
        >>> WriteGuard().close()
        """
        self.tidy()
        with contextlib.suppress(ValueError):
            _LIVE_GUARDS.remove(self)

    def __enter__(self) -> WriteGuard:
        return self

    def __exit__(self, *exc) -> None:
        self.close()


def drop_live_temps() -> None:
    """Remove every temporary file this process has open (on an interrupt).

    Examples
    --------
    >>> drop_live_temps()
    """
    for p in list(_LIVE_TEMPS):
        drop_temp(p)


def end_run(*, failed: bool = False) -> None:
    """Remove every temporary file of this process and the empty folders its guards created;
    with ``failed``, also the files its guards created new, so that a command that fails
    half-way leaves nothing of its own behind. The CLI calls it when a command ends.

    Parameters
    ----------
    failed : bool

    Returns
    -------
    None

    Examples
    --------
    >>> import tempfile
    >>> tmp = tempfile.TemporaryDirectory()
    >>> d = Path(tmp.name)
    >>> t = new_temp(d)  # a temporary file of an unfinished write
    >>> end_run()
    >>> t.exists()
    False
    >>> tmp.cleanup()
    """
    drop_live_temps()
    if failed:
        for g in list(_LIVE_GUARDS):
            g.rollback()
    for g in list(_LIVE_GUARDS):
        g.close()


def reset_run_state() -> None:
    """Forget what an earlier in-process run planned (the CLI calls it on entry).

    Examples
    --------
    >>> reset_run_state()
    """
    _LIVE_GUARDS.clear()
    _SWEPT.clear()
