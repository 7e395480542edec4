"""Reading response sets stored in the SOFA format (AES69-2022, SOFA 2.1).

A SOFA file is a netCDF-4 file: dimensions ``I`` (1), ``C`` (3, coordinates), ``M``
(measurements), ``R`` (receivers), ``E`` (emitters), ``N`` (samples) and ``S`` (string
length); variables such as ``Data.IR`` (M, R, N); and global attributes that say which
convention the file follows. This module reads the conventions that store impulse
responses as (M, R, N) (data type FIR) and refuses everything else with the name of what it
found. The file is opened with the maintained ``netCDF4`` binding; no HDF5 structure is
interpreted by hand here.

The definitions used below are those of the AES69-2022 convention tables for GeneralFIR 1.0
and SingleRoomSRIR 1.1 (seen); where a detail is recalled rather than read in the standard it
says "from memory".
"""

from __future__ import annotations

from dataclasses import dataclass, field
from pathlib import Path
from typing import NoReturn

import numpy as np

from ..errors import InputError, describe

__all__ = [
    "SOFA_SUFFIX",
    "SOFA_VERSION",
    "MANDATORY_GLOBALS",
    "READABLE_CONVENTIONS",
    "LABEL_VARIABLES",
    "ResponseSet",
    "is_sofa",
    "read_sofa",
    "sofa_audio",
    "sofa_measurements",
    "measurement_number",
]

SOFA_SUFFIX = ".sofa"
#: The SOFA specification version written and expected (AES69-2022 is SOFA 2.1; seen).
SOFA_VERSION = "2.1"

#: Global attributes every SOFA 2.1 file has ("m" in the AES69-2022 convention tables of
#: GeneralFIR 1.0 and SingleRoomSRIR 1.1; seen).
MANDATORY_GLOBALS = (
    "Conventions",
    "Version",
    "SOFAConventions",
    "SOFAConventionsVersion",
    "DataType",
    "RoomType",
    "Title",
    "DateCreated",
    "DateModified",
    "APIName",
    "APIVersion",
    "AuthorContact",
    "Organization",
    "License",
)

#: Conventions whose data are impulse responses Data.IR (M, R, N), data type FIR (the
#: AES69-2022 tables of GeneralFIR and SingleRoomSRIR, seen; SingleRoomDRIR is the earlier
#: name of the room convention and SimpleFreeFieldHRIR stores head-related responses in the
#: same layout, from memory). Conventions with emitter-dependent data (FIR-E), transfer
#: functions (TF) or filter sections (SOS) are refused.
READABLE_CONVENTIONS = ("GeneralFIR", "SingleRoomSRIR", "SingleRoomDRIR", "SimpleFreeFieldHRIR")

#: Our own per-measurement string variables (M, S): the study's source and receiver ids.
#: SOFA allows variables beyond those of a convention (from memory); readers that do not know
#: them ignore them.
LABEL_VARIABLES = {"source": "SourceLabel", "listener": "ListenerLabel"}

#: Our own per-measurement variable (M): each response's own length in samples, when
#: shorter responses were padded with zeros to the set's N. The analysis would take a long
#: run of digital silence for the end of something that is not an impulse response, so a
#: reader that knows this variable cuts the padding off again.
LENGTH_VARIABLE = "ResponseLength"


