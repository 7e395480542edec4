"""The treatment-planning job: measured decay times (a study file analysed now, or an analysis
document written earlier), a target, chosen materials → a plan per octave band, as a JSON
document written through the write guard.

Messages name values, never command-line options (the front ends add theirs).
"""

from __future__ import annotations

from dataclasses import dataclass, field
from pathlib import Path

from .. import __version__, validate
from ..analysis.targets import KNOWN_TARGETS, Target, parse_target, user_target
from ..analysis.treatment import (
    BASES,
    SURFACE_NAMES,
    Treatment,
    TreatmentPlan,
    check_room,
    measured_times,
    plan_bands,
)
from ..audio import check_input_file, read_json
from ..errors import InputError
from .guard import guarded
from .progress import ProgressCallback, silent

__all__ = [
    "parse_tolerance",
    "BASES",
    "parse_treatment",
    "measured_times",
    "target_from_study",
    "plan_document",
    "plan_treatment",
    "PlanResult",
]

#: Published targets carry their own tolerance; a flat or per-band one the user's.
_NAMED = set(KNOWN_TARGETS) | {"study"}


def parse_tolerance(text: str) -> tuple[float, float]:
    """``"LOWER,UPPER"`` in % of a flat or per-band target → (lower, upper), with
    −100 < lower ≤ 0 ≤ upper.

    Examples
    --------
    >>> parse_tolerance("-10,5")
    (-10.0, 5.0)
    """
    parts = str(text).split(",")
    if len(parts) != 2:
        raise InputError(f"tolerance '{text}' must be LOWER,UPPER in % (e.g. -20,20)")
    lo = validate.finite(parts[0], "lower tolerance")
    hi = validate.finite(parts[1], "upper tolerance")
    if not (-100.0 < lo <= 0.0 <= hi):
        raise InputError(f"tolerance '{text}' must have -100 < lower ≤ 0 ≤ upper (in %)")
    return lo, hi


def parse_treatment(item: str, materials_file=None) -> tuple[str, str]:
    """``SURFACE=MATERIAL`` → (surface, material name), both checked.

    Examples
    --------
    >>> parse_treatment("ceiling=acoustic-tile")
    ('ceiling', 'acoustic-tile')
    """
    from ..synth.materials import get_material, load_materials

    surf, sep, mat = str(item).partition("=")
    surf, mat = surf.strip().lower(), mat.strip()
    if not sep or not surf or not mat:
        raise InputError(
            f"treatment '{item}' must look like SURFACE=MATERIAL (e.g. ceiling=acoustic-tile)"
        )
    if surf not in SURFACE_NAMES:
        raise InputError(f"treatment surface '{surf}' is unknown; use {', '.join(SURFACE_NAMES)}")
    extra = load_materials(materials_file) if materials_file is not None else None
    get_material(mat, extra)
    return surf, mat


def target_from_study(targets) -> Target:
    """The study file's ``[targets]`` table as a :class:`Target`."""
    bands = {int(round(b)): v for b, v in targets.reverberation_s.items()}
    lo, hi = targets.tolerance_pct
    return user_target(
        bands,
        targets.tolerance_pct,
        name="study",
        label=f"study target ({targets.basis.upper()}), tolerance {lo:+g} %/{hi:+g} %",
        source=targets.source or "the study file",
    )


def _surface_area(dimensions, surface: str) -> float | None:
    if dimensions is None:
        return None
    L, W, H = dimensions
    walls = {"left": W * H, "right": W * H, "front": L * H, "back": L * H}
    return {
        **walls,
        "floor": L * W,
        "ceiling": L * W,
        "walls": sum(walls.values()),
    }[surface]


def plan_document(plan: TreatmentPlan, inputs: dict) -> dict:
    """The plan as the JSON document: ``bands``, ``installed``, ``target``, ``inputs``,
    ``notes``."""
    t = plan.target
    return {
        "bands": [r.as_dict() for r in plan.bands],
        "installed": [a.__dict__.copy() for a in plan.installed],
        "sizing_bands_hz": list(plan.sizing_bands),
        "checked": plan.checked,
        "mean_check": plan.mean_check,
        "target": {
            "name": t.name,
            "label": t.label,
            "source": t.source,
            "mean_bands_hz": list(t.mean_bands),
        },
        "inputs": {
            **inputs,
            "volume_m3": plan.volume_m3,
            "area_m2": plan.area_m2,
            "temperature_c": plan.temperature_c,
            "humidity_pct": plan.humidity_pct,
        },
        "method": "Sabine: ΔA = 0.161·V·(1/T_target − 1/T_measured); Eyring with the air "
        "term 4mV (ISO 9613-1) at the exact mid-band frequency; one area per material sized "
        "at the sizing bands, T after treatment by Eyring",
        "notes": plan.notes,
        "roomconv_version": __version__,
    }


@dataclass
class PlanResult:
    """A plan, its JSON document, and the file written (if any)."""

    plan: TreatmentPlan
    document: dict
    written: list[Path] = field(default_factory=list)
    notes: list[str] = field(default_factory=list)


