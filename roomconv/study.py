"""The study file: a TOML description of a measurement study (who, where, when, with what,
which positions and which response files) that travels with the responses.

Loading validates every key: an unknown key or a bad value raises :class:`InputError` naming
the key (``room.volume_m3``, ``receivers[2].height_m``) and the file. Relative paths are
relative to the study file. No numerics here: the result is a tree of frozen dataclasses.
"""

from __future__ import annotations

import datetime as _dt
import json
import math
import os
import tomllib
from dataclasses import asdict, dataclass, field
from pathlib import Path

from .errors import InputError

__all__ = [
    "StudyFile",
    "Room",
    "Equipment",
    "SweepSettings",
    "Point",
    "Response",
    "Targets",
    "OfficeSettings",
    "load_study",
    "parse_study",
    "template_text",
    "session_study_text",
    "workbench_session_text",
    "STATES",
]

STATES = ("unoccupied", "occupied")
TARGET_BASES = ("t20", "t30", "edt")


@dataclass(frozen=True)
class Room:
    """The room of a study, as the study file describes it.

    Attributes
    ----------
    name, use : str
        The room's name and its use (e.g. ``"classroom"``).
    volume_m3 : float, optional
        Volume, m³ (else from ``dimensions_m``).
    surface_m2 : float, optional
        Total surface, m² (else from ``dimensions_m``).
    dimensions_m : (float, float, float), optional
        Length, width and height of a rectangular room, m.
    state : {"unoccupied", "occupied"}
        Occupancy during the measurement.
    furnished : bool, optional
    temperature_c : float, optional
        Air temperature, °C.
    humidity_pct : float, optional
        Relative humidity, %.

    Examples
    --------
    >>> r = Room("Hall B", dimensions_m=(10.0, 8.0, 4.0))
    >>> r.volume, r.surface
    (320.0, 304.0)
    """

    name: str
    use: str = ""
    volume_m3: float | None = None
    surface_m2: float | None = None
    dimensions_m: tuple[float, float, float] | None = None
    state: str = "unoccupied"
    furnished: bool | None = None
    temperature_c: float | None = None
    humidity_pct: float | None = None

    @property
    def volume(self) -> float | None:
        """The volume as given, else from the dimensions of a rectangular room."""
        if self.volume_m3 is not None:
            return self.volume_m3
        if self.dimensions_m is not None:
            x, y, z = self.dimensions_m
            return x * y * z
        return None

    @property
    def surface(self) -> float | None:
        """The surface as given, else from the dimensions of a rectangular room (m²)."""
        if self.surface_m2 is not None:
            return self.surface_m2
        if self.dimensions_m is not None:
            x, y, z = self.dimensions_m
            return 2 * (x * y + x * z + y * z)
        return None


@dataclass(frozen=True)
class Equipment:
    """The measuring equipment: model names and serial numbers of the loudspeaker, the
    microphone and the audio interface (free text, for the report).

    Examples
    --------
    >>> Equipment(microphone="class 1 pressure microphone", microphone_serial="A-17").source
    ''
    """

    source: str = ""
    source_serial: str = ""
    microphone: str = ""
    microphone_serial: str = ""
    interface: str = ""
    interface_serial: str = ""


@dataclass(frozen=True)
class SweepSettings:
    """The sweep the study was measured with, as recorded in the study file.

    Attributes
    ----------
    f_low_hz, f_high_hz : float, optional
        Start and end frequencies, Hz.
    duration_s : float, optional
        Sweep length, s.
    level_dbfs : float, optional
        Playback level, dBFS.
    repeats : int, optional
        Sweeps played back to back and averaged.
    silence_s : float, optional
        Silence recorded after the sweep, s.
    rate_hz : int, optional
        Sample rate, Hz.

    Examples
    --------
    >>> study = parse_study(template_text("Hall B"), Path("/data/hall/study.toml"))
    >>> study.sweep.duration_s, study.sweep.rate_hz
    (6.0, 48000)
    """

    f_low_hz: float | None = None
    f_high_hz: float | None = None
    duration_s: float | None = None
    level_dbfs: float | None = None
    repeats: int | None = None
    silence_s: float | None = None
    rate_hz: int | None = None