@dataclass
class ResponseSet:
    """A set of impulse responses with where they were measured.

    In SOFA's terms a *listener* is the measuring point in the room (our receiver position,
    where the microphone stands), its *receivers* the microphone capsules or channels, and a
    *source* the loudspeaker position (its *emitters* the drivers, one here).

    Attributes
    ----------
    ir : ndarray, shape (M, R, N)
        Responses, float64, full scale = 1: measurement × receiver × sample.
    rate_hz : int
        Sample rate, Hz.
    delay_samples : ndarray, shape (M, R)
        Delay in front of each response (Data.Delay), whole samples.
    lengths : ndarray, shape (M,), or None
        Each measurement's own length in samples (the rest of N is padding); None: all N.
    listener_m, source_m : ndarray, shape (M, 3), or None
        Cartesian positions, metres, in the room's frame; None when unknown.
    listener_labels, source_labels : tuple of str, or None
        The study's ids of each measurement's receiver and source position.
    room_dimensions_m : tuple of float, or None
        Length, width and height of a rectangular room (a corner at the origin).
    room_volume_m3, temperature_c : float, optional
    title, author, organization, license, comment : str
    convention : str
        The SOFA convention the file follows (read) or will follow (written).
    attributes : dict
        Every global attribute of a file read, as text.
    """

    ir: np.ndarray
    rate_hz: int
    delay_samples: np.ndarray | None = None
    lengths: np.ndarray | None = None
    listener_m: np.ndarray | None = None
    source_m: np.ndarray | None = None
    listener_labels: tuple[str, ...] | None = None
    source_labels: tuple[str, ...] | None = None
    room_dimensions_m: tuple[float, float, float] | None = None
    room_name: str = ""
    room_use: str = ""
    room_volume_m3: float | None = None
    temperature_c: float | None = None
    title: str = "Room impulse responses"
    author: str = ""
    organization: str = ""
    license: str = ""
    comment: str = ""
    database: str = ""
    convention: str = "GeneralFIR"
    attributes: dict[str, str] = field(default_factory=dict)

    @property
    def measurements(self) -> int:
        """Number of measurements M (AES69 dimension ``M``): the first axis of ``ir``.

        Examples
        --------
        >>> ResponseSet(np.zeros((3, 2, 8)), 48000).measurements
        3
        """
        return int(self.ir.shape[0])

    @property
    def receivers(self) -> int:
        """Number of receivers R (AES69 dimension ``R``: capsules or channels) per
        measurement: the second axis of ``ir``.

        Examples
        --------
        >>> ResponseSet(np.zeros((3, 2, 8)), 48000).receivers
        2
        """
        return int(self.ir.shape[1])

    @property
    def samples(self) -> int:
        """Number of samples N of each stored response (AES69 dimension ``N``, padding
        included): the last axis of ``ir``.

        Examples
        --------
        >>> ResponseSet(np.zeros((3, 2, 8)), 48000).samples
        8
        """
        return int(self.ir.shape[2])

    @property
    def delays(self) -> np.ndarray:
        """Data.Delay as (M, R) whole samples (zeros when not given)."""
        if self.delay_samples is None:
            return np.zeros(self.ir.shape[:2], dtype=np.int64)
        return np.broadcast_to(np.asarray(self.delay_samples), self.ir.shape[:2]).astype(np.int64)


def is_sofa(path) -> bool:
    """Whether ``path`` names a SOFA file (by its ``.sofa`` extension, as AES69 files are named).

    Examples
    --------
    >>> is_sofa("hall.SOFA"), is_sofa("hall.wav")
    (True, False)
    """
    return Path(path).suffix.lower() == SOFA_SUFFIX


def _text(value) -> str | None:
    """An attribute's value as text: NC_CHAR and NC_STRING both arrive as ``str``."""
    if isinstance(value, str):
        return value
    if isinstance(value, bytes):
        return value.decode("utf-8", "replace")
    return None


def read_sofa(path) -> ResponseSet:
    """Read a SOFA file of impulse responses.

    Both fixed-length (NC_CHAR) and variable-length (NC_STRING) text attributes are
    accepted; what we write is fixed-length (see :mod:`roomconv.sofa.write`).

    Parameters
    ----------
    path : str or Path

    Returns
    -------
    ResponseSet
        ``ir`` as stored (Data.Delay is kept in ``delay_samples``, not applied).

    Raises
    ------
    InputError
        Naming the file and what was found: not a netCDF-4 file, a mandatory global attribute
        missing, a convention or data type that does not hold impulse responses (M, R, N),
        dimensions that do not match the convention, a sample rate or delay that is not a
        whole positive number, or samples that are not finite.

    References
    ----------
    AES69-2022, AES standard for file exchange — Spatial acoustic data file format
    (SOFA 2.1); convention tables GeneralFIR 1.0 and SingleRoomSRIR 1.1.
    """
    import netCDF4

    p = Path(path)
    try:
        ds = netCDF4.Dataset(str(p), "r")
    except FileNotFoundError:
        raise InputError(describe(p, "SOFA file not found", "check the path")) from None
    except (OSError, RuntimeError, ValueError) as exc:
        why = getattr(exc, "strerror", None) or str(exc)
        raise InputError(
            describe(
                p,
                f"cannot be read as a SOFA file (netCDF-4): {why}",
                "is it a complete .sofa file?",
            )
        ) from None
    with ds:
        ds.set_auto_mask(False)
        return _read(p, ds)