def plan_treatment(
    *,
    study_path=None,
    results_path=None,
    results_document: dict | None = None,
    volume_m3: float | None = None,
    area_m2: float | None = None,
    target: str | Target | None = None,
    treatments: list[str] | tuple[str, ...] = (),
    tolerance_pct: tuple[float, float] = (-20.0, 20.0),
    basis: str | None = None,
    temperature_c: float | None = None,
    humidity_pct: float | None = None,
    materials_file=None,
    json_path=None,
    force: bool = False,
    progress: ProgressCallback = silent,
) -> PlanResult:
    """Plan a treatment from a study file (analysed now) or an analysis document.

    Parameters
    ----------
    study_path : path-like, optional
        A study file; its room gives volume, area, dimensions, temperature and humidity,
        and its ``[targets]`` the target unless ``target`` is given.
    results_path : path-like, optional
        An analysis document (``analyze --json``); then ``volume_m3`` and ``area_m2`` are
        needed. Exactly one of the sources.
    results_document : dict, optional
        An analysis document already in memory (e.g. ``analyze_study(...).study.document``)
        instead of ``results_path``; the same needs.
    volume_m3, area_m2 : float, optional
        Override the study's room.
    target : str or Target, optional
        A flat time, ``BAND:SECONDS`` items or a published target by name
        (:data:`roomconv.analysis.targets.KNOWN_TARGETS`).
    treatments : sequence of str
        ``SURFACE=MATERIAL`` items.
    tolerance_pct : (float, float)
        Accepted range of a flat or per-band target, % of the target.
    basis : {"t30", "t20", "edt"}, optional
        The measured decay time planned from (the study target's basis, else T30).
    temperature_c, humidity_pct : float, optional
        Air for ISO 9613-1 (the study's room, else 20 °C and 50 %).
    materials_file : path-like, optional
        Extra materials (JSON or TOML, as for synthesis).
    json_path : path-like, optional
        Where to write the plan; planned through the guard before any work.
    force : bool
        Replace an existing output (never an input).
    """
    given = [x for x in (study_path, results_path, results_document) if x is not None]
    if len(given) != 1:
        raise InputError("give either a study file or an analysis document, not both or neither")
    if results_document is not None and not isinstance(results_document, dict):
        raise InputError("the analysis document must be a mapping (an analysis result)")
    src = Path(
        study_path if study_path is not None else results_path or "analysis document in memory"
    )
    in_memory = results_document is not None
    inputs_files = ([] if in_memory else [src]) + (
        [Path(materials_file)] if materials_file is not None else []
    )
    if not in_memory:
        check_input_file(src, "study file" if study_path is not None else "analysis document")
    if materials_file is not None:
        check_input_file(materials_file, "materials file")
    with guarded(inputs_files, force=force) as g:
        if json_path is not None:
            g.file(json_path)
        dims = None
        run_notes: list[str] = []
        study = None
        if study_path is not None:
            from ..study import load_study

            study = load_study(study_path)
            room = study.room
            dims = room.dimensions_m
            if volume_m3 is None:
                volume_m3 = room.volume
                if volume_m3 is None:
                    raise InputError(
                        f"{src}: room.volume_m3 (or room.dimensions_m) is missing; add it or "
                        "give the volume"
                    )
            if area_m2 is None:
                area_m2 = room.surface
                if area_m2 is None:
                    raise InputError(
                        f"{src}: room.surface_m2 (or room.dimensions_m) is missing; add it or "
                        "give the surface area"
                    )
            if temperature_c is None:
                temperature_c = room.temperature_c
            if humidity_pct is None:
                humidity_pct = room.humidity_pct
            if target is None and study.targets is None:
                raise InputError(f"{src}: has no [targets] table; add one or give a target")
            if basis is None and study.targets is not None and target is None:
                basis = study.targets.basis
        else:
            if volume_m3 is None or area_m2 is None:
                raise InputError(
                    "an analysis document does not hold the room: give the volume and the "
                    "surface area"
                )
            if target is None:
                raise InputError("give a target (seconds, BAND:SECONDS items or a name)")
        temperature_c = 20.0 if temperature_c is None else temperature_c
        humidity_pct = 50.0 if humidity_pct is None else humidity_pct
        validate.in_range(temperature_c, "air temperature", -20.0, 50.0, unit="°C")
        validate.in_range(humidity_pct, "relative humidity", 0.0, 100.0, unit="%", lo_open=True)
        v, s = check_room(volume_m3, area_m2)
        basis = basis or "t30"
        if isinstance(target, Target):
            tgt = target
        elif target is not None:
            tgt = parse_target(target, v, tolerance_pct)
        else:
            assert study is not None and study.targets is not None
            tgt = target_from_study(study.targets)
        from ..synth.materials import get_material, load_materials

        extra = load_materials(materials_file) if materials_file is not None else None
        chosen = []
        for item in treatments:
            surf, mat = parse_treatment(item, materials_file)
            chosen.append(Treatment(surf, get_material(mat, extra), _surface_area(dims, surf)))
        # Every check on the plain values is done: only now the (slow) analysis.
        if study is not None:
            from ..report import analyse_study

            progress("analyse", 0.0, None)
            res = analyse_study(study)
            doc = res.analysis.document
            progress("analyse", 1.0, None)
            measured, mnotes = measured_times(doc, basis, str(src))
            run_notes += [f"not analysed: {e}" for e in doc.get("errors", [])]
        else:
            source = results_document if in_memory else read_json(src, what="analysis document")
            measured, mnotes = measured_times(source, basis, str(src))
        plan = plan_bands(
            measured,
            tgt,
            v,
            s,
            chosen,
            temperature_c=float(temperature_c),
            humidity_pct=float(humidity_pct),
            measured_notes=mnotes,
        )
        inputs = {
            "study": None if study_path is None else str(study_path),
            "results": "analysis document in memory"
            if in_memory
            else (None if results_path is None else str(results_path)),
            "basis": basis,
            "treatments": [f"{t.surface}={t.material.name}" for t in chosen],
            "tolerance_pct": list(tolerance_pct) if tgt.name not in _NAMED else None,
        }
        document = plan_document(plan, inputs)
        written = []
        if json_path is not None:
            written.append(g.write_json(json_path, document))
    return PlanResult(plan, document, written, run_notes)