@dataclass(frozen=True)
class Point:
    """A source or receiver position: plan coordinates (m) and height above the floor (m).

    Examples
    --------
    >>> Point("R1", x_m=3.0, y_m=4.0, height_m=1.2).height_m
    1.2
    """

    id: str
    x_m: float | None = None
    y_m: float | None = None
    height_m: float | None = None
    note: str = ""


@dataclass(frozen=True)
class Response:
    """One measured response: a source–receiver combination and its file (absolute path).

    Examples
    --------
    >>> Response("S1", "R2", Path("/data/hall/S1R2.wav")).label
    'S1-R2'
    """

    source: str
    receiver: str
    file: Path
    channel: int = 1
    quality_file: Path | None = None
    #: source–receiver distance for the open-plan office evaluation (ISO 3382-3)
    distance_m: float | None = None

    @property
    def label(self) -> str:
        """``"<source>-<receiver>"``, the response's name in tables and figures."""
        return f"{self.source}-{self.receiver}"


@dataclass(frozen=True)
class OfficeSettings:
    """The ``[office]`` table: what ``roomconv office`` needs beyond the responses."""

    #: strength reference from ``roomconv calibrate`` (absolute levels from the responses)
    calibration: Path | None = None
    #: background noise per octave 125 Hz → 8 kHz at the positions, dB SPL
    background_noise_db: tuple[float, ...] | None = None


@dataclass(frozen=True)
class Targets:
    """A reverberation-time target per band with a tolerance, relative to the target.

    Examples
    --------
    >>> t = Targets(reverberation_s={500.0: 1.1, 1000.0: 1.0}, tolerance_pct=(-10.0, 10.0))
    >>> t.basis, t.reverberation_s[1000.0]
    ('t30', 1.0)
    """

    basis: str = "t30"
    reverberation_s: dict[float, float] = field(default_factory=dict)
    tolerance_pct: tuple[float, float] = (-20.0, 20.0)
    source: str = ""


@dataclass(frozen=True)
class StudyFile:
    """A study file, read and checked: the job, the room, the equipment, the positions and
    the responses measured between them, and the targets.

    ``path`` is the study file itself; response files are absolute paths (relative ones in
    the file are taken from its folder). See :func:`load_study` and
    :func:`template_text`.

    Examples
    --------
    >>> study = parse_study(template_text("Hall B"), Path("/data/hall/study.toml"))
    >>> study.title, [r.label for r in study.responses]
    ('Hall B', ['S1-R1', 'S1-R2'])
    >>> study.display_path(study.responses[0].file)
    'S1R1.wav'
    """

    path: Path
    title: str
    client: str = ""
    project_number: str = ""
    author: str = ""
    dates: tuple[str, ...] = ()
    notes: str = ""
    room: Room = field(default_factory=lambda: Room(name=""))
    equipment: Equipment = field(default_factory=Equipment)
    sweep: SweepSettings = field(default_factory=SweepSettings)
    sources: tuple[Point, ...] = ()
    receivers: tuple[Point, ...] = ()
    responses: tuple[Response, ...] = ()
    targets: Targets | None = None
    office: OfficeSettings | None = None
    #: The terminal workbench's own field values (``[workbench]``): text, numbers, true/false
    #: or lists of text, keyed by field; other programs ignore them.
    workbench: dict = field(default_factory=dict)
    #: What the channels of every response file are (``[channels] layout``): None (one
    #: channel per response, as ``channel`` says), "omni,fig8", "fig8,omni", "acn-sn3d",
    #: "binaural" or "stage"; it adds the ISO 3382-1 spatial or stage parameters.
    layout: str | None = None

    def as_dict(self) -> dict:
        """Plain JSON-ready data (paths as strings, relative to the study file when inside)."""
        d = asdict(self)
        d["path"] = str(self.path)
        for r, src in zip(d["responses"], self.responses, strict=True):
            r["file"] = self.display_path(src.file)
            r["quality_file"] = (
                None if src.quality_file is None else self.display_path(src.quality_file)
            )
        if self.targets is not None:
            d["targets"]["reverberation_s"] = {
                f"{k:g}": v for k, v in self.targets.reverberation_s.items()
            }
        if self.office is not None and self.office.calibration is not None:
            d["office"]["calibration"] = self.display_path(self.office.calibration)
        d["room"]["volume_m3"] = self.room.volume
        d["room"]["surface_m2"] = self.room.surface
        return d

    def display_path(self, p: Path) -> str:
        """``p`` relative to the study file's folder when inside it, else as it is."""
        try:
            return str(p.relative_to(self.path.parent))
        except ValueError:
            return str(p)


