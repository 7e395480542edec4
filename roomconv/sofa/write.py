"""Writing response sets as SOFA files (AES69-2022, SOFA 2.1), through the write guard.

Two conventions are written:

- **SingleRoomSRIR 1.1** when the room is a known rectangle (its dimensions) and every
  measurement's source and receiver positions are known: ``RoomType`` ``shoebox``, the room
  from ``RoomCornerA`` (the origin) to ``RoomCornerB`` (length, width, height), one
  measurement per source–receiver pair, ``ListenerPosition`` and ``SourcePosition`` (M, C).
  The convention allows one excitation source per measurement, moved between measurements
  (its SourcePosition depends on M), which is how a room study is measured.
- **GeneralFIR 1.0** otherwise. Without a study, the positions are not known: the file has
  the convention's default ``ListenerPosition`` and ``SourcePosition`` [0 0 0] with the
  dimensions (I, C), which the convention permits for positions that do not change, and the
  global ``Comment`` says that they are unknown. SOFA has no value that marks a position as
  unknown (from memory), so a reader must take the comment's word for it.

Every text attribute is written as a fixed-length character array (NC_CHAR), as UTF-8
bytes: the AES69 tables give attributes as text without a kind (seen), and readers exist
that refuse the netCDF-4 variable-length kind (NC_STRING) (seen in a public bug report); the
netCDF4 binding would otherwise write any non-ASCII text as NC_STRING. String variables (the
study's ids) are character arrays (M, S).
"""

from __future__ import annotations

import datetime as _dt
from pathlib import Path

import numpy as np

from .. import __version__
from ..audio import WriteGuard
from ..errors import InputError
from .read import LABEL_VARIABLES, LENGTH_VARIABLE, SOFA_VERSION, ResponseSet

__all__ = ["write_sofa", "convention_for", "CONVENTION_VERSIONS", "UNKNOWN_POSITIONS"]

#: Convention versions of SOFA 2.1 (AES69-2022 convention tables; seen).
CONVENTION_VERSIONS = {"GeneralFIR": "1.0", "SingleRoomSRIR": "1.1"}

#: The convention's own default for the License attribute (GeneralFIR 1.0 table; seen).
DEFAULT_LICENSE = "No license provided, ask the author for permission"

UNKNOWN_POSITIONS = (
    "Source and receiver positions are not known: ListenerPosition and SourcePosition "
    "hold the convention's default [0 0 0] and mean nothing."
)


def convention_for(rs: ResponseSet) -> str:
    """SingleRoomSRIR for a rectangular room with every position known, else GeneralFIR.

    Examples
    --------
    >>> import numpy as np
    >>> convention_for(ResponseSet(np.zeros((1, 1, 4)), 48000))
    'GeneralFIR'
    """
    if rs.room_dimensions_m is not None and rs.listener_m is not None and rs.source_m is not None:
        return "SingleRoomSRIR"
    return "GeneralFIR"


def _b(text: str) -> bytes:
    # bytes make the netCDF4 binding write NC_CHAR whatever the characters (a str with
    # non-ASCII characters would become NC_STRING); an empty attribute is one space, since
    # a zero-length NC_CHAR is not written by every library (from memory).
    return (text or " ").encode("utf-8")


def _now() -> str:
    # SOFA's date format "yyyy-mm-dd HH:MM:SS" (from memory), in UTC.
    return _dt.datetime.now(_dt.UTC).strftime("%Y-%m-%d %H:%M:%S")


def _check(rs: ResponseSet) -> None:
    ir = np.asarray(rs.ir)
    if ir.ndim != 3 or min(ir.shape) < 1:
        raise InputError(f"a response set needs (measurements, receivers, samples), got {ir.shape}")
    if not np.all(np.isfinite(ir)):
        raise InputError("refusing to write non-finite samples")
    if int(rs.rate_hz) <= 0:
        raise InputError(f"sample rate {rs.rate_hz} Hz must be positive")
    m = ir.shape[0]
    for name in ("listener_m", "source_m"):
        v = getattr(rs, name)
        if v is not None and np.shape(v) != (m, 3):
            raise InputError(f"{name} must be ({m}, 3), got {np.shape(v)}")
    if rs.lengths is not None:
        lengths = np.asarray(rs.lengths)
        if lengths.shape != (m,) or np.any(lengths < 1) or np.any(lengths > ir.shape[2]):
            raise InputError(f"lengths must be ({m},) sample counts from 1 to {ir.shape[2]}")
    for name in ("listener_labels", "source_labels"):
        v = getattr(rs, name)
        if v is not None and len(v) != m:
            raise InputError(f"{name} must hold {m} labels, got {len(v)}")


def write_sofa(
    path,
    rs: ResponseSet,
    *,
    guard: WriteGuard | None = None,
    force: bool = False,
    inputs=(),
) -> Path:
    """Write ``rs`` as a SOFA file through the write guard (temporary file, no-clobber move).

    Parameters
    ----------
    path : str or Path
        The ``.sofa`` file to write.
    rs : ResponseSet
        The responses (M, R, N) and what is known about them.
    guard : WriteGuard, optional
        The job's guard (which knows its inputs); a one-file guard otherwise.
    force : bool
        Replace an existing file (never an input); only without ``guard``.
    inputs : iterable of path
        Files the output may never be; only without ``guard``.

    Returns
    -------
    Path

    References
    ----------
    AES69-2022, AES standard for file exchange — Spatial acoustic data file format
    (SOFA 2.1); convention tables GeneralFIR 1.0 and SingleRoomSRIR 1.1.

    Examples
    --------
    >>> import tempfile, numpy as np
    >>> tmp = tempfile.TemporaryDirectory()
    >>> d = Path(tmp.name)
    >>> write_sofa(d / "one.sofa", ResponseSet(np.ones((1, 1, 4)), 48000)).name
    'one.sofa'
    >>> tmp.cleanup()
    """
    _check(rs)
    if guard is None:
        with WriteGuard(inputs, force=force) as g:
            return write_sofa(path, rs, guard=g)
    with guard.target(path) as tmp:
        _write(tmp, rs)
    return Path(path)


