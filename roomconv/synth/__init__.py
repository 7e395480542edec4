"""Synthetic room responses: air absorption, reverberation prediction, image sources, tails,
and editing of existing responses."""

from .air import air_attenuation, power_attenuation, speed_of_sound
from .generate import Receivers, SynthResult, synthesize
from .image_source import ImageSet, band_weights, image_sources, render_images
from .materials import MATERIALS, OCTAVES, Material, get_material, load_materials
from .room import SURFACES, Absorber, Patch, RoomModel, eyring, max_reverberation, sabine
from .tail import band_noise, diffuse_tail

__all__ = [
    "air_attenuation",
    "power_attenuation",
    "speed_of_sound",
    "Receivers",
    "SynthResult",
    "synthesize",
    "ImageSet",
    "band_weights",
    "image_sources",
    "render_images",
    "MATERIALS",
    "OCTAVES",
    "Material",
    "get_material",
    "load_materials",
    "SURFACES",
    "Absorber",
    "Patch",
    "RoomModel",
    "eyring",
    "max_reverberation",
    "sabine",
    "band_noise",
    "diffuse_tail",
]