# --- validation ---------------------------------------------------------------------------
class _Reader:
    """Typed access to one TOML table; every refusal names the key and the file."""

    def __init__(self, table: dict, prefix: str, source: str):
        self.t, self.prefix, self.source = table, prefix, source
        self.used: set[str] = set()

    def key(self, k: str) -> str:
        return f"{self.prefix}{k}"

    def fail(self, k: str, what: str, todo: str):
        raise InputError(f"{self.source}: {self.key(k)}: {what}; {todo}")

    def get(self, k, kind, default=None, *, required=False, check=None, todo=""):
        self.used.add(k)
        if k not in self.t:
            if required:
                self.fail(k, "is missing", todo or "add it (see 'roomconv study init')")
            return default
        v = self.t[k]
        if kind is float:
            if isinstance(v, bool) or not isinstance(v, int | float):
                self.fail(k, f"{v!r} is not a number", todo or "give a number")
            v = float(v)
            if v != v or v in (float("inf"), float("-inf")):
                self.fail(k, f"{v!r} is not a finite number", todo or "give a finite number")
        elif kind is int:
            if isinstance(v, bool) or not isinstance(v, int):
                self.fail(k, f"{v!r} is not a whole number", todo or "give a whole number")
        elif kind is str:
            if isinstance(v, _dt.date):
                v = v.isoformat()
            if not isinstance(v, str):
                self.fail(k, f"{v!r} is not text", todo or 'give quoted text, e.g. "..."')
        elif kind is bool:
            if not isinstance(v, bool):
                self.fail(k, f"{v!r} is not true or false", todo or "write true or false")
        elif kind is dict:
            if not isinstance(v, dict):
                self.fail(k, "is not a table", todo or "see 'roomconv study init'")
        elif kind is list and not isinstance(v, list):
            self.fail(k, f"{v!r} is not a list", todo or "write [..., ...]")
        if check is not None:
            problem = check(v)
            if problem:
                self.fail(k, problem, todo or "correct the value")
        return v

    def done(self):
        extra = sorted(set(self.t) - self.used)
        if extra:
            self.fail(
                extra[0],
                "unknown key",
                "check its spelling against 'roomconv study init' or remove it",
            )


def _positive(v):
    return None if v > 0 else f"{v:g} must be greater than zero"


def _range(lo, hi):
    def check(v):
        return None if lo <= v <= hi else f"{v:g} is outside {lo:g}…{hi:g}"

    return check


def _nonempty(v):
    return None if v.strip() else "is empty"


def _one_of(ids: set, table: str):
    """A check that the value is one of ``ids``, the ids of the [[``table``]] entries."""

    def check(v):
        if v in ids:
            return None
        return f"{v!r} is not among the [[{table}]] ids ({', '.join(sorted(ids)) or 'none'})"

    return check


def _date_list(v, r: _Reader, k: str) -> tuple[str, ...]:
    items = v if isinstance(v, list) else [v]
    out = []
    for i, d in enumerate(items):
        if isinstance(d, _dt.datetime):
            d = d.date()
        if isinstance(d, _dt.date):
            out.append(d.isoformat())
            continue
        if not isinstance(d, str):
            r.fail(k, f"entry {i + 1} ({d!r}) is not a date", "write dates as 2026-11-30")
        try:
            out.append(_dt.date.fromisoformat(d).isoformat())
        except ValueError:
            r.fail(k, f"entry {i + 1} ({d!r}) is not a date", "write dates as 2026-11-30")
    return tuple(out)


def _path(base: Path, text: str, r: _Reader, k: str) -> Path:
    if not text.strip():
        r.fail(k, "is empty", "give the response file's path, relative to the study file")
    p = Path(text).expanduser()
    return Path(os.path.normpath(p if p.is_absolute() else base / p))


