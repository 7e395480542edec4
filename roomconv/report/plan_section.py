"""The report's treatment estimate: when the study has a reverberation-time target and its
room's volume and surface, the absorption to add per octave band to reach it."""

from __future__ import annotations

import html

from ..analysis.report import _html_table, band_label
from ..analysis.targets import user_target
from ..analysis.treatment import DECISION_CAUTION, measured_times, plan_bands
from ..errors import InputError
from . import figures as F

__all__ = ["treatment_section"]

e = html.escape


def _f(x, spec="{:.2f}") -> str:
    return "—" if x is None else spec.format(x)


def treatment_section(study, doc: dict, figure) -> str:
    """HTML for the estimate, or "" when the study has no target; ``figure(fig, alt,
    caption)`` embeds a plot as the rest of the report does."""
    t = study.targets
    if t is None:
        return ""
    room = study.room
    head = "<h3>Absorption to reach the target (estimate)</h3>"
    if room.volume is None or room.surface is None or doc["settings"]["bands"] != "octave":
        return head + (
            "<p class='note'>Not estimated: it needs the room's volume and surface in the "
            "study file and octave-band results.</p>"
        )
    try:
        measured, notes = measured_times(doc, t.basis, "the analysis")
        plan = plan_bands(
            measured,
            user_target({int(round(b)): v for b, v in t.reverberation_s.items()}, t.tolerance_pct),
            room.volume,
            room.surface,
            temperature_c=20.0 if room.temperature_c is None else room.temperature_c,
            humidity_pct=50.0 if room.humidity_pct is None else room.humidity_pct,
            measured_notes=notes,
        )
    except InputError as exc:
        return head + f"<p class='note'>Not estimated: {e(str(exc))}.</p>"
    rows = [
        [
            band_label(r.band_hz),
            _f(r.measured_s),
            _f(r.target_s),
            _f(r.added_area_sabine_m2, "{:+.1f}"),
            _f(r.added_area_eyring_m2, "{:+.1f}"),
        ]
        for r in plan.bands
    ]
    out = [head]
    out.append(
        f"<p>Equivalent absorption area to add (negative: to remove) to bring the measured "
        f"{e(t.basis.upper())} to the target, for V = {plan.volume_m3:.0f} m³ and "
        f"S = {plan.area_m2:.0f} m², by Sabine and by Eyring with air absorption "
        "(ISO 9613-1). 'roomconv plan' sizes chosen materials from these.</p>"
    )
    out.append(
        _html_table(
            ["band", f"measured {t.basis.upper()} s", "target s", "ΔA Sabine m²", "ΔA Eyring m²"],
            rows,
        )
    )
    out.append(
        figure(
            F.treatment_figure([r.as_dict() for r in plan.bands]),
            "measured decay time against the target",
            "Measured decay time per band against the target and its range.",
        )
    )
    per_band = [f"{r.band_hz:g} Hz: {n}" for r in plan.bands for n in r.notes]
    general = [n for n in plan.notes if n != DECISION_CAUTION]
    out += [f"<p class='note'>{e(n)}</p>" for n in per_band + general]
    out.append(f"<p class='note'><strong>{e(DECISION_CAUTION)}</strong></p>")
    return "".join(out)