def _fail(p: Path, problem: str, hint: str | None = None) -> NoReturn:
    raise InputError(describe(p, problem, hint))


def _read(p: Path, ds) -> ResponseSet:
    attrs: dict[str, str] = {}
    for name in ds.ncattrs():
        t = _text(ds.getncattr(name))
        if t is not None:
            attrs[name] = t
    for name in MANDATORY_GLOBALS:
        if name not in ds.ncattrs():
            _fail(
                p,
                f"the mandatory global attribute {name} is missing, so this is not a valid "
                "SOFA file",
                "write it again with software that follows AES69",
            )
        if name not in attrs:
            _fail(p, f"the global attribute {name} is not text")
    if attrs["Conventions"] != "SOFA":
        _fail(p, f"Conventions is {attrs['Conventions']!r}, not 'SOFA'")
    conv, dtype = attrs["SOFAConventions"], attrs["DataType"]
    if dtype != "FIR":
        _fail(
            p,
            f"data type {dtype!r} ({conv}) is not supported",
            "roomconv reads impulse responses: data type FIR",
        )
    if conv not in READABLE_CONVENTIONS:
        _fail(
            p,
            f"SOFA convention {conv!r} is not supported",
            "roomconv reads " + ", ".join(READABLE_CONVENTIONS),
        )
    dims = {k: len(v) for k, v in ds.dimensions.items()}
    for d in ("I", "C", "M", "R", "N"):
        if d not in dims:
            _fail(p, f"dimension {d} is missing ({conv} needs I, C, M, R and N)")
    if dims["I"] != 1 or dims["C"] != 3:
        _fail(p, f"dimensions I={dims['I']} and C={dims['C']}: SOFA fixes I=1 and C=3")
    m, r, n = dims["M"], dims["R"], dims["N"]
    if min(m, r, n) < 1:
        _fail(p, f"holds no responses (M={m}, R={r}, N={n})")

    var = _var(p, ds, "Data.IR")
    if tuple(var.dimensions) != ("M", "R", "N"):
        _fail(
            p,
            f"Data.IR has dimensions ({', '.join(var.dimensions)}), expected (M, R, N)",
        )
    if var.dtype.kind not in "fiu":
        _fail(p, f"Data.IR holds {var.dtype} values, not numbers")
    ir = np.asarray(var[:], dtype=np.float64)
    if not np.all(np.isfinite(ir)):
        bad = int(np.count_nonzero(~np.isfinite(ir)))
        _fail(p, f"Data.IR holds {bad} NaN or infinite samples")

    rate = _one_of_dims(p, ds, "Data.SamplingRate", (("I",), ("M",)))
    units = _text(getattr(ds["Data.SamplingRate"], "Units", "hertz")) or ""
    if units.strip().lower() != "hertz":
        _fail(p, f"Data.SamplingRate:Units is {units!r}, expected 'hertz'")
    if np.any(rate != rate.flat[0]):
        _fail(
            p,
            "the measurements have different sample rates",
            "resample them to one rate before reading",
        )
    fs = float(rate.flat[0])
    if not (np.isfinite(fs) and fs > 0 and fs == round(fs)):
        _fail(p, f"Data.SamplingRate {fs:g} Hz is not a positive whole number")

    delay = np.zeros((m, r))
    if "Data.Delay" in ds.variables:
        dv = ds["Data.Delay"]
        dd = tuple(dv.dimensions)
        if dd not in (("I", "R"), ("M", "R")):
            _fail(p, f"Data.Delay has dimensions ({', '.join(dd)}), expected (I, R) or (M, R)")
        delay = np.broadcast_to(np.asarray(dv[:], dtype=np.float64), (m, r))
        if not np.all(np.isfinite(delay)) or np.any(delay < 0):
            _fail(p, "Data.Delay holds negative or non-finite values")
        if np.any(delay != np.round(delay)):
            _fail(
                p,
                "Data.Delay holds fractions of a sample",
                "roomconv applies whole-sample delays only",
            )
    else:
        _fail(p, f"the mandatory variable Data.Delay is missing ({conv})")

    listener = _position(p, ds, "ListenerPosition", m)
    source = _position(p, ds, "SourcePosition", m)
    for name in ("ReceiverPosition", "EmitterPosition"):
        v = _var(p, ds, name)
        if "C" not in v.dimensions:
            _fail(p, f"{name} has no coordinate dimension C")

    lengths = None
    if LENGTH_VARIABLE in ds.variables:
        lv = ds[LENGTH_VARIABLE]
        lengths = np.asarray(lv[:], dtype=np.float64).reshape(-1)
        if (
            tuple(lv.dimensions) != ("M",)
            or not np.all(np.isfinite(lengths))
            or np.any(lengths != np.round(lengths))
            or np.any(lengths < 1)
            or np.any(lengths > n)
        ):
            _fail(p, f"{LENGTH_VARIABLE} must hold M whole numbers from 1 to N={n}")
        lengths = lengths.astype(np.int64)

    labels = {}
    for key, name in LABEL_VARIABLES.items():
        if name in ds.variables:
            v = ds[name]
            if tuple(v.dimensions) == ("M", "S") and v.dtype.kind == "S":
                v.set_auto_chartostring(False)
                raw = np.asarray(v[:])
                labels[key] = tuple(
                    b"".join(row).rstrip(b"\0").decode("utf-8", "replace") for row in raw
                )

    corners = None
    if "RoomCornerB" in ds.variables and "RoomCornerA" in ds.variables:
        a = np.asarray(ds["RoomCornerA"][:], dtype=np.float64).reshape(-1, 3)[0]
        b = np.asarray(ds["RoomCornerB"][:], dtype=np.float64).reshape(-1, 3)[0]
        size = np.abs(b - a)
        if np.all(np.isfinite(size)) and np.all(size > 0):
            corners = (float(size[0]), float(size[1]), float(size[2]))

    return ResponseSet(
        ir=ir,
        rate_hz=int(fs),
        delay_samples=delay.astype(np.int64),
        lengths=lengths,
        listener_m=listener,
        source_m=source,
        listener_labels=labels.get("listener"),
        source_labels=labels.get("source"),
        room_dimensions_m=corners,
        title=attrs.get("Title", ""),
        author=attrs.get("AuthorContact", ""),
        organization=attrs.get("Organization", ""),
        license=attrs.get("License", ""),
        comment=attrs.get("Comment", ""),
        database=attrs.get("DatabaseName", ""),
        convention=conv,
        attributes=attrs,
    )