def _points(doc: dict, name: str, src: str) -> tuple[Point, ...]:
    items = doc.get(name, [])
    if not isinstance(items, list) or any(not isinstance(t, dict) for t in items):
        raise InputError(f"{src}: {name}: is not a list of tables; write each as [[{name}]]")
    out, seen = [], set()
    for i, t in enumerate(items, 1):
        r = _Reader(t, f"{name}[{i}].", src)
        pid = r.get("id", str, required=True, check=_nonempty, todo='give an id such as "S1"')
        if pid in seen:
            r.fail("id", f"{pid!r} is used twice", "give every position its own id")
        seen.add(pid)
        xy = r.get(
            "xy_m",
            list,
            check=lambda v: (
                None
                if len(v) == 2
                and all(
                    isinstance(c, int | float) and not isinstance(c, bool) and math.isfinite(c)
                    for c in v
                )
                else "must be two finite numbers [x, y]"
            ),
        )
        h = r.get("height_m", float, check=_range(0.0, 100.0))
        note = r.get("note", str, "")
        r.done()
        out.append(
            Point(
                pid,
                None if xy is None else float(xy[0]),
                None if xy is None else float(xy[1]),
                h,
                note,
            )
        )
    return tuple(out)


def parse_study(text: str, path) -> StudyFile:
    """Validate the TOML ``text`` of a study file at ``path`` (used for relative paths and
    in messages). See :func:`load_study`.

    Examples
    --------
    Relative response paths are taken from the study file's folder:

    >>> study = parse_study(template_text("Hall B"), Path("/data/hall/study.toml"))
    >>> str(study.responses[0].file)
    '/data/hall/S1R1.wav'
    >>> parse_study("study = { titel = 'a typo' }", Path("s.toml"))
    Traceback (most recent call last):
    ...
    roomconv.errors.InputError: s.toml: study.title: is missing; ...
    """
    path = Path(path)
    src = str(path)
    doc = _toml(text, src)
    base = path.parent
    top = _Reader(doc, "", src)
    # The tables are read in this order so that the first problem in it is the one named.
    title, client, number, author, dates, notes = _study_table(top, src)
    room = _room_table(top, src)
    equipment = _equipment_table(top, src)
    sweep = _sweep_table(top, src)
    top.used.update({"sources", "receivers"})
    sources = _points(doc, "sources", src)
    receivers = _points(doc, "receivers", src)
    responses = _responses_table(top, base, src, sources, receivers)
    targets = _targets_table(top, src) if "targets" in doc else None
    top.used.add("targets")
    office = _office(top, base, src) if "office" in doc else None
    top.used.add("office")
    workbench = _workbench_table(top.get("workbench", dict, {}), src)
    layout = _channels_table(top, src) if "channels" in doc else None
    top.used.add("channels")
    top.done()
    return StudyFile(
        path=path,
        title=title,
        client=client,
        project_number=number,
        author=author,
        dates=dates,
        notes=notes,
        room=room,
        equipment=equipment,
        sweep=sweep,
        sources=sources,
        receivers=receivers,
        responses=responses,
        targets=targets,
        office=office,
        workbench=workbench,
        layout=layout,
    )


def _toml(text: str, src: str) -> dict:
    """The TOML document, or a refusal naming the file and the parser's complaint."""
    try:
        return tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise InputError(
            f"{src}: not valid TOML ({exc}); compare it with 'roomconv study init'"
        ) from None


def _study_table(top: _Reader, src: str) -> tuple[str, str, str, str, tuple[str, ...], str]:
    """The [study] table: title, client, project number, author, dates and notes."""
    st = _Reader(top.get("study", dict, required=True), "study.", src)
    title = st.get("title", str, required=True, check=_nonempty)
    client = st.get("client", str, "")
    number = st.get("project_number", str, "")
    author = st.get("author", str, "")
    dates = _date_list(st.get("dates", object, []), st, "dates")
    notes = st.get("notes", str, "")
    st.done()
    return title, client, number, author, dates, notes


