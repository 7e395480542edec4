"""Absorption coefficients of common surfaces per octave band (63 Hz–8 kHz).

Sources: the 125 Hz–4 kHz values are typical handbook coefficients as tabulated in
Everest & Pohlmann, *Master Handbook of Acoustics* (appendix table, "Absorption
coefficients of general building materials and furnishings") and the compiled table
"Absorption Coefficients α of Building Materials and Finishes" (sengpielaudio.com), which
agree for the rows used here. Tables of this kind stop at 125 Hz and 4 kHz: the 63 Hz and
8 kHz columns copy the neighbouring band (our extrapolation, marked ``extrapolated``).
Users can add their own in a JSON or TOML file (see :func:`load_materials`).
"""

from __future__ import annotations

import json
import tomllib
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from ..errors import InputError, describe

__all__ = ["OCTAVES", "Material", "MATERIALS", "check_material", "load_materials", "get_material"]

#: Octave bands of the absorption tables, nominal mid-band frequencies in Hz (IEC 61260-1).
OCTAVES = (63, 125, 250, 500, 1000, 2000, 4000, 8000)
#: The fields a row of a materials file may hold ('materials --json' writes all four).
_ROW_KEYS = frozenset({"alpha", "bands_hz", "source", "note"})

_HB = "Master Handbook of Acoustics / sengpielaudio absorption table"


@dataclass(frozen=True)
class Material:
    """A surface material: random-incidence absorption coefficient per octave band.

    Attributes
    ----------
    name : str
    alpha : tuple of float
        One value in [0, 1] per band of :data:`OCTAVES`.
    source : str
        Where the values come from.
    note : str
        Anything a user should know (e.g. extrapolated bands).

    Examples
    --------
    >>> MATERIALS["carpet"].at(1000)
    0.37
    """

    name: str
    alpha: tuple[float, ...]  #: one value per band in OCTAVES
    source: str
    note: str = ""

    def at(self, band_hz: float) -> float:
        """α in the octave band ``band_hz`` (one of :data:`OCTAVES`)."""
        return self.alpha[OCTAVES.index(int(band_hz))]


def _six(name, values, source=_HB, note="63 Hz and 8 kHz extrapolated from 125 Hz / 4 kHz"):
    a = tuple(float(v) for v in values)
    return Material(name, (a[0],) + a + (a[-1],), source, note)


MATERIALS: dict[str, Material] = {
    m.name: m
    for m in [
        _six("concrete", (0.01, 0.01, 0.015, 0.02, 0.02, 0.02)),
        _six("brick", (0.03, 0.03, 0.03, 0.04, 0.05, 0.07)),
        _six("brick-painted", (0.01, 0.01, 0.02, 0.02, 0.02, 0.03)),
        _six("concrete-block-painted", (0.10, 0.05, 0.06, 0.07, 0.09, 0.08)),
        _six("plaster", (0.013, 0.015, 0.02, 0.03, 0.04, 0.05)),
        _six("plaster-on-lath", (0.14, 0.10, 0.06, 0.05, 0.04, 0.03)),
        _six("gypsum-board", (0.29, 0.10, 0.05, 0.04, 0.07, 0.09)),
        _six("glass-heavy", (0.18, 0.06, 0.04, 0.03, 0.02, 0.02)),
        _six("glass-window", (0.35, 0.25, 0.18, 0.12, 0.07, 0.04)),
        _six("wood-floor", (0.15, 0.11, 0.10, 0.07, 0.06, 0.07)),
        _six("wood-panel", (0.28, 0.22, 0.17, 0.09, 0.10, 0.11)),
        _six("parquet", (0.04, 0.04, 0.07, 0.06, 0.06, 0.07)),
        _six("linoleum", (0.02, 0.03, 0.03, 0.03, 0.03, 0.02)),
        _six("carpet", (0.02, 0.06, 0.14, 0.37, 0.60, 0.65)),
        _six("carpet-on-foam", (0.08, 0.24, 0.57, 0.69, 0.71, 0.73)),
        _six("curtain-light", (0.03, 0.04, 0.11, 0.17, 0.24, 0.35)),
        _six("curtain-heavy", (0.14, 0.35, 0.55, 0.72, 0.70, 0.65)),
        _six("acoustic-tile", (0.09, 0.28, 0.78, 0.84, 0.73, 0.64)),
        _six("seats-upholstered-empty", (0.49, 0.66, 0.80, 0.88, 0.82, 0.70)),
        _six("seats-upholstered-occupied", (0.60, 0.74, 0.88, 0.96, 0.93, 0.85)),
        _six("marble", (0.01, 0.01, 0.01, 0.01, 0.02, 0.02)),
        _six("wood-door", (0.10, 0.07, 0.05, 0.04, 0.04, 0.04)),
        Material("anechoic", (1.0,) * 8, "ideal absorber (definition)"),
        Material("rigid", (0.0,) * 8, "ideal reflector (definition)"),
    ]
}