def _write(tmp: Path, rs: ResponseSet) -> None:
    import netCDF4

    conv = convention_for(rs)
    room = conv == "SingleRoomSRIR"
    ir = np.asarray(rs.ir, dtype=np.float64)
    m, r, n = ir.shape
    known = rs.listener_m is not None and rs.source_m is not None
    comment = rs.comment
    if not known:
        comment = (comment + " " if comment else "") + UNKNOWN_POSITIONS
    now = _now()
    # clobber: the guard's temporary file exists (empty) and is ours.
    with netCDF4.Dataset(str(tmp), "w", format="NETCDF4", clobber=True) as ds:
        globals_ = {
            "Conventions": "SOFA",
            "Version": SOFA_VERSION,
            "SOFAConventions": conv,
            "SOFAConventionsVersion": CONVENTION_VERSIONS[conv],
            "DataType": "FIR",
            # GeneralFIR allows free field, reverberant, shoebox or dae; SingleRoomSRIR
            # shoebox or dae (AES69-2022 tables; seen).
            "RoomType": "shoebox" if room else "reverberant",
            "Title": rs.title or "Room impulse responses",
            "DateCreated": now,
            "DateModified": now,
            "APIName": "roomconv",
            "APIVersion": __version__,
            "AuthorContact": rs.author or "not given",
            "Organization": rs.organization or "not given",
            "License": rs.license or DEFAULT_LICENSE,
            "ApplicationName": "roomconv",
            "ApplicationVersion": __version__,
            "Comment": comment,
        }
        if room:
            globals_["DatabaseName"] = rs.database or rs.room_name or rs.title or "room study"
            if rs.room_name:
                globals_["RoomShortName"] = rs.room_name
            if rs.room_use:
                globals_["RoomDescription"] = rs.room_use
        for k, v in globals_.items():
            ds.setncattr(k, _b(v))

        ds.createDimension("I", 1)
        ds.createDimension("C", 3)
        ds.createDimension("M", m)
        ds.createDimension("R", r)
        ds.createDimension("E", 1)
        ds.createDimension("N", n)

        def var(name, dims, value, **attrs):
            v = ds.createVariable(name, "f8", dims)
            v[:] = value
            for k, a in attrs.items():
                v.setncattr(k, _b(a))
            return v

        cart = {"Type": "cartesian", "Units": "metre"}
        if known:
            var("ListenerPosition", ("M", "C"), np.asarray(rs.listener_m, float), **cart)
            var("SourcePosition", ("M", "C"), np.asarray(rs.source_m, float), **cart)
        else:
            var("ListenerPosition", ("I", "C"), np.zeros((1, 3)), **cart)
            var("SourcePosition", ("I", "C"), np.zeros((1, 3)), **cart)
        # Receivers (microphone capsules) and the emitter sit at their listener's and
        # source's own position: offsets of zero.
        var("ReceiverPosition", ("R", "C", "I"), np.zeros((r, 3, 1)), **cart)
        var("EmitterPosition", ("E", "C", "I"), np.zeros((1, 3, 1)), **cart)
        if room:
            # Orientation is not recorded by a study: the convention's defaults (seen), an
            # omnidirectional source and microphone make them irrelevant.
            var("ListenerView", ("I", "C"), [[1.0, 0.0, 0.0]], **cart)
            var("ListenerUp", ("I", "C"), [[0.0, 0.0, 1.0]])
            var("SourceView", ("I", "C"), [[1.0, 0.0, 0.0]], **cart)
            var("SourceUp", ("I", "C"), [[0.0, 0.0, 1.0]])
            dims_m = rs.room_dimensions_m
            assert dims_m is not None  # convention_for chose the room convention for it
            var("RoomCornerA", ("I", "C"), [[0.0, 0.0, 0.0]])
            var("RoomCornerB", ("I", "C"), [list(dims_m)])
            var("RoomCorners", ("I", "I"), [[0.0]], **cart)
            volume = rs.room_volume_m3 or float(np.prod(dims_m))
            var("RoomVolume", ("I",), [volume], Units="cubic metre")
            if rs.temperature_c is not None:
                var("RoomTemperature", ("I",), [rs.temperature_c + 273.15], Units="kelvin")
        var("Data.IR", ("M", "R", "N"), ir)
        var("Data.SamplingRate", ("I",), [float(rs.rate_hz)], Units="hertz")
        delay = np.zeros((1, r)) if rs.delay_samples is None else np.asarray(rs.delay_samples)
        if delay.shape == (m, r) and m > 1:
            var("Data.Delay", ("M", "R"), delay.astype(float))
        else:
            var("Data.Delay", ("I", "R"), delay.reshape(-1, r)[:1].astype(float))

        if rs.lengths is not None:
            var(LENGTH_VARIABLE, ("M",), np.asarray(rs.lengths, dtype=float), Units="samples")

        labels = {
            LABEL_VARIABLES["source"]: rs.source_labels,
            LABEL_VARIABLES["listener"]: rs.listener_labels,
        }
        encoded = {k: [s.encode("utf-8") for s in v] for k, v in labels.items() if v is not None}
        if encoded:
            width = max(1, *(len(s) for v in encoded.values() for s in v))
            ds.createDimension("S", width)
            for vname, texts in encoded.items():
                sv = ds.createVariable(vname, "S1", ("M", "S"))
                sv[:] = netCDF4.stringtochar(np.array(texts, dtype=f"S{width}"))