def _room_table(top: _Reader, src: str) -> Room:
    """The [room] table: name, use, size, state and conditions."""
    rm = _Reader(top.get("room", dict, required=True), "room.", src)
    dims = rm.get(
        "dimensions_m",
        list,
        check=lambda v: (
            None
            if len(v) == 3
            and all(isinstance(c, int | float) and not isinstance(c, bool) and c > 0 for c in v)
            else "must be three positive numbers [length, width, height]"
        ),
    )
    room = Room(
        name=rm.get("name", str, required=True, check=_nonempty),
        use=rm.get("use", str, ""),
        volume_m3=rm.get("volume_m3", float, check=_positive),
        surface_m2=rm.get("surface_m2", float, check=_positive),
        # The check above lets through exactly three numbers.
        dimensions_m=None if dims is None else (float(dims[0]), float(dims[1]), float(dims[2])),
        state=rm.get(
            "state",
            str,
            "unoccupied",
            check=lambda v: None if v in STATES else f"{v!r} is not one of " + ", ".join(STATES),
        ),
        furnished=rm.get("furnished", bool),
        temperature_c=rm.get("temperature_c", float, check=_range(-30.0, 60.0)),
        humidity_pct=rm.get("humidity_pct", float, check=_range(0.0, 100.0)),
    )
    rm.done()
    return room


def _equipment_table(top: _Reader, src: str) -> Equipment:
    """The [equipment] table: every entry is optional text."""
    eq = _Reader(top.get("equipment", dict, {}), "equipment.", src)
    equipment = Equipment(**{k: eq.get(k, str, "") for k in Equipment.__dataclass_fields__})
    eq.done()
    return equipment


def _sweep_table(top: _Reader, src: str) -> SweepSettings:
    """The [sweep] table: the settings the responses were measured with, for the report."""
    sw = _Reader(top.get("sweep", dict, {}), "sweep.", src)
    sweep = SweepSettings(
        f_low_hz=sw.get("f_low_hz", float, check=_positive),
        f_high_hz=sw.get("f_high_hz", float, check=_positive),
        duration_s=sw.get("duration_s", float, check=_positive),
        level_dbfs=sw.get("level_dbfs", float, check=_range(-120.0, 0.0)),
        repeats=sw.get("repeats", int, check=lambda v: None if v >= 1 else "must be 1 or more"),
        silence_s=sw.get("silence_s", float, check=_range(0.0, 600.0)),
        rate_hz=sw.get("rate_hz", int, check=lambda v: None if v > 0 else "must be positive"),
    )
    if sweep.f_low_hz and sweep.f_high_hz and sweep.f_low_hz >= sweep.f_high_hz:
        sw.fail(
            "f_low_hz",
            f"{sweep.f_low_hz:g} Hz is not below f_high_hz ({sweep.f_high_hz:g} Hz)",
            "swap or correct them",
        )
    sw.done()
    return sweep


def _responses_table(
    top: _Reader, base: Path, src: str, sources: tuple[Point, ...], receivers: tuple[Point, ...]
) -> tuple[Response, ...]:
    """The [[responses]] tables: each names a listed source and receiver, a file and channel."""
    items = top.get(
        "responses",
        list,
        required=True,
        todo="list each measured response as a [[responses]] table",
    )
    if not items:
        top.fail("responses", "is empty", "list at least one [[responses]] table")
    s_ids, r_ids = {p.id for p in sources}, {p.id for p in receivers}
    responses, combos = [], set()
    for i, t in enumerate(items, 1):
        if not isinstance(t, dict):
            top.fail("responses", f"entry {i} is not a table", "write each as [[responses]]")
        r = _Reader(t, f"responses[{i}].", src)
        s = r.get("source", str, required=True, check=_one_of(s_ids, "sources"))
        c = r.get("receiver", str, required=True, check=_one_of(r_ids, "receivers"))
        f = _path(base, r.get("file", str, required=True), r, "file")
        ch = r.get("channel", int, 1, check=lambda v: None if v >= 1 else "channels count from 1")
        q = r.get("quality_file", str)
        dist = r.get("distance_m", float, check=_range(0.1, 1000.0))
        r.done()
        if (s, c, f, ch) in combos:
            r.fail("file", "the same response is listed twice", "remove one of them")
        combos.add((s, c, f, ch))
        qf = None if q is None else _path(base, q, r, "quality_file")
        responses.append(Response(s, c, f, ch, qf, dist))
    return tuple(responses)


