"""Treatment planning: the absorption area to add (or remove) per octave band to bring a
measured reverberation time to a target, by Sabine and by Eyring, and the area of each chosen
material that does it, with the decay time predicted after treatment.

Diffuse-field formulas throughout: a plan is a first estimate, not a guarantee.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from .. import validate
from ..errors import InputError
from ..synth.air import power_attenuation
from ..synth.materials import Material
from .targets import Target

__all__ = [
    "SABINE_CONSTANT",
    "SURFACE_NAMES",
    "DECISION_CAUTION",
    "exact_octave_hz",
    "air_m",
    "sphere_area",
    "check_room",
    "sabine_added_area",
    "eyring_mean_alpha",
    "eyring_time",
    "eyring_added_area",
    "Treatment",
    "TreatmentArea",
    "BandPlan",
    "TreatmentPlan",
    "plan_bands",
    "BASES",
    "measured_times",
]

#: Decay times a plan may start from.
BASES = ("t30", "t20", "edt")

#: Sabine's constant 24·ln10/c in s/m at c ≈ 343 m/s (20 °C); ISO 354:2003, 8.1.2.1 writes it
#: 55.3/c (from memory). The value the trade quotes, and the one in the closed-form check.
SABINE_CONSTANT = 0.161

#: Surfaces a treatment may be named on: a rectangular room's six, and the four walls.
SURFACE_NAMES = ("floor", "ceiling", "left", "right", "front", "back", "walls")

#: Largest volume and surface accepted: a room of 1000 m sides, the synthesis' own limit, and
#: a hundred times its surface for very flat rooms (common practice: beyond any enclosure).
VOLUME_MAX_M3 = 1.0e9
AREA_MAX_M2 = 6.0e8

#: Decision caution printed with every plan.
DECISION_CAUTION = (
    "This plan is an estimate from diffuse-field formulas. Decisions on treatment, and on "
    "compliance with any standard or regulation, rest with the responsible licensed "
    "professional and the applicable local codes."
)


def exact_octave_hz(band_hz: float) -> float:
    """The exact mid-band frequency 1000·10^(3k/10) of a nominal octave band (IEC 61260-1).

    Examples
    --------
    >>> round(exact_octave_hz(4000), 1)
    3981.1
    """
    k = round(10.0 * math.log10(band_hz / 1000.0) / 3.0)
    return 1000.0 * 10.0 ** (0.3 * k)


def air_m(band_hz: float, temperature_c: float = 20.0, humidity_pct: float = 50.0) -> float:
    """The air's energy attenuation m (1/m) in an octave band, for the 4mV term.

    Parameters
    ----------
    band_hz : float
        Nominal octave mid-band frequency, Hz (500, 1000, ...).
    temperature_c : float
        Air temperature, °C.
    humidity_pct : float
        Relative humidity, %.

    Returns
    -------
    float
        m in 1/m (energy, natural-log units), at the band's exact mid-band frequency.

    References
    ----------
    ISO 9613-1:1993, eqs. (3)–(5), evaluated at the band's exact mid-band frequency by
    :func:`roomconv.synth.air.power_attenuation`; ISO 3382-2:2008, 3, for m.

    Examples
    --------
    The nominal 4 kHz band is evaluated at 1000·10^0.6 ≈ 3981 Hz (IEC 61260-1):

    >>> from roomconv.synth.air import power_attenuation
    >>> air_m(4000) == float(power_attenuation(1000 * 10**0.6))
    True
    >>> air_m(1000) == float(power_attenuation(1000.0))
    True
    """
    return float(power_attenuation(exact_octave_hz(band_hz), temperature_c, humidity_pct))


def sphere_area(volume_m3: float) -> float:
    """The surface of a sphere of volume V, (36π V²)^(1/3): the least any room can have.

    Examples
    --------
    >>> round(sphere_area(4 / 3 * math.pi), 6)  # unit sphere: 4π
    12.566371
    """
    return float((36.0 * math.pi * volume_m3**2) ** (1.0 / 3.0))


def check_room(volume_m3, area_m2) -> tuple[float, float]:
    """Volume and surface area as floats, refused when no room could have them.

    Parameters
    ----------
    volume_m3 : float or str
        Room volume, m³; positive, at most 1e9 m³.
    area_m2 : float or str
        Total surface area, m²; at least a sphere's of the same volume
        (:func:`sphere_area`), at most 6e8 m².

    Returns
    -------
    (float, float)
        The volume in m³ and the area in m².

    Raises
    ------
    roomconv.errors.InputError
        A value that is not a positive number, or an area below the sphere's.

    Examples
    --------
    >>> check_room(100, "130")
    (100.0, 130.0)

    A sphere of 100 m³ has (36π·100²)^(1/3) ≈ 104.2 m² of surface, so 90 m² is refused:

    >>> check_room(100.0, 90.0)  # doctest: +ELLIPSIS
    Traceback (most recent call last):
    ...
    roomconv.errors.InputError: room surface area 90 m² is less than 104.2 m², the least ...
    """
    v = validate.positive(volume_m3, "room volume", VOLUME_MAX_M3, unit="m³")
    s = validate.positive(area_m2, "room surface area", AREA_MAX_M2, unit="m²")
    least = sphere_area(v)
    if s < least * (1 - 1e-9):
        raise InputError(
            f"room surface area {s:g} m² is less than {least:.1f} m², the least any room of "
            f"{v:g} m³ can have (a sphere's); check the area and the volume"
        )
    return v, s


def sabine_added_area(volume_m3: float, t_measured_s: float, t_target_s: float) -> float:
    """ΔA = 0.161·V·(1/T_target − 1/T_measured): equivalent absorption area to add, m².

    The air term 4mV is the same before and after, so it cancels. Negative: remove absorption.

    References
    ----------
    Sabine, W. C. (1922). Collected Papers on Acoustics. Harvard University Press.
    ISO 354:2003, 8.1.2.1 (equivalent absorption area from T; the constant 55.3/c).

    Examples
    --------
    >>> round(sabine_added_area(100.0, 1.61, 0.805), 3)  # 0.161·100·(1/0.805 − 1/1.61)
    10.0
    """
    return SABINE_CONSTANT * volume_m3 * (1.0 / t_target_s - 1.0 / t_measured_s)


def eyring_mean_alpha(volume_m3: float, area_m2: float, t_s: float, m_per_m: float) -> float:
    """ᾱ = 1 − exp(−(0.161·V/T − 4mV)/S), Eyring's equation solved for the mean absorption.

    Parameters
    ----------
    volume_m3 : float
        Room volume V, m³.
    area_m2 : float
        Total surface area S, m².
    t_s : float
        Reverberation time T, s.
    m_per_m : float
        Air energy attenuation m, 1/m (:func:`air_m`); 0 leaves the air out.

    Returns
    -------
    float
        The mean absorption coefficient ᾱ in [0, 1); NaN when no ᾱ gives ``t_s``: the time
        is longer than the air alone allows (0.161/(4m) s).

    References
    ----------
    Eyring, C. F. (1930). Reverberation time in "dead" rooms. J. Acoust. Soc. Am. 1,
    217–241. Kuttruff, H. Room Acoustics (5th ed., 2009), ch. 5 (the 4mV term).

    Examples
    --------
    >>> round(eyring_mean_alpha(100.0, 161.0, 1.0, 0.0), 6)  # 1 − exp(−16.1/161) = 1 − e^−0.1
    0.095163
    >>> eyring_mean_alpha(100.0, 161.0, 1.0, 0.05)  # 4mV = 20 m² > 16.1 m²: air alone is more
    nan
    """
    x = (SABINE_CONSTANT * volume_m3 / t_s - 4.0 * m_per_m * volume_m3) / area_m2
    if x <= 0:
        return float("nan")
    return float(-np.expm1(-x))


def eyring_time(volume_m3: float, area_m2: float, mean_alpha: float, m_per_m: float) -> float:
    """T = 0.161·V / (−S·ln(1 − ᾱ) + 4mV) (Eyring, 1930); 0 for ᾱ ≥ 1.

    Parameters
    ----------
    volume_m3 : float
        Room volume V, m³.
    area_m2 : float
        Total surface area S, m².
    mean_alpha : float
        Mean absorption coefficient ᾱ.
    m_per_m : float
        Air energy attenuation m, 1/m (:func:`air_m`); 0 leaves the air out.

    Returns
    -------
    float
        Reverberation time, s.

    References
    ----------
    Eyring, C. F. (1930). Reverberation time in "dead" rooms. J. Acoust. Soc. Am. 1,
    217–241.

    Examples
    --------
    >>> round(eyring_time(100.0, 130.0, 0.2, 0.0), 4)  # 16.1 / (130 · 0.22314)
    0.555
    """
    if mean_alpha >= 1.0:
        return 0.0
    return (
        SABINE_CONSTANT * volume_m3 / (-area_m2 * math.log1p(-mean_alpha) + 4 * m_per_m * volume_m3)
    )


def eyring_added_area(
    volume_m3: float, area_m2: float, t_measured_s: float, t_target_s: float, m_per_m: float
) -> float:
    """ΔA = S·(ᾱ_target − ᾱ_measured) by Eyring's equation with the air term, m².

    Parameters
    ----------
    volume_m3 : float
        Room volume V, m³.
    area_m2 : float
        Total surface area S, m².
    t_measured_s, t_target_s : float
        Measured and target reverberation times, s.
    m_per_m : float
        Air energy attenuation m, 1/m (:func:`air_m`); 0 leaves the air out.

    Returns
    -------
    float
        Absorption area to add, m²; negative: remove absorption. NaN when the measured or
        the target time is longer than the air alone allows.

    References
    ----------
    Eyring, C. F. (1930), J. Acoust. Soc. Am. 1, 217–241; ISO 9613-1:1993 for m.

    Examples
    --------
    With 0.161·V/S = 0.1 s, ᾱ = 1 − exp(−0.1/T); from 1 s to 0.5 s
    ΔA = 161·(e^−0.1 − e^−0.2) ≈ 13.863 m², below Sabine's 0.161·100·(2 − 1) = 16.1 m²:

    >>> round(eyring_added_area(100.0, 161.0, 1.0, 0.5, 0.0), 3)
    13.863
    """
    a_m = eyring_mean_alpha(volume_m3, area_m2, t_measured_s, m_per_m)
    a_t = eyring_mean_alpha(volume_m3, area_m2, t_target_s, m_per_m)
    return area_m2 * (a_t - a_m)


@dataclass(frozen=True)
class Treatment:
    """A material to install on a named surface (its area is what the plan finds).

    Attributes
    ----------
    surface : str
        One of :data:`SURFACE_NAMES`.
    material : roomconv.synth.materials.Material
        The material, with its absorption coefficient per octave band.
    surface_area_m2 : float or None
        The surface's own area when the room's dimensions are known, m²; a plan notes an
        area to install beyond it.

    Examples
    --------
    >>> from roomconv.synth.materials import MATERIALS
    >>> t = Treatment("ceiling", MATERIALS["curtain-heavy"], surface_area_m2=40.0)
    >>> t.material.at(500)
    0.55
    """

    surface: str
    material: Material
    #: The surface's own area when the room's dimensions are known, m².
    surface_area_m2: float | None = None


@dataclass
class TreatmentArea:
    """The area of one material on one surface (the JSON's ``treatment`` and ``installed``).

    Attributes
    ----------
    surface : str
        Where the material goes (one of :data:`SURFACE_NAMES`).
    material : str
        The material's name.
    area_m2 : float or None
        Area to install, m²; None where the material cannot reach the target (it absorbs
        nothing there) or the band has nothing to plan.

    Examples
    --------
    >>> TreatmentArea("back", "curtain-heavy", 12.5)
    TreatmentArea(surface='back', material='curtain-heavy', area_m2=12.5)
    """

    surface: str
    material: str
    area_m2: float | None


@dataclass
class BandPlan:
    """One octave band of a plan (the JSON's ``bands`` entries).

    Attributes
    ----------
    band_hz : int
        Nominal octave mid-band frequency, Hz.
    measured_s : float or None
        Measured decay time, s; None where not evaluable.
    target_s, target_min_s, target_max_s : float or None
        The time aimed at and the accepted range, s (None: no bound).
    added_area_sabine_m2, added_area_eyring_m2 : float or None
        Absorption area to add by Sabine and by Eyring, m²; negative: remove.
    treatment : list of TreatmentArea
        Each material's area if this band alone sized it.
    predicted_s : float or None
        Eyring's decay time after the installed areas, s.
    within_tolerance : bool or None
        Whether the judged time (predicted with treatment, else measured) is in range.
    notes : list of str
        Why a value is missing, or what to watch.

    Examples
    --------
    >>> b = BandPlan(500, 1.2, 0.6, 0.48, 0.72, added_area_sabine_m2=13.416666)
    >>> b.as_dict()["added_area_sabine_m2"]
    13.4167
    """

    band_hz: int
    measured_s: float | None
    target_s: float | None
    target_min_s: float | None
    target_max_s: float | None
    added_area_sabine_m2: float | None = None
    added_area_eyring_m2: float | None = None
    treatment: list[TreatmentArea] = field(default_factory=list)
    predicted_s: float | None = None
    within_tolerance: bool | None = None
    notes: list[str] = field(default_factory=list)

    def as_dict(self) -> dict:
        """The band as a JSON-ready dict, times and areas rounded to 4 decimals.

        Returns
        -------
        dict
            The fields by name; ``treatment`` as a list of dicts.
        """
        d = {k: v for k, v in self.__dict__.items() if k != "treatment"}
        d["treatment"] = [t.__dict__.copy() for t in self.treatment]
        for k in (
            "target_s",
            "target_min_s",
            "target_max_s",
            "added_area_sabine_m2",
            "added_area_eyring_m2",
            "predicted_s",
        ):
            if d[k] is not None:
                d[k] = round(d[k], 4)
        return d


@dataclass
class TreatmentPlan:
    """Every band of a plan, the areas to install, the target and the notes.

    Made by :func:`plan_bands`; the plan document is written from it.

    Attributes
    ----------
    bands : list of BandPlan
        One per octave band that both the measurement and the target have.
    installed : list of TreatmentArea
        One area per chosen material, sized at ``sizing_bands``.
    target : Target
        The target planned for.
    volume_m3, area_m2 : float
        Room volume (m³) and total surface area (m²).
    temperature_c, humidity_pct : float
        Air temperature (°C) and relative humidity (%) of the air term.
    sizing_bands : tuple of int
        Bands whose mean sets the installed areas, Hz.
    checked : str
        ``"predicted"`` with treatment, else ``"measured"``.
    mean_check : dict or None
        The source's criterion on a mean over bands, when it has one.
    notes : list of str
        Cautions, ending with :data:`DECISION_CAUTION`.

    Examples
    --------
    >>> from roomconv.analysis.targets import user_target
    >>> p = plan_bands({500: 1.61}, user_target({500: 0.805}), 100.0, 130.0)
    >>> p.checked, p.sizing_bands, p.notes[-1] == DECISION_CAUTION
    ('measured', (500,), True)
    """

    bands: list[BandPlan]
    #: One area per chosen material, sized at the sizing bands (see :func:`plan_bands`).
    installed: list[TreatmentArea]
    target: Target
    volume_m3: float
    area_m2: float
    temperature_c: float
    humidity_pct: float
    sizing_bands: tuple[int, ...]
    #: What ``within_tolerance`` judges: ``"predicted"`` with treatment, else ``"measured"``.
    checked: str
    #: The source's criterion on a mean over bands (S12.60, BB93), when it has one.
    mean_check: dict | None
    notes: list[str]


def _mean(values) -> float | None:
    vals = [v for v in values if v is not None and math.isfinite(v)]
    return float(np.mean(vals)) if vals else None


def plan_bands(
    measured_s: dict[int, float | None],
    target: Target,
    volume_m3: float,
    area_m2: float,
    treatments: list[Treatment] | tuple[Treatment, ...] = (),
    *,
    temperature_c: float = 20.0,
    humidity_pct: float = 50.0,
    measured_notes: dict[int, str] | None = None,
) -> TreatmentPlan:
    """Plan a treatment band by band.

    For each octave band that has both a measured time and a target: the equivalent
    absorption area to add by Sabine (air term cancels) and by Eyring (with the air's 4mV,
    ISO 9613-1), negative where absorption must be removed. Each chosen material gets an
    equal share of the Eyring area; per band the area of each material that its share needs
    (ΔA / n / α). One area per material is installed: sized from the mean Eyring area and
    the mean α over the sizing bands (500 Hz and 1 kHz where the target has them, else all
    its bands: mid-frequency sizing is common practice), and the decay time after treatment
    predicted by Eyring in every band and checked against the target's range.

    Parameters
    ----------
    measured_s : dict
        {band Hz: measured T in s, or None where not evaluable}.
    target : Target
        The target per octave band (:mod:`roomconv.analysis.targets`).
    volume_m3, area_m2 : float
        Room volume (m³) and total surface area (m²), checked by :func:`check_room`.
    treatments : sequence of Treatment
        Materials to install; none gives the areas alone.
    temperature_c, humidity_pct : float
        Air temperature (°C) and relative humidity (%) for ISO 9613-1.
    measured_notes : dict, optional
        {band Hz: text} carried into a band's notes (a measured value with a caution).

    Returns
    -------
    TreatmentPlan
        Every band, the installed areas and the notes.

    Raises
    ------
    roomconv.errors.InputError
        A room no room could be, a surface named twice, or no band in common.

    Notes
    -----
    The covered surface's own absorption before treatment is taken as nil, so over an
    absorbent surface somewhat more area is needed than planned.

    References
    ----------
    Sabine, W. C. (1922), Collected Papers on Acoustics; Eyring, C. F. (1930), J. Acoust.
    Soc. Am. 1, 217–241; ISO 9613-1:1993; ISO 354:2003, 8.1.2.1.

    Examples
    --------
    Halving 1.61 s in 100 m³ takes 0.161·100·(1/0.805 − 1/1.61) = 10 m² by Sabine:

    >>> from roomconv.analysis.targets import user_target
    >>> from roomconv.synth.materials import MATERIALS
    >>> curtain = Treatment("walls", MATERIALS["curtain-heavy"])
    >>> p = plan_bands({500: 1.61}, user_target({500: 0.805}), 100.0, 130.0, [curtain])
    >>> round(p.bands[0].added_area_sabine_m2, 6)
    10.0

    Sized at its only band, the installed area adds exactly Eyring's ΔA there, so the
    predicted time is the target:

    >>> round(p.installed[0].area_m2 * 0.55 - p.bands[0].added_area_eyring_m2, 9)
    0.0
    >>> round(p.bands[0].predicted_s, 9), p.bands[0].within_tolerance
    (0.805, True)
    """
    v, s = check_room(volume_m3, area_m2)
    _check_surfaces(treatments)
    bands = _common_bands(measured_s, target)
    measured_notes = measured_notes or {}
    rows: list[BandPlan] = []
    ms: dict[int, float] = {}
    for b in bands:
        ms[b] = air_m(b, temperature_c, humidity_pct)
        rows.append(
            _band_row(b, measured_s.get(b), target, v, s, ms[b], treatments, measured_notes)
        )
    sizing: tuple[int, ...] = tuple(b for b in (500, 1000) if b in bands) or tuple(bands)
    notes: list[str] = []
    installed: list[TreatmentArea] = []
    if treatments:
        installed = _size_installation(rows, treatments, sizing, s, notes)
        _predict_after_treatment(rows, installed, treatments, v, s, ms)
    checked = "predicted" if treatments else "measured"
    _judge_each_band(rows, target, bool(treatments))
    mean_check = (
        _judge_the_mean(rows, target, bool(treatments), notes) if target.mean_bands else None
    )
    notes += _closing_notes(target, bool(treatments))
    return TreatmentPlan(
        bands=rows,
        installed=installed,
        target=target,
        volume_m3=v,
        area_m2=s,
        temperature_c=temperature_c,
        humidity_pct=humidity_pct,
        sizing_bands=sizing,
        checked=checked,
        mean_check=mean_check,
        notes=notes,
    )


def _check_surfaces(treatments) -> None:
    """Refuse a surface named twice: each surface gets one material."""
    seen = set()
    for t in treatments:
        if t.surface in seen:
            raise InputError(f"treatment surface '{t.surface}' is named twice; name it once")
        seen.add(t.surface)


def _common_bands(measured_s: dict, target: Target) -> list[int]:
    """The octave bands that have both a measured time and a target, or a refusal."""
    bands = sorted(set(target.target_s) & {int(b) for b in measured_s})
    if not bands:
        raise InputError(
            "the measured bands ("
            + ", ".join(f"{b:g}" for b in sorted(measured_s))
            + " Hz) and the target's ("
            + ", ".join(f"{b:g}" for b in sorted(target.target_s))
            + " Hz) have none in common; give a target for the measured octave bands"
        )
    return bands


def _band_row(
    b: int,
    tm: float | None,
    target: Target,
    v: float,
    s: float,
    m: float,
    treatments,
    measured_notes: dict,
) -> BandPlan:
    """One band: the area to add by Sabine and Eyring and each material's share of it."""
    tt = target.target_s[b]
    row = BandPlan(b, tm, tt, target.min_s.get(b), target.max_s.get(b))
    if b in measured_notes:
        row.notes.append(measured_notes[b])
    problem = _unplannable(tm, tt, m)
    if problem is not None:
        row.notes.append(problem)
        return row
    assert tm is not None  # _unplannable refuses a missing time
    row.added_area_sabine_m2 = sabine_added_area(v, tm, tt)
    row.added_area_eyring_m2 = eyring_added_area(v, s, tm, tt, m)
    if row.added_area_eyring_m2 < 0:
        row.notes.append(
            f"the measured time is below the target: remove about "
            f"{-row.added_area_eyring_m2:.1f} m² of absorption (Eyring)"
        )
    n = len(treatments)
    for t in treatments:
        alpha = t.material.at(b)
        share = row.added_area_eyring_m2 / n
        area = None if alpha <= 0 or share < 0 else share / alpha
        row.treatment.append(TreatmentArea(t.surface, t.material.name, area))
    return row


def _unplannable(tm: float | None, tt: float, m: float) -> str | None:
    """Why a band cannot be planned (no measured time, or beyond the air's limit), or None."""
    if tm is None or not math.isfinite(tm) or tm <= 0:
        return "no measured decay time in this band: nothing to plan"
    air_limit = SABINE_CONSTANT / (4.0 * m) if m > 0 else math.inf
    if tm >= air_limit:
        return (
            f"measured {tm:.2f} s is at or above {air_limit:.1f} s, the longest the air "
            "alone allows: check the volume and the measurement"
        )
    if tt >= air_limit:
        return (
            f"target {tt:.2f} s is at or above {air_limit:.1f} s, the longest the air "
            "alone allows: not reachable"
        )
    return None


def _size_installation(
    rows: list[BandPlan], treatments, sizing: tuple[int, ...], s: float, notes: list[str]
) -> list[TreatmentArea]:
    """One area per material from the mean Eyring area and mean α at the sizing bands."""
    installed: list[TreatmentArea] = []
    need = _mean(r.added_area_eyring_m2 for r in rows if r.band_hz in sizing)
    for t in treatments:
        alpha = float(np.mean([t.material.at(b) for b in sizing]))
        if need is None:
            area = None
        elif need <= 0:
            area = 0.0
        elif alpha <= 0:
            area = None
            notes.append(
                f"{t.material.name} absorbs nothing at "
                + ", ".join(f"{b:g} Hz" for b in sizing)
                + ": it cannot reach the target"
            )
        else:
            area = need / len(treatments) / alpha
        installed.append(TreatmentArea(t.surface, t.material.name, area))
        if area is not None and t.surface_area_m2 is not None and area > t.surface_area_m2:
            notes.append(
                f"{area:.1f} m² of {t.material.name} is more than the "
                f"{t.surface_area_m2:.1f} m² of the {t.surface}: choose a more absorbent "
                "material or more surfaces"
            )
    if need is not None and need <= 0:
        notes.append(
            "the measured time is at or below the target at the sizing bands: absorption "
            "must be removed, not added; no material is installed"
        )
    total = sum(a.area_m2 or 0.0 for a in installed)
    if total > s:
        notes.append(
            f"the areas to install ({total:.1f} m²) exceed the room's surface "
            f"({s:.1f} m²): the target is out of reach with these materials"
        )
    return installed


def _predict_after_treatment(
    rows: list[BandPlan],
    installed: list[TreatmentArea],
    treatments,
    v: float,
    s: float,
    ms: dict[int, float],
) -> None:
    """Each band's decay time by Eyring once the installed areas are added."""
    for r in rows:
        if r.measured_s is None or r.added_area_eyring_m2 is None:
            continue
        a_m = eyring_mean_alpha(v, s, r.measured_s, ms[r.band_hz])
        added = sum(
            (a.area_m2 or 0.0) * t.material.at(r.band_hz)
            for a, t in zip(installed, treatments, strict=True)
        )
        r.predicted_s = eyring_time(v, s, min(a_m + added / s, 1.0), ms[r.band_hz])


def _judge_each_band(rows: list[BandPlan], target: Target, treated: bool) -> None:
    """Each band's predicted (or, untreated, measured) time against the target's range."""
    for r in rows:
        value = r.predicted_s if treated else r.measured_s
        if value is not None and r.target_s is not None and not target.mean_bands:
            r.within_tolerance = target.accepts(r.band_hz, value)


def _judge_the_mean(rows: list[BandPlan], target: Target, treated: bool, notes: list[str]) -> dict:
    """A target on the mean over bands: judged on that mean, its verdict given to each band."""
    limit = target.max_s[target.mean_bands[0]]
    by_band = {r.band_hz: r for r in rows}
    have = [b for b in target.mean_bands if b in by_band]
    meas = [by_band[b].measured_s for b in have]
    pred = [by_band[b].predicted_s for b in have]
    complete = len(have) == len(target.mean_bands)
    m_mean = _mean(meas) if complete and None not in meas else None
    p_mean = _mean(pred) if complete and treated and None not in pred else None
    judged = p_mean if treated else m_mean
    within = None if judged is None or limit is None else bool(judged <= limit)
    if judged is None:
        notes.append(
            "the mean over "
            + ", ".join(f"{b:g} Hz" for b in target.mean_bands)
            + " cannot be judged: a band is missing or not evaluable"
        )
    for r in rows:
        if r.band_hz in target.mean_bands:
            r.within_tolerance = within
    return {
        "bands_hz": list(target.mean_bands),
        "limit_s": limit,
        "measured_mean_s": None if m_mean is None else round(m_mean, 4),
        "predicted_mean_s": None if p_mean is None else round(p_mean, 4),
        "within": within,
    }


def _closing_notes(target: Target, treated: bool) -> list[str]:
    """The assumptions every plan rests on, the target's own notes and the caution."""
    notes = [
        "Sabine and Eyring assume a diffuse sound field; with the absorption on one surface "
        "(a ceiling alone) the decay is often longer than predicted"
    ]
    if treated:
        notes.append(
            "areas assume the covered surface absorbed little before; over an absorbent "
            "surface more area is needed"
        )
    notes += list(target.notes)
    notes.append(DECISION_CAUTION)
    return notes


def measured_times(doc, basis: str = "t30", what: str = "analysis document"):
    """{band Hz: mean decay time or None} and {band Hz: caution text} from an analysis
    document's average (the JSON ``analyze`` writes).

    Parameters
    ----------
    doc : dict
        The analysis document, read from its JSON.
    basis : {"t30", "t20", "edt"}
        Which decay time to take.
    what : str
        How refusals name the document (its file name).

    Returns
    -------
    times : dict
        {band Hz: mean decay time in s, or None where not evaluable}.
    notes : dict
        {band Hz: caution text} where the average carries a caution.

    Raises
    ------
    roomconv.errors.InputError
        An unknown basis, a document without per-band averages, or bands not in octaves.

    Examples
    --------
    >>> doc = {"settings": {"bands": "octave"}, "average": {"bands": [
    ...     {"band_hz": 500.0, "t30_s": {"mean": 0.62, "verdict": "ok"}},
    ...     {"band_hz": 1000.0, "t30_s": {"mean": None}}]}}
    >>> measured_times(doc)
    ({500: 0.62, 1000: None}, {})
    """
    if basis not in BASES:
        raise InputError(f"decay time '{basis}' is not one of {', '.join(BASES)}")
    try:
        kind = doc["settings"]["bands"]
        rows = doc["average"]["bands"]
        times: dict[int, float | None] = {}
        notes: dict[int, str] = {}
        for r in rows:
            stat = r[f"{basis}_s"]
            b = int(round(float(r["band_hz"])))
            mean = stat.get("mean")
            times[b] = None if mean is None or not math.isfinite(mean) else float(mean)
            if stat.get("verdict") == "caution" and times[b] is not None:
                notes[b] = (
                    f"measured {basis.upper()} carries a caution (see the analysis warnings): "
                    "the plan in this band is as uncertain as that value"
                )
    except (KeyError, TypeError, ValueError, AttributeError):
        raise InputError(
            f"{what}: not an analysis document with per-band averages; write one with "
            "the analysis and its JSON output"
        ) from None
    if kind != "octave":
        raise InputError(
            f"{what}: holds {kind} bands; the materials table is per octave, analyse with "
            "octave bands"
        )
    return times, notes
