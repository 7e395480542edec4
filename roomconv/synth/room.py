"""A shoebox room with materials per surface, and its reverberation by Sabine and Eyring."""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from ..errors import InputError
from .air import power_attenuation, speed_of_sound
from .materials import OCTAVES, Material, get_material

#: Surface names: x runs left→right (length), y front→back (width), z floor→ceiling (height).
SURFACES = ("left", "right", "front", "back", "floor", "ceiling")


@dataclass(frozen=True)
class Patch:
    """Part of a surface covered by another material (e.g. seating on the floor)."""

    surface: str
    material: str
    area_m2: float


@dataclass(frozen=True)
class Absorber:
    """Absorption added to the room without covering a surface (audience blocks, hung
    panels, furniture): ``area_m2`` of ``material`` counted in A but not in S."""

    material: str
    area_m2: float


@dataclass(frozen=True)
class RoomModel:
    """A rectangular room (metres) with a material per surface, optional patches replacing
    part of a surface, and optional free-standing absorbers."""

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
        for s, m in full.items():
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
                raise InputError(f"patches cover {covered:.1f} m² of the {s}, which has only "
                                 f"{self.surface_area(s):.1f} m²")

    @property
    def dims(self) -> np.ndarray:
        return np.array([self.length, self.width, self.height])

    @property
    def volume(self) -> float:
        return float(self.length * self.width * self.height)

    def surface_area(self, s: str) -> float:
        L, W, H = self.length, self.width, self.height
        return {"left": W * H, "right": W * H, "front": L * H, "back": L * H,
                "floor": L * W, "ceiling": L * W}[s]

    @property
    def total_area(self) -> float:
        return float(sum(self.surface_area(s) for s in SURFACES))

    def material(self, name: str) -> Material:
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
        p = np.asarray(point, dtype=float)
        return p.shape == (3,) and bool(np.all(p > 0) and np.all(p < self.dims))


def sabine(room: RoomModel, *, air: bool = True, bands=OCTAVES) -> dict[float, float]:
    """T = 24·ln10·V / (c·(A + 4mV)) per band.

    References
    ----------
    Sabine, W. C. (1922). Collected Papers on Acoustics. Harvard University Press.
    Kuttruff, H. Room Acoustics (5th ed., 2009), ch. 5, for the 4mV air-absorption term.
    """
    c = speed_of_sound(room.temperature_c)
    V = room.volume
    out = {}
    for b in bands:
        m = float(power_attenuation(b, room.temperature_c, room.humidity_pct)) if air else 0.0
        denom = room.absorption_area(b) + 4 * m * V
        out[b] = float("inf") if denom <= 0 else 24 * np.log(10) * V / (c * denom)
    return out


def eyring(room: RoomModel, *, air: bool = True, bands=OCTAVES) -> dict[float, float]:
    """T = 24·ln10·V / (c·(−S·ln(1 − ᾱ) + 4mV)) per band.

    References
    ----------
    Eyring, C. F. (1930). Reverberation time in "dead" rooms. J. Acoust. Soc. Am. 1, 217–241.
    IEC 60050-801:1994, 801-31-09 (the equation as defined there).
    """
    c = speed_of_sound(room.temperature_c)
    V, S = room.volume, room.total_area
    out = {}
    for b in bands:
        m = float(power_attenuation(b, room.temperature_c, room.humidity_pct)) if air else 0.0
        a_mean = min(room.absorption_area(b) / S, 1.0)
        term = float("inf") if a_mean >= 1.0 else -S * np.log1p(-a_mean)
        denom = term + 4 * m * V
        out[b] = 0.0 if not np.isfinite(denom) else (
            float("inf") if denom <= 0 else 24 * np.log(10) * V / (c * denom))
    return out


def max_reverberation(room: RoomModel, band: float) -> float:
    """Longest T the air alone allows in this room (no surface absorption at all)."""
    c = speed_of_sound(room.temperature_c)
    m = float(power_attenuation(band, room.temperature_c, room.humidity_pct))
    return 24 * np.log(10) / (c * 4 * m)
