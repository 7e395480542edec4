"""A shoebox room with materials per surface, and its reverberation by Sabine and Eyring."""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from ..errors import InputError
from .air import power_attenuation, speed_of_sound
from .materials import OCTAVES, Material, get_material

__all__ = ["SURFACES", "Patch", "Absorber", "RoomModel", "sabine", "eyring", "max_reverberation"]

#: Surface names: x runs left→right (length), y front→back (width), z floor→ceiling (height).
SURFACES = ("left", "right", "front", "back", "floor", "ceiling")


@dataclass(frozen=True)
class Patch:
    """Part of a surface covered by another material (e.g. seating on the floor).

    Examples
    --------
    >>> Patch("floor", "carpet", 12.0).area_m2
    12.0
    """

    surface: str
    material: str
    area_m2: float


@dataclass(frozen=True)
class Absorber:
    """Absorption added to the room without covering a surface (audience blocks, hung
    panels, furniture): ``area_m2`` of ``material`` counted in A but not in S.

    Examples
    --------
    >>> Absorber("seats-upholstered-empty", 40.0).material
    'seats-upholstered-empty'
    """

    material: str
    area_m2: float


@dataclass(frozen=True)
class RoomModel:
    """A rectangular room with a material per surface, optional patches replacing part of a
    surface, and optional free-standing absorbers.

    Parameters
    ----------
    length, width, height : float
        Metres, along x, y and z.
    surfaces : dict
        {surface: material name} for the names in :data:`SURFACES`; missing ones are plaster.
    patches : tuple of Patch
    absorbers : tuple of Absorber
    temperature_c : float
        Air temperature, °C.
    humidity_pct : float
        Relative humidity, %.
    extra_materials : dict
        User materials by name (from :func:`~roomconv.synth.materials.load_materials`).

    Examples
    --------
    >>> room = RoomModel(10, 8, 4, {"floor": "carpet"})
    >>> room.volume, room.total_area
    (320.0, 304.0)
    """

    length: float
    width: float
    height: float
    surfaces: dict = field(default_factory=lambda: {s: "plaster" for s in SURFACES})
    patches: tuple = ()
    absorbers: tuple = ()
    temperature_c: float = 20.0
    humidity_pct: float = 50.0
    extra_materials: dict = field(default_factory=dict, compare=False, hash=False)

    def __post_init__(self):
        for name, v in (("length", self.length), ("width", self.width), ("height", self.height)):
            if not (np.isfinite(v) and v > 0):
                raise InputError(f"room {name} must be a positive number of metres (got {v})")
        unknown = set(self.surfaces) - set(SURFACES)
        if unknown:
            raise InputError(f"unknown surface(s) {sorted(unknown)}; use {', '.join(SURFACES)}")
        full = {s: self.surfaces.get(s, "plaster") for s in SURFACES}
        object.__setattr__(self, "surfaces", full)
        for m in full.values():
            get_material(m, self.extra_materials)
        for p in self.patches:
            if p.surface not in SURFACES:
                raise InputError(f"patch on unknown surface '{p.surface}'")
            get_material(p.material, self.extra_materials)
        for ab in self.absorbers:
            get_material(ab.material, self.extra_materials)
            if not ab.area_m2 > 0:
                raise InputError(f"absorber of {ab.material} needs a positive area")
        for s in SURFACES:
            covered = sum(p.area_m2 for p in self.patches if p.surface == s)
            if covered > self.surface_area(s) + 1e-9:
                raise InputError(
                    f"patches cover {covered:.1f} m² of the {s}, which has only "
                    f"{self.surface_area(s):.1f} m²"
                )

    @property
    def dims(self) -> np.ndarray:
        """(length, width, height), m."""
        return np.array([self.length, self.width, self.height])

    @property
    def volume(self) -> float:
        """V, m³."""
        return float(self.length * self.width * self.height)

    def surface_area(self, s: str) -> float:
        """Area of surface ``s``, m²."""
        L, W, H = self.length, self.width, self.height
        return {
            "left": W * H,
            "right": W * H,
            "front": L * H,
            "back": L * H,
            "floor": L * W,
            "ceiling": L * W,
        }[s]

    @property
    def total_area(self) -> float:
        """S, the sum of the six surfaces, m²."""
        return float(sum(self.surface_area(s) for s in SURFACES))

    def material(self, name: str) -> Material:
        """A material by name, the room's own extra materials included."""
        return get_material(name, self.extra_materials)

    def surface_alpha(self, s: str, band: float) -> float:
        """Area-weighted absorption of one surface including its patches."""
        area = self.surface_area(s)
        patches = [p for p in self.patches if p.surface == s]
        rest = area - sum(p.area_m2 for p in patches)
        a = rest * self.material(self.surfaces[s]).at(band)
        a += sum(p.area_m2 * self.material(p.material).at(band) for p in patches)
        return a / area

    def absorption_area(self, band: float) -> float:
        """A = Σ S_i·α_i (+ free-standing absorbers), m²."""
        a = sum(self.surface_area(s) * self.surface_alpha(s, band) for s in SURFACES)
        a += sum(ab.area_m2 * self.material(ab.material).at(band) for ab in self.absorbers)
        return float(a)

    def contains(self, point) -> bool:
        """True if ``point`` (x, y, z in m) lies strictly inside the room."""
        p = np.asarray(point, dtype=float)
        return p.shape == (3,) and bool(np.all(p > 0) and np.all(p < self.dims))


