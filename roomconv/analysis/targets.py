"""Reverberation-time targets: a user's flat or per-band curve, and published targets by name
(DIN 18041 use groups, ANSI/ASA S12.60 classrooms, BB93 rooms), each with its source.

A target gives, per octave band, the time aimed at and the range accepted around it; a
criterion that a standard states on the mean of several bands keeps that form
(:attr:`Target.mean_bands`). Values recalled without the source at hand say "from memory".
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

from .. import validate
from ..errors import InputError

__all__ = [
    "OCTAVES",
    "Target",
    "KNOWN_TARGETS",
    "DIN18041_GROUPS",
    "din18041_t_soll",
    "din18041_tolerance",
    "s1260_limit",
    "user_target",
    "parse_target",
]

#: Octave bands a target may name, Hz (IEC 61260-1 nominal mid-band frequencies).
OCTAVES = (63, 125, 250, 500, 1000, 2000, 4000, 8000)

#: DIN 18041:2016 use groups: (use, a, b, lowest V m³, highest V m³) in T_soll = a·lg V + b.
#: Seen in a manufacturer's summary of the standard, not in the standard's own text.
DIN18041_GROUPS: dict[str, tuple[str, float, float, float, float]] = {
    "A1": ("music", 0.45, 0.07, 30.0, 1000.0),
    "A2": ("speech and presentation", 0.37, -0.14, 50.0, 5000.0),
    "A3": ("teaching and communication", 0.32, -0.17, 30.0, 5000.0),
    "A4": ("teaching and communication, inclusive", 0.26, -0.14, 30.0, 500.0),
    "A5": ("sport", 0.75, -1.00, 200.0, 10000.0),
}
_DIN_SOURCE = (
    "DIN 18041:2016, T_soll by use group (formulas as seen in a manufacturer's summary of "
    "the standard); tolerance band from memory, low confidence"
)
#: DIN 18041:2016 sport halls above 10 000 m³: T_soll = 2.0 s (same summary as above).
DIN18041_A5_ABOVE_S = 2.0
#: DIN 18041:2016 tolerance band T/T_soll per octave, (lower, upper). From memory, low
#: confidence: remembered for groups A2–A4 and applied to A1 and A5 as well.
DIN18041_TOLERANCE: dict[int, tuple[float, float]] = {
    63: (0.5, 1.7),
    125: (0.65, 1.45),
    250: (0.8, 1.2),
    500: (0.8, 1.2),
    1000: (0.8, 1.2),
    2000: (0.8, 1.2),
    4000: (0.65, 1.2),
    8000: (0.5, 1.2),
}

#: ANSI/ASA S12.60-2010 Part 1: the largest mean of T at 500 Hz, 1 kHz and 2 kHz in an
#: unoccupied, furnished core learning space, by volume (seen): (largest V m³, T s).
#: 283 m³ and 566 m³ are the standard's 10 000 ft³ and 20 000 ft³.
S1260_LIMITS = ((283.0, 0.6), (566.0, 0.7))
_S1260_SOURCE = (
    "ANSI/ASA S12.60-2010 Part 1, core learning spaces: mean T of 500 Hz, 1 kHz and 2 kHz "
    "at most 0.6 s up to 283 m³, 0.7 s up to 566 m³"
)
S1260_BANDS = (500, 1000, 2000)

#: BB93 (2015) variants: (largest mean T s, bands averaged, source text, from memory).
BB93_VARIANTS: dict[str, tuple[float, tuple[int, ...], str, bool]] = {
    "primary": (
        0.6,
        (500, 1000, 2000),
        "BB93:2015, primary school classroom, new build: T_mf at most 0.6 s (from memory)",
        True,
    ),
    "secondary": (
        0.8,
        (500, 1000, 2000),
        "BB93:2015, secondary school classroom, new build: T_mf at most 0.8 s (from memory)",
        True,
    ),
    "sen": (
        0.4,
        (125, 250, 500, 1000, 2000, 4000),
        "BB93:2015, rooms for pupils with special hearing or communication needs: mean T "
        "of 125 Hz-4 kHz at most 0.4 s",
        False,
    ),
}

#: Every target name :func:`parse_target` knows, for refusals and help.
KNOWN_TARGETS = (
    *(f"din18041:{g}" for g in DIN18041_GROUPS),
    "s12.60",
    *(f"bb93:{v}" for v in BB93_VARIANTS),
)


@dataclass(frozen=True)
class Target:
    """A reverberation-time target per octave band.

    Attributes
    ----------
    name : str
        How it was asked for (``"0.6"``, ``"din18041:A3"``).
    label : str
        One line for tables and reports.
    target_s : dict of int to float
        The time aimed at per band, s.
    min_s, max_s : dict of int to float or None
        The accepted range per band; None where the source sets no bound.
    source : str
        Where the numbers come from, "from memory" where so.
    mean_bands : tuple of int
        When not empty, the source's criterion is on the mean over these bands (``max_s``
        then bounds that mean; planning aims every one of them at it).
    notes : tuple of str
        Cautions a plan or report carries with the target.

    Examples
    --------
    A lower bound alone (None: the source sets no upper one):

    >>> t = Target("mine", "at least 0.5 s", {500: 0.6}, {500: 0.5}, {500: None}, "ours")
    >>> t.accepts(500, 0.7), t.accepts(500, 0.4)
    (True, False)
    """

    name: str
    label: str
    target_s: dict[int, float]
    min_s: dict[int, float | None]
    max_s: dict[int, float | None]
    source: str
    mean_bands: tuple[int, ...] = ()
    notes: tuple[str, ...] = field(default_factory=tuple)

    def accepts(self, band: int, t: float) -> bool:
        """True when ``t`` lies in the band's accepted range.

        Parameters
        ----------
        band : int
            Octave mid-band frequency, Hz.
        t : float
            Reverberation time, s.

        Returns
        -------
        bool
            Bounds included; a bound the band lacks is no bound.
        """
        lo, hi = self.min_s.get(band), self.max_s.get(band)
        return (lo is None or t >= lo) and (hi is None or t <= hi)


def din18041_t_soll(group: str, volume_m3: float) -> float:
    """The DIN 18041 target reverberation time T_soll for a use group and a volume.

    Parameters
    ----------
    group : {"A1", "A2", "A3", "A4", "A5"}
    volume_m3 : float
        Room volume; refused outside the group's range of validity.

    Returns
    -------
    float
        T_soll in s.

    References
    ----------
    DIN 18041:2016-03, Hörsamkeit in Räumen, 5.2 (T_soll = a·lg(V/m³) + b per use group).
    The formulas were seen in a manufacturer's summary of the standard.

    Examples
    --------
    >>> round(din18041_t_soll("A3", 200.0), 3)  # 0.32·lg 200 − 0.17
    0.566
    """
    g = group.upper()
    if g not in DIN18041_GROUPS:
        raise InputError(
            f"DIN 18041 use group '{group}' is unknown; use one of {', '.join(DIN18041_GROUPS)}"
        )
    use, a, b, v_lo, v_hi = DIN18041_GROUPS[g]
    v = validate.positive(volume_m3, "room volume", unit="m³")
    if g == "A5" and v > v_hi:
        return DIN18041_A5_ABOVE_S
    if not v_lo <= v <= v_hi:
        raise InputError(
            f"room volume {v:g} m³ is outside {v_lo:g}-{v_hi:g} m³, where DIN 18041 gives "
            f"T_soll for group {g} ({use}); give a target of your own"
        )
    return a * math.log10(v) + b


def din18041_tolerance(band_hz: int) -> tuple[float, float]:
    """The DIN 18041 tolerance band T/T_soll in an octave band (from memory, low confidence).

    References
    ----------
    DIN 18041:2016-03, Figure 2 (tolerance range for groups A2–A4), from memory.

    Examples
    --------
    >>> din18041_tolerance(1000)
    (0.8, 1.2)
    """
    return DIN18041_TOLERANCE[int(band_hz)]


def s1260_limit(volume_m3: float) -> float:
    """The ANSI/ASA S12.60-2010 limit on the mean T (500 Hz–2 kHz) for a classroom volume.

    References
    ----------
    ANSI/ASA S12.60-2010/Part 1, American National Standard Acoustical Performance
    Criteria, Design Requirements, and Guidelines for Schools, 5.3 (limits seen in a
    summary of the standard).

    Examples
    --------
    >>> s1260_limit(200.0), s1260_limit(400.0)
    (0.6, 0.7)
    """
    v = validate.positive(volume_m3, "room volume", unit="m³")
    for v_hi, t in S1260_LIMITS:
        if v <= v_hi:
            return t
    raise InputError(
        f"room volume {v:g} m³ is above {S1260_LIMITS[-1][0]:g} m³, the largest core learning "
        "space S12.60 sets a limit for; give a target of your own"
    )


def user_target(
    times_s: dict[int, float],
    tolerance_pct: tuple[float, float] = (-20.0, 20.0),
    *,
    name: str = "user",
    label: str = "",
    source: str = "",
) -> Target:
    """A target from times per band and a tolerance in % of the target.

    Examples
    --------
    >>> t = user_target({500: 0.6}, (-10.0, 10.0))
    >>> round(t.min_s[500], 2), round(t.max_s[500], 2)
    (0.54, 0.66)
    """
    lo, hi = (float(x) for x in tolerance_pct)
    if not (-100.0 < lo <= 0.0 <= hi) or not math.isfinite(hi):
        raise InputError(
            f"tolerance {lo:g} %/{hi:g} % must be lower ≤ 0 ≤ upper, lower above -100 %"
        )
    bands = {int(b): float(v) for b, v in sorted(times_s.items())}
    return Target(
        name=name,
        label=label or f"user target, tolerance {lo:+g} %/{hi:+g} %",
        target_s=bands,
        min_s={b: v * (1 + lo / 100) for b, v in bands.items()},
        max_s={b: v * (1 + hi / 100) for b, v in bands.items()},
        source=source or "given by the user",
    )


def _din(group: str, volume_m3: float) -> Target:
    g = group.upper()
    t = din18041_t_soll(g, volume_m3)
    use = DIN18041_GROUPS[g][0]
    return Target(
        name=f"din18041:{g}",
        label=f"DIN 18041 group {g} ({use}), T_soll {t:.2f} s at V = {volume_m3:.0f} m³",
        target_s={b: t for b in OCTAVES},
        min_s={b: t * din18041_tolerance(b)[0] for b in OCTAVES},
        max_s={b: t * din18041_tolerance(b)[1] for b in OCTAVES},
        source=_DIN_SOURCE,
        notes=(
            "DIN 18041 tolerance band from memory (low confidence): check it against the "
            "standard before relying on a band near its edge",
        ),
    )


def _limit(name: str, label: str, limit: float, bands, source: str, notes=()) -> Target:
    return Target(
        name=name,
        label=label,
        target_s={b: limit for b in bands},
        min_s={b: None for b in bands},
        max_s={b: limit for b in bands},
        source=source,
        mean_bands=tuple(bands),
        notes=(
            "the criterion is on the mean over "
            + ", ".join(f"{b:g} Hz" for b in bands)
            + "; planning aims each of these bands at the limit, a design usually aims "
            "somewhat below it (common practice)",
            *notes,
        ),
    )


def parse_target(
    text: str,
    volume_m3: float | None = None,
    tolerance_pct: tuple[float, float] = (-20.0, 20.0),
) -> Target:
    """A target from its text: a flat time (``0.6``), per-band times (``500:0.6,1000:0.6``)
    or a published one by name (see :data:`KNOWN_TARGETS`).

    Parameters
    ----------
    text : str
    volume_m3 : float, optional
        Needed by the targets that depend on the volume (DIN 18041, S12.60).
    tolerance_pct : (float, float)
        For a flat or per-band target: the accepted range in % of the target.

    Examples
    --------
    >>> parse_target("0.6").target_s[1000]
    0.6
    >>> parse_target("s12.60", 200.0).max_s[500]
    0.6
    """
    s = str(text).strip()
    key = s.lower()
    if key.startswith("din18041:"):
        group = key.split(":", 1)[1].upper()
        if group not in DIN18041_GROUPS:
            raise InputError(f"target '{s}' is unknown; known targets: {', '.join(KNOWN_TARGETS)}")
        return _din(group, _need_volume(s, volume_m3))
    if key == "s12.60":
        v = _need_volume(s, volume_m3)
        lim = s1260_limit(v)
        return _limit(
            "s12.60",
            f"ANSI/ASA S12.60-2010 classroom, mean T (500 Hz-2 kHz) at most {lim:g} s "
            f"at V = {v:.0f} m³",
            lim,
            S1260_BANDS,
            _S1260_SOURCE,
        )
    if key.startswith("bb93:"):
        variant = key.split(":", 1)[1]
        if variant not in BB93_VARIANTS:
            raise InputError(f"target '{s}' is unknown; known targets: {', '.join(KNOWN_TARGETS)}")
        lim, bands, src, _mem = BB93_VARIANTS[variant]
        what = "T_mf" if bands == S1260_BANDS else "mean T (125 Hz-4 kHz)"
        return _limit(
            f"bb93:{variant}", f"BB93 {variant}: {what} at most {lim:g} s", lim, bands, src
        )
    if not set(key) <= set("0123456789.:,e+- "):
        raise InputError(
            f"target '{s}' is unknown; give seconds (0.6), BAND:SECONDS items "
            f"(500:0.6,1000:0.6) or one of {', '.join(KNOWN_TARGETS)}"
        )
    times = validate.parse_band_values(s, "target", OCTAVES, hi=30.0)
    flat = ":" not in s
    lo, hi = tolerance_pct
    return user_target(
        times,
        tolerance_pct,
        name=s,
        label=(f"flat {times[OCTAVES[0]]:g} s" if flat else "per-band target")
        + f", tolerance {lo:+g} %/{hi:+g} %",
    )


def _need_volume(name: str, volume_m3: float | None) -> float:
    if volume_m3 is None:
        raise InputError(f"target '{name}' depends on the room volume: give the volume")
    return validate.positive(volume_m3, "room volume", unit="m³")
