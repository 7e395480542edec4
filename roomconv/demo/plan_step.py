"""The demo's treatment plan: Quillmere Hall as if it were used for talks, planned against
DIN 18041 group A2 (speech and presentation) with curtains and a ceiling treatment."""

from __future__ import annotations

from pathlib import Path

from ..jobs.plan import PlanResult, plan_treatment

__all__ = ["DEMO_TARGET", "DEMO_TREATMENTS", "plan_demo"]

#: The demo's scenario: the hall booked for talks, so the published speech target applies.
DEMO_TARGET = "din18041:A2"
#: Our choice for the scenario: heavy curtains on the back wall, absorbent ceiling tiles.
DEMO_TREATMENTS = ("back=curtain-heavy", "ceiling=acoustic-tile")


def plan_demo(out, room, *, force: bool = False) -> PlanResult:
    """``plan.json`` in ``out`` from the demo's ``results.json`` and the hall's geometry."""
    out = Path(out)
    return plan_treatment(
        results_path=out / "results.json",
        volume_m3=room.volume,
        area_m2=room.total_area,
        target=DEMO_TARGET,
        treatments=list(DEMO_TREATMENTS),
        temperature_c=room.temperature_c,
        humidity_pct=room.humidity_pct,
        json_path=out / "plan.json",
        force=force,
    )