def sabine(room: RoomModel, *, air: bool = True, bands=OCTAVES) -> dict[float, float]:
    """T = 24·ln10·V / (c·(A + 4mV)) per band.

    References
    ----------
    Sabine, W. C. (1922). Collected Papers on Acoustics. Harvard University Press.
    Kuttruff, H. Room Acoustics (5th ed., 2009), ch. 5, for the 4mV air-absorption term.

    Parameters
    ----------
    room : RoomModel
    air : bool
        Include the air's absorption 4mV (ISO 9613-1 via
        :func:`~roomconv.synth.air.power_attenuation`).
    bands : sequence of float
        Octave bands, Hz.

    Returns
    -------
    dict
        {band_hz: T in s}; inf where nothing absorbs.

    Examples
    --------
    By hand: A = 80 m² × 0.37 (carpet) + 224 m² × 0.03 (plaster) = 36.3 m², and
    T = 24·ln10·320 / (343.2 × 36.3) = 1.42 s.

    >>> T = sabine(RoomModel(10, 8, 4, {"floor": "carpet"}), air=False)
    >>> round(T[1000], 2)
    1.42
    """
    c = speed_of_sound(room.temperature_c)
    V = room.volume
    out = {}
    for b in bands:
        m = float(power_attenuation(b, room.temperature_c, room.humidity_pct)) if air else 0.0
        denom = room.absorption_area(b) + 4 * m * V
        out[b] = float("inf") if denom <= 0 else float(24 * np.log(10) * V / (c * denom))
    return out


def eyring(room: RoomModel, *, air: bool = True, bands=OCTAVES) -> dict[float, float]:
    """T = 24·ln10·V / (c·(−S·ln(1 − ᾱ) + 4mV)) per band.

    References
    ----------
    Eyring, C. F. (1930). Reverberation time in "dead" rooms. J. Acoust. Soc. Am. 1, 217–241.
    IEC 60050-801:1994, 801-31-09 (the equation as defined there).

    Parameters
    ----------
    room : RoomModel
    air : bool
        Include the air's absorption 4mV.
    bands : sequence of float
        Octave bands, Hz.

    Returns
    -------
    dict
        {band_hz: T in s}; 0 where every surface absorbs everything.

    Examples
    --------
    >>> room = RoomModel(10, 8, 4, {"floor": "carpet"})
    >>> bool(eyring(room, air=False)[1000] < sabine(room, air=False)[1000])
    True
    """
    c = speed_of_sound(room.temperature_c)
    V, S = room.volume, room.total_area
    out = {}
    for b in bands:
        m = float(power_attenuation(b, room.temperature_c, room.humidity_pct)) if air else 0.0
        a_mean = min(room.absorption_area(b) / S, 1.0)
        term = float("inf") if a_mean >= 1.0 else -S * np.log1p(-a_mean)
        denom = term + 4 * m * V
        out[b] = (
            0.0
            if not np.isfinite(denom)
            else (float("inf") if denom <= 0 else float(24 * np.log(10) * V / (c * denom)))
        )
    return out


def max_reverberation(room: RoomModel, band: float) -> float:
    """Longest T the air alone allows in this room (no surface absorption at all):
    T = 24·ln10 / (4mc), from Sabine's formula with A = 0.

    Parameters
    ----------
    room : RoomModel
        For its temperature and humidity.
    band : float
        Octave band, Hz.

    Returns
    -------
    float
        Seconds.

    Examples
    --------
    >>> round(max_reverberation(RoomModel(10, 8, 4), 8000), 1)
    1.7
    """
    c = speed_of_sound(room.temperature_c)
    m = float(power_attenuation(band, room.temperature_c, room.humidity_pct))
    return float(24 * np.log(10) / (c * 4 * m))
