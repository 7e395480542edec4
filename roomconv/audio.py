"""Reading and writing audio and JSON sidecars, safely.

Writes go to a temporary file in the destination folder and are renamed into place, so a
crash never leaves half a file; an existing output is refused unless ``force`` is given, and an
input is never overwritten.
"""

from __future__ import annotations

import contextlib
import hashlib
import json
import os
import re
import tempfile
from pathlib import Path
from typing import Iterable, Iterator

import numpy as np
import soundfile as sf

from . import __version__
from .errors import InputError, OutputExistsError, describe

#: Extensions we write, mapped to soundfile container names.
_FORMATS = {".wav": "WAV", ".flac": "FLAC", ".aif": "AIFF", ".aiff": "AIFF", ".w64": "W64"}
_WAV_LIMIT_BYTES = 4 * 1024**3 - 1024  # RIFF size fields are 32-bit


def read_audio(path, *, what: str = "audio file") -> tuple[np.ndarray, int]:
    """Read a whole audio file as float64, shape (samples, channels).

    Raises :class:`InputError` naming the file when it is missing, unreadable, truncated,
    empty or holds non-finite samples.
    """
    p = Path(path)
    if not p.exists():
        raise InputError(describe(p, f"{what} not found", "check the path"))
    if p.is_dir():
        raise InputError(describe(p, f"is a folder, expected an {what}"))
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
    p = Path(path)
    if not p.exists():
        raise InputError(describe(p, "file not found", "check the path"))
    try:
        info = sf.info(str(p))
    except (sf.LibsndfileError, RuntimeError) as exc:
        raise InputError(describe(p, f"cannot be read as audio: {exc}")) from None
    _check_truncation(p, info)
    return info


def check_output(path, *, force: bool = False, inputs: Iterable = ()) -> Path:
    """Validate an output path before any work is done.

    Refuses to write over any of ``inputs`` (even with ``force``), refuses an existing file
    without ``force``, and checks that the folder exists and is writable.
    """
    out = Path(path)
    for src in inputs:
        src = Path(src)
        if src.exists() and out.exists() and os.path.samefile(src, out):
            raise InputError(describe(out, "is also an input; roomconv never writes over an input",
                                      "choose another output name"))
        if not out.exists() and src.resolve() == out.resolve():
            raise InputError(describe(out, "is also an input"))
    if out.exists() and not force:
        raise OutputExistsError(describe(out, "exists already", "pass --force to replace it"))
    folder = out.parent if str(out.parent) else Path(".")
    if not folder.is_dir():
        raise InputError(describe(out, f"folder {folder} does not exist", "create it first"))
    if not os.access(folder, os.W_OK):
        raise InputError(describe(out, f"folder {folder} is not writable"))
    return out


@contextlib.contextmanager
def atomic_path(path, *, force: bool = False, inputs: Iterable = ()) -> Iterator[Path]:
    """Yield a temporary path beside ``path``; rename it into place when the block succeeds."""
    out = check_output(path, force=force, inputs=inputs)
    folder = out.parent if str(out.parent) else Path(".")
    fd, tmp = tempfile.mkstemp(prefix=f".{out.name}.", suffix=".part", dir=folder)
    os.close(fd)
    tmp_path = Path(tmp)
    try:
        yield tmp_path
        # mkstemp makes the file private; give it the permissions a plain open() would.
        umask = os.umask(0)
        os.umask(umask)
        os.chmod(tmp_path, 0o666 & ~umask)
        os.replace(tmp_path, out)
    finally:
        if tmp_path.exists():
            tmp_path.unlink()


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
    """Write ``data`` (samples × channels, or 1-D) atomically."""
    arr = np.asarray(data)
    if arr.ndim == 1:
        arr = arr[:, None]
    if not np.all(np.isfinite(arr)):
        raise InputError(describe(path, "refusing to write non-finite samples"))
    bytes_per = 8 if subtype == "DOUBLE" else 4
    fmt = audio_format_for(path, arr.size * bytes_per)
    _check_subtype(path, fmt, subtype)
    with atomic_path(path, force=force, inputs=inputs) as tmp:
        sf.write(str(tmp), arr, int(rate), subtype=subtype, format=fmt)
    return Path(path)


def _check_subtype(path, fmt: str, subtype: str) -> None:
    if not sf.check_format(fmt, subtype):
        raise InputError(describe(path, f"the {fmt} format cannot hold subtype {subtype}",
                                  "try FLOAT or PCM_24"))


def write_json(path, obj, *, force: bool = False, inputs: Iterable = ()) -> Path:
    """Write ``obj`` as indented JSON atomically (NaN written as null)."""
    text = json.dumps(_jsonable(obj), indent=2, allow_nan=False)
    with atomic_path(path, force=force, inputs=inputs) as tmp:
        tmp.write_text(text + "\n", encoding="utf-8")
    return Path(path)


def write_text(path, text: str, *, force: bool = False, inputs: Iterable = ()) -> Path:
    """Write a text file atomically."""
    with atomic_path(path, force=force, inputs=inputs) as tmp:
        tmp.write_text(text, encoding="utf-8")
    return Path(path)


def read_json(path, *, what: str = "JSON file") -> dict:
    p = Path(path)
    if not p.exists():
        raise InputError(describe(p, f"{what} not found"))
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
    """``hall.wav`` → ``hall.<kind>.json``."""
    p = Path(path)
    return p.with_name(f"{p.stem}.{kind}.json")


def file_sha256(path, chunk: int = 1 << 20) -> str:
    h = hashlib.sha256()
    with open(path, "rb") as fh:
        while block := fh.read(chunk):
            h.update(block)
    return h.hexdigest()


def provenance(inputs: Iterable, settings: dict) -> dict:
    """A provenance record: inputs with their hashes, the settings and roomconv's version."""
    return {
        "roomconv_version": __version__,
        "inputs": [{"file": str(p), "sha256": file_sha256(p)} for p in inputs],
        "settings": settings,
    }


def write_provenance(output, inputs: Iterable, settings: dict, *, force: bool = True) -> Path:
    """Write ``<output stem>.provenance.json`` beside ``output``."""
    return write_json(sidecar_path(output, "provenance"), provenance(list(inputs), settings),
                      force=force)