def check_material(m: Material) -> Material:
    """Return ``m`` if it has one α in [0, 1] per octave band; raise :class:`InputError` else.

    Examples
    --------
    >>> check_material(Material("x", (0.5,) * 8, "test")).name
    'x'
    """
    if len(m.alpha) != len(OCTAVES):
        raise InputError(
            f"material '{m.name}' needs {len(OCTAVES)} absorption values "
            f"({', '.join(map(str, OCTAVES))} Hz), got {len(m.alpha)}"
        )
    for f, a in zip(OCTAVES, m.alpha, strict=True):
        if not (0.0 <= a <= 1.0) or not np.isfinite(a):
            raise InputError(f"material '{m.name}': absorption {a} at {f} Hz is outside 0..1")
    return m


def load_materials(path) -> dict[str, Material]:
    """Read user materials: ``{"name": {"alpha": [8 values], "source": "..."}}`` in JSON or
    TOML (``[name]`` tables with the same keys). Six values (125 Hz–4 kHz) are extended.

    Parameters
    ----------
    path : str or path-like
        A ``.json`` or ``.toml`` file.

    Returns
    -------
    dict of str to Material

    Examples
    --------
    >>> import json, pathlib, tempfile
    >>> p = pathlib.Path(tempfile.mkdtemp()) / "m.json"
    >>> _ = p.write_text(json.dumps({"felt": {"alpha": [0.1, 0.2, 0.4, 0.6, 0.7, 0.7]}}))
    >>> load_materials(p)["felt"].alpha
    (0.1, 0.1, 0.2, 0.4, 0.6, 0.7, 0.7, 0.7)
    """
    p = Path(path)
    if not p.exists():
        raise InputError(describe(p, "materials file not found"))
    if not p.is_file():
        raise InputError(describe(p, "is not a file", "give a JSON or TOML materials file"))
    try:
        text = p.read_text(encoding="utf-8")
        data = tomllib.loads(text) if p.suffix.lower() == ".toml" else json.loads(text)
    except (json.JSONDecodeError, tomllib.TOMLDecodeError, UnicodeDecodeError) as exc:
        raise InputError(describe(p, f"cannot be parsed: {exc}")) from None
    except OSError as exc:
        raise InputError(describe(p, f"cannot be read: {exc.strerror or exc}")) from None
    if not isinstance(data, dict):
        raise InputError(
            describe(
                p,
                f"holds a {type(data).__name__}, not a table of materials",
                'expected {"name": {"alpha": [...], "source": "..."}}',
            )
        )
    out = {}
    for name, row in data.items():
        # A name is given back as SURFACE=MATERIAL, so it must be non-empty and free of '='.
        if not name.strip() or "=" in name or name != name.strip():
            raise InputError(
                describe(p, f"material name {name!r} is not usable", "give a name without '='")
            )
        if not isinstance(row, dict) or "alpha" not in row:
            raise InputError(describe(p, f"material '{name}' needs an 'alpha' list"))
        unknown = sorted(set(row) - _ROW_KEYS)
        if unknown:
            raise InputError(
                describe(
                    p,
                    f"material '{name}': unknown field '{unknown[0]}'",
                    f"use {', '.join(sorted(_ROW_KEYS))}",
                )
            )
        alpha = row["alpha"]
        if not isinstance(alpha, list):
            raise InputError(
                describe(
                    p,
                    f"material '{name}': field 'alpha' must be a list of "
                    f"6 or {len(OCTAVES)} numbers, not {alpha!r}",
                )
            )
        bad = [v for v in alpha if isinstance(v, bool) or not isinstance(v, (int, float))]
        if bad:
            raise InputError(
                describe(
                    p, f"material '{name}': field 'alpha' holds {bad[0]!r}, which is not a number"
                )
            )
        vals = [float(v) for v in alpha]
        if len(vals) not in (6, len(OCTAVES)):
            raise InputError(
                describe(
                    p,
                    f"material '{name}': field 'alpha' needs 6 (125 Hz-"
                    f"4 kHz) or {len(OCTAVES)} (63 Hz-8 kHz) values, got "
                    f"{len(vals)}",
                )
            )
        # Values are read in the fixed octave order; a file written for other bands would
        # be silently misread, so its own band list (as 'materials --json' writes it) must match.
        bands = row.get("bands_hz")
        want = list(OCTAVES) if len(vals) == len(OCTAVES) else list(OCTAVES[1:-1])
        if bands is not None and bands != want:
            raise InputError(
                describe(
                    p,
                    f"material '{name}': bands_hz {bands!r} are not the octaves "
                    f"{', '.join(map(str, want))} Hz its {len(vals)} values stand for",
                    "give the values in those bands or leave bands_hz out",
                )
            )
        src = str(row.get("source", f"user file {p.name}"))
        m = _six(name, vals, src) if len(vals) == 6 else Material(name, tuple(vals), src)
        try:
            out[name] = check_material(m)
        except InputError as exc:
            raise InputError(describe(p, f"field 'alpha': {exc}")) from None
    return out


def get_material(name: str, extra: dict[str, Material] | None = None) -> Material:
    """The material called ``name`` from the built-in table or ``extra`` (which wins).

    Examples
    --------
    >>> get_material("plaster").source.startswith("Master Handbook")
    True
    """
    table = {**MATERIALS, **(extra or {})}
    if name not in table:
        raise InputError(f"unknown material '{name}' (see 'roomconv materials' for the list)")
    return table[name]