def _var(p: Path, ds, name: str):
    if name not in ds.variables:
        _fail(p, f"the mandatory variable {name} is missing")
    return ds[name]


def _one_of_dims(p: Path, ds, name: str, allowed) -> np.ndarray:
    v = _var(p, ds, name)
    d = tuple(v.dimensions)
    if d not in allowed:
        want = " or ".join("(" + ", ".join(a) + ")" for a in allowed)
        _fail(p, f"{name} has dimensions ({', '.join(d)}), expected {want}")
    return np.asarray(v[:], dtype=np.float64).reshape(-1)


def _position(p: Path, ds, name: str, m: int) -> np.ndarray:
    """A listener or source position as (M, 3), Cartesian metres.

    Spherical positions (azimuth and elevation in degrees, radius in metres; azimuth
    counter-clockwise from the x axis, elevation up from the horizontal plane: SOFA's
    convention, from memory) are converted.
    """
    v = _var(p, ds, name)
    d = tuple(v.dimensions)
    if d not in (("I", "C"), ("M", "C")):
        _fail(p, f"{name} has dimensions ({', '.join(d)}), expected (I, C) or (M, C)")
    kind = _text(getattr(v, "Type", "")) or ""
    if kind not in ("cartesian", "spherical"):
        _fail(p, f"{name}:Type is {kind!r}, expected 'cartesian' or 'spherical'")
    pos = np.broadcast_to(np.asarray(v[:], dtype=np.float64), (m, 3)).copy()
    if kind == "spherical":
        az, el, r = np.deg2rad(pos[:, 0]), np.deg2rad(pos[:, 1]), pos[:, 2]
        pos = np.stack(
            [r * np.cos(el) * np.cos(az), r * np.cos(el) * np.sin(az), r * np.sin(el)], 1
        )
    return pos