def _targets_table(top: _Reader, src: str) -> Targets:
    """The [targets] table: basis, decay time per band, tolerance and where it comes from."""
    tg = _Reader(top.get("targets", dict), "targets.", src)
    basis = tg.get(
        "basis",
        str,
        "t30",
        check=lambda v: (
            None if v in TARGET_BASES else f"{v!r} is not one of {', '.join(TARGET_BASES)}"
        ),
    )
    bands = _target_bands(tg)
    tol = tg.get(
        "tolerance_pct",
        list,
        [-20, 20],
        check=lambda v: (
            None
            if len(v) == 2
            and all(isinstance(c, int | float) and not isinstance(c, bool) for c in v)
            and -100 < v[0] <= 0 <= v[1]
            else "must be [lower, upper] with lower ≤ 0 ≤ upper, in %"
        ),
    )
    origin = tg.get("source", str, "")
    tg.done()
    return Targets(basis, dict(sorted(bands.items())), (float(tol[0]), float(tol[1])), origin)


def _target_bands(tg: _Reader) -> dict[float, float]:
    """The target's reverberation_s table: {band Hz: positive time in s}."""
    per_band = tg.get(
        "reverberation_s",
        dict,
        required=True,
        todo='give seconds per band, e.g. { "500" = 1.2, "1000" = 1.2 }',
    )
    bands: dict[float, float] = {}
    for k, v in per_band.items():
        try:
            b = float(k)
        except ValueError:
            tg.fail(
                "reverberation_s",
                f"band {k!r} is not a frequency in Hz",
                'use keys such as "500"',
            )
        if isinstance(v, bool) or not isinstance(v, int | float) or not v > 0:
            tg.fail(
                "reverberation_s",
                f"band {k}: {v!r} is not a positive time in s",
                "give seconds, e.g. 1.2",
            )
        bands[b] = float(v)
    return bands


def _office(top: _Reader, base: Path, src: str) -> OfficeSettings:
    of = _Reader(top.get("office", dict), "office.", src)
    cal = of.get("calibration", str)
    noise = of.get(
        "background_noise_db",
        list,
        check=lambda v: (
            None
            if len(v) == 7
            and all(
                isinstance(c, int | float) and not isinstance(c, bool) and -20 <= c <= 150
                for c in v
            )
            else "must be seven levels in dB SPL (125 Hz to 8 kHz octaves), −20…150"
        ),
    )
    of.done()
    return OfficeSettings(
        None if cal is None else _path(base, cal, of, "calibration"),
        None if noise is None else tuple(float(x) for x in noise),
    )


#: The ``[channels] layout`` values a study file accepts (see :data:`StudyFile.layout`).
STUDY_LAYOUTS = ("omni,fig8", "fig8,omni", "acn-sn3d", "binaural", "stage")


def _channels_table(top: _Reader, src: str) -> str:
    """The [channels] table: what the channels of every response file are."""
    ch = _Reader(top.get("channels", dict), "channels.", src)
    layout = ch.get(
        "layout",
        str,
        required=True,
        check=lambda v: (
            None if v in STUDY_LAYOUTS else f"{v!r} is not one of {', '.join(STUDY_LAYOUTS)}"
        ),
    )
    ch.done()
    return layout


def _workbench_table(table: dict, src: str) -> dict:
    """The ``[workbench]`` table: flat, with plain values only (nothing the analysis reads)."""
    for k, v in table.items():
        plain = isinstance(v, str | bool | int | float) or (
            isinstance(v, list) and all(isinstance(x, str) for x in v)
        )
        if not plain:
            raise InputError(
                f"{src}: workbench.{k}: {v!r} is not text, a number, true/false or a list of "
                "text; correct it or remove the key"
            )
    return dict(table)