def sofa_audio(
    path, *, measurement: int | None = None, single: bool = False
) -> tuple[np.ndarray, int]:
    """Responses of a SOFA file as audio: (samples, channels) and the sample rate.

    Data.Delay is applied (whole samples of silence in front), so every channel starts at
    the time the file says it does.

    Parameters
    ----------
    path : str or Path
    measurement : int, optional
        One measurement, counted from 1: its receivers become the channels.
    single : bool
        Without ``measurement``, refuse a file of more than one measurement (a render needs
        one); otherwise every measurement's receivers become channels, measurement by
        measurement (channel ``(m - 1) * R + r``).

    Returns
    -------
    data : ndarray, shape (samples, channels)
    rate : int

    Raises
    ------
    InputError
        For a file :func:`read_sofa` refuses, a measurement outside 1…M, or several
        measurements where one is needed.
    """
    rs = read_sofa(path)
    m_count = rs.measurements
    if measurement is not None:
        if not 1 <= measurement <= m_count:
            raise InputError(
                describe(
                    path,
                    f"has no measurement {measurement}: it holds {m_count}",
                    f"choose 1 to {m_count}",
                )
            )
        chosen = [measurement - 1]
    elif single and m_count > 1:
        raise InputError(
            describe(
                path,
                f"holds {m_count} measurements",
                f"choose one by its number, 1 to {m_count}",
            )
        )
    else:
        chosen = list(range(m_count))
    return _columns(rs, chosen), rs.rate_hz


def _columns(rs: ResponseSet, chosen: list[int]) -> np.ndarray:
    """The chosen measurements' receivers side by side, each delayed by its Data.Delay and
    cut to its own length (one length for all: the longest, the others end in zeros)."""
    delays = rs.delays
    lengths = rs.lengths if rs.lengths is not None else np.full(rs.measurements, rs.samples)
    total = max(int(lengths[mi] + delays[mi].max()) for mi in chosen)
    out = np.zeros((total, len(chosen) * rs.receivers))
    k = 0
    for mi in chosen:
        n = int(lengths[mi])
        for ri in range(rs.receivers):
            d = int(delays[mi, ri])
            out[d : d + n, k] = rs.ir[mi, ri, :n]
            k += 1
    return out


def sofa_measurements(path) -> list[tuple[str, np.ndarray, int]]:
    """Each measurement of a SOFA file as its own response, for the analysis.

    Parameters
    ----------
    path : str or Path

    Returns
    -------
    list of (name, data, rate)
        ``name`` is ``<file>#<m>`` (m counted from 1, with the study's source and receiver
        ids after it when the file has them), ``data`` (samples, receivers) with Data.Delay
        applied and any padding cut off, ``rate`` in Hz.

    Raises
    ------
    InputError
        For a file :func:`read_sofa` refuses.
    """
    rs = read_sofa(path)
    out = []
    for mi in range(rs.measurements):
        name = f"{path}#{mi + 1}"
        if rs.source_labels is not None and rs.listener_labels is not None:
            name += f" {rs.source_labels[mi]}-{rs.listener_labels[mi]}"
        out.append((name, _columns(rs, [mi]), rs.rate_hz))
    return out


def measurement_number(path, *, source: str | None = None, receiver: str | None = None) -> int:
    """The measurement (counted from 1) whose source and receiver labels match.

    Parameters
    ----------
    path : str or Path
        A SOFA file written with labels (``roomconv export --study``).
    source, receiver : str, optional
        The study's ids; at least one.

    Returns
    -------
    int

    Raises
    ------
    InputError
        When the file has no labels, or no measurement or more than one matches.
    """
    if source is None and receiver is None:
        raise InputError("name a source id, a receiver id or both")
    rs = read_sofa(path)
    want = []
    if source is not None:
        if rs.source_labels is None:
            raise InputError(describe(path, "holds no source ids", "choose by measurement number"))
        want.append((rs.source_labels, source))
    if receiver is not None:
        if rs.listener_labels is None:
            raise InputError(
                describe(path, "holds no receiver ids", "choose by measurement number")
            )
        want.append((rs.listener_labels, receiver))
    hits = [i for i in range(rs.measurements) if all(lab[i] == v for lab, v in want)]
    if len(hits) == 1:
        return hits[0] + 1
    known = ", ".join(
        f"{i + 1}: {rs.source_labels[i] if rs.source_labels else '?'}-"
        f"{rs.listener_labels[i] if rs.listener_labels else '?'}"
        for i in range(rs.measurements)
    )
    what = " and ".join(f"{k} {v!r}" for k, v in (("source", source), ("receiver", receiver)) if v)
    problem = "matches no measurement" if not hits else f"matches {len(hits)} measurements"
    raise InputError(describe(path, f"{what} {problem}", f"the measurements are {known}"))