def load_study(path) -> StudyFile:
    """Read and validate a study file.

    Raises
    ------
    InputError
        The file is missing or unreadable, is not TOML, has an unknown key or a bad value;
        the message names the key and says what to do.

    Examples
    --------
    >>> import tempfile
    >>> with tempfile.TemporaryDirectory() as tmp:
    ...     p = Path(tmp) / "study.toml"
    ...     _ = p.write_text(template_text("Hall B"))
    ...     load_study(p).room.volume_m3
    250.0
    """
    p = Path(path)
    if p.is_dir():
        raise InputError(f"{p}: is a folder, not a study file; give the .toml file inside it")
    if not p.is_file():
        raise InputError(
            f"{p}: study file not found; check the path or create one with 'roomconv study init'"
        )
    try:
        text = p.read_text(encoding="utf-8")
    except (OSError, UnicodeDecodeError) as exc:
        raise InputError(f"{p}: cannot be read as a UTF-8 text file ({exc})") from None
    return parse_study(text, p)


_POSITIONS_NOTE = (
    "# Positions: plan coordinates in metres from a corner you name in the "
    "notes,\n# and the height above the floor."
)


def template_text(title: str = "Acoustic measurements") -> str:
    """A commented study file to fill in; it loads as it stands once its files exist.

    Examples
    --------
    >>> text = template_text("Hall B")
    >>> text.startswith("#"), 'title = "Hall B"' in text
    (True, True)
    """
    return _head(title) + _TEMPLATE_POSITIONS.format(_POSITIONS_NOTE=_POSITIONS_NOTE)


def _toml_str(text: str) -> str:
    # JSON's string escapes are all valid in a TOML basic string.
    return json.dumps(str(text), ensure_ascii=False)


def session_study_text(title: str, positions, folder) -> str:
    """A study file for responses measured in one session: each (name, file, quality file
    or None) becomes a receiver of one source S1, with paths relative to ``folder`` (where
    the study file goes).

    Only what the session knows is written (see :func:`workbench_session_text`): no
    template numbers such as a volume or sweep settings nobody gave, so a report made from
    the file never shows them as measured. Room size, coordinates and equipment are left
    for the user to add.

    Examples
    --------
    >>> text = session_study_text("Session", [("R1", Path("/x/irs/R1.wav"), None)], Path("/x"))
    >>> [str(r.file) for r in parse_study(text, Path("/x/session.toml")).responses]
    ['/x/irs/R1.wav']
    >>> "volume_m3" in text, "duration_s" in text
    (False, False)
    """
    return workbench_session_text(title, positions, folder)


def _toml_value(v) -> str:
    if isinstance(v, bool):
        return "true" if v else "false"
    if isinstance(v, int):
        return str(v)
    if isinstance(v, float):
        return repr(v)
    if isinstance(v, list | tuple):
        return "[" + ", ".join(_toml_value(x) for x in v) + "]"
    return _toml_str(v)


def workbench_session_text(
    title: str,
    positions,
    folder,
    *,
    notes: str = "",
    room: dict | None = None,
    sweep: dict | None = None,
    workbench: dict | None = None,
) -> str:
    """A study file holding a whole workbench session: the responses measured, the sweep as
    played, the room's name and conditions, notes, and the workbench's own fields.

    Only values actually known are written (no template numbers), so a report made from it
    never shows a value nobody gave. ``positions`` are (name, file, quality file or None),
    each a receiver of source S1, paths relative to ``folder`` (where the file goes).
    ``room`` takes ``name``, ``temperature_c``, ``humidity_pct``; ``sweep`` the keys of
    :class:`SweepSettings`; ``None`` values are left out.
    """
    folder = Path(folder)
    today = _dt.date.today().isoformat()
    room = {"name": "Room 1", **{k: v for k, v in (room or {}).items() if v is not None}}

    def table(name: str, values: dict) -> list[str]:
        rows = [f"{k} = {_toml_value(v)}" for k, v in values.items() if v is not None]
        return [f"[{name}]", *rows, ""] if rows else []

    parts = [
        "# A roomconv workbench session, also a study file: `roomconv analyze --study FILE`",
        "# reads it, `roomconv tui FILE` opens it. Paths are relative to this file.",
        "",
        *table("study", {"title": title, "dates": [today], "notes": notes}),
        *table("room", room),
        *table("sweep", sweep or {}),
        *table("workbench", workbench or {}),
        "[[sources]]",
        'id = "S1"',
        "",
    ]
    for name, _file, _q in positions:
        parts += ["[[receivers]]", f"id = {_toml_str(name)}", ""]
    for name, file, quality in positions:
        parts += [
            "[[responses]]",
            'source = "S1"',
            f"receiver = {_toml_str(name)}",
            f"file = {_toml_str(os.path.relpath(Path(file).resolve(), folder.resolve()))}",
        ]
        if quality is not None:
            rel = os.path.relpath(Path(quality).resolve(), folder.resolve())
            parts.append(f"quality_file = {_toml_str(rel)}")
        parts.append("")
    return "\n".join(parts)


def _head(title: str) -> str:
    today = _dt.date.today().isoformat()
    return f"""# Room acoustic measurement study, read by `roomconv analyze --study FILE`.
# Paths are relative to this file. Keys not listed here are refused, so a typo is caught.

[study]
title = {_toml_str(title)}
client = ""                 # who the report is for
project_number = ""
author = ""                 # who measured and wrote the report
dates = [{today}]          # one or more measurement dates, YYYY-MM-DD
notes = ""                  # free text, shown in the report

[room]
name = "Room 1"
use = ""                    # e.g. "classroom", "chamber music"
# Give the volume and surface area, or the dimensions of a rectangular room (or both).
volume_m3 = 250.0
surface_m2 = 250.0
# dimensions_m = [10.0, 8.0, 3.1]   # length, width, height
state = "unoccupied"        # unoccupied or occupied
furnished = true
temperature_c = 20.0
humidity_pct = 50.0

[equipment]
source = ""                 # loudspeaker type
source_serial = ""
microphone = ""
microphone_serial = ""
interface = ""              # sound card
interface_serial = ""

[sweep]                     # as played; leave out what you do not know
f_low_hz = 20.0
f_high_hz = 20000.0
duration_s = 6.0
level_dbfs = -12.0
repeats = 2
silence_s = 3.0
rate_hz = 48000
"""


_TEMPLATE_POSITIONS = """
{_POSITIONS_NOTE}
[[sources]]
id = "S1"
xy_m = [2.0, 4.0]
height_m = 1.5

[[receivers]]
id = "R1"
xy_m = [6.0, 2.5]
height_m = 1.2

[[receivers]]
id = "R2"
xy_m = [7.5, 5.5]
height_m = 1.2

# One table per measured response. channel counts from 1 (default 1); quality_file is
# the --json written by `roomconv extract` or `roomconv measure` (optional).
[[responses]]
source = "S1"
receiver = "R1"
file = "S1R1.wav"

[[responses]]
source = "S1"
receiver = "R2"
file = "S1R2.wav"

# Optional: a reverberation-time target per band (s) with its tolerance in % of the target.
# [targets]
# basis = "t30"             # t20, t30 or edt
# reverberation_s = {{ "125" = 0.8, "250" = 0.7, "500" = 0.6, "1000" = 0.6, "2000" = 0.6 }}
# tolerance_pct = [-20, 20]
# source = ""               # where the target comes from (a standard, a brief)

# Optional: an open-plan office line (ISO 3382-3), read by `roomconv office FILE`. Give
# each response its source distance (distance_m = 4.0 in its [[responses]] table; else the
# plan distance from xy_m is used), a strength reference from `roomconv calibrate` for
# absolute levels, and the background noise measured at the positions.
# [office]
# calibration = "cal.json"
# background_noise_db = [40.0, 38.0, 36.0, 34.0, 31.0, 27.0, 22.0]  # 125 Hz … 8 kHz, dB SPL

# Optional: what the channels of every response file are, for the ISO 3382-1 spatial and
# stage parameters: "omni,fig8" or "fig8,omni" (lateral energy), "acn-sn3d" (first-order
# ambisonic, W Y Z X), "binaural" (left, right: IACC) or "stage" (responses 1 m from the
# source on stage: ST_early, ST_late). Each file then holds one position's channels.
# [channels]
# layout = "binaural"
"""
