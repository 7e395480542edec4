"""The ``plan`` command: absorption to add per octave band to reach a reverberation-time
target, and the area of each chosen material."""

from __future__ import annotations

from pathlib import Path

from .. import validate
from ..analysis.targets import KNOWN_TARGETS
from ..errors import InputError
from ..jobs import plan as jobs
from .common import Command, budget, opt, out
from .display import print_table, progress_bar

__all__ = ["COMMANDS", "show_plan"]


def _fmt(x, spec: str = "{:.2f}") -> str:
    return "—" if x is None else spec.format(x)


def _range(lo, hi) -> str:
    if lo is None and hi is None:
        return "—"
    if lo is None:
        return f"≤ {hi:.2f}"
    if hi is None:
        return f"≥ {lo:.2f}"
    return f"{lo:.2f}–{hi:.2f}"


def show_plan(doc: dict) -> None:
    """The plan as a table per band, the areas to install, and the notes."""
    mats = [f"{t.split('=')[1]} m²" for t in doc["inputs"]["treatments"]]
    checked = doc["checked"]
    headers = [
        "band Hz",
        "measured s",
        "target s",
        "range s",
        "ΔA Sabine m²",
        "ΔA Eyring m²",
        *mats,
        "after s",
        f"{checked} in range",
    ]
    rows = []
    for r in doc["bands"]:
        ok = r["within_tolerance"]
        rows.append(
            [
                f"{r['band_hz']:g}",
                _fmt(r["measured_s"]),
                _fmt(r["target_s"]),
                _range(r["target_min_s"], r["target_max_s"]),
                _fmt(r["added_area_sabine_m2"], "{:+.1f}"),
                _fmt(r["added_area_eyring_m2"], "{:+.1f}"),
                *(_fmt(t["area_m2"], "{:.1f}") for t in r["treatment"]),
                _fmt(r["predicted_s"]),
                "—" if ok is None else "yes" if ok else "NO",
            ]
        )
    print_table(
        headers,
        rows,
        right=range(1, len(headers) - 1),
        title=f"Treatment plan: {doc['target']['label']}",
    )
    if doc["installed"]:
        sizing = ", ".join(f"{b:g} Hz" for b in doc["sizing_bands_hz"])
        print(f"To install (sized at {sizing}):")
        for a in doc["installed"]:
            area = "—" if a["area_m2"] is None else f"{a['area_m2']:.1f} m²"
            print(f"  {a['surface']}: {area} of {a['material']}")
    mc = doc.get("mean_check")
    if mc:
        bands = ", ".join(f"{b:g}" for b in mc["bands_hz"])
        verdict = "—" if mc["within"] is None else "meets" if mc["within"] else "does NOT meet"
        print(
            f"Mean over {bands} Hz: measured {_fmt(mc['measured_mean_s'])} s, after "
            f"{_fmt(mc['predicted_mean_s'])} s; limit {mc['limit_s']:g} s: {verdict}"
        )
    print(f"Target source: {doc['target']['source']}")
    for r in doc["bands"]:
        for n in r["notes"]:
            print(f"  ! {r['band_hz']:g} Hz: {n}")
    for n in doc["notes"]:
        print(f"note: {n}")


def _option_of(text: str, a) -> str | None:
    """The option behind a job's refusal (the job names values, not options)."""
    if (
        text.startswith("target")
        or "target '" in text
        or "DIN 18041" in text
        or "S12.60" in text
        or "[targets]" in text
    ):
        return "--study" if "[targets]" in text else "--target"
    if text.startswith("room surface area") and a.area is not None:
        return "--area"
    if text.startswith("room volume") and a.volume is not None:
        return "--volume"
    if text.startswith(("room surface area", "room volume")):
        return f"{a.study}: room"
    if text.startswith(("air temperature",)):
        return "--temperature"
    if text.startswith("relative humidity"):
        return "--humidity"
    if "give the volume and the surface area" in text:
        return "--volume/--area"
    if text.startswith("give a target"):
        return "--target"
    if "measured bands" in text and "target" in text:
        return "--target"
    if text.startswith("decay time"):
        return "--basis"
    return None


def run_plan(a):
    """Run ``roomconv plan``: the absorption to add per octave band to reach a
    reverberation-time target, and the area of each chosen material, through
    :func:`roomconv.jobs.plan.plan_treatment`, shown as a table and written as JSON when
    asked.

    Parameters
    ----------
    a : argparse.Namespace
        The parsed options of the command.

    Returns
    -------
    int
        The exit code: 0 on success (a refused input raises and exits with 2, naming the
        option).
    """
    treats = [
        budget(f"--treat '{item}'", jobs.parse_treatment, item, a.materials_file)
        for item in a.treat or []
    ]
    surfaces = [s for s, _ in treats]
    for s in set(surfaces):
        if surfaces.count(s) > 1:
            raise InputError(f"--treat: surface '{s}' is named twice; name it once")
    if a.results is not None and (a.volume is None or a.area is None):
        raise InputError("--results: give the room's --volume and --area as well")
    if a.results is not None and a.target is None:
        raise InputError(
            "--target: missing; give seconds (0.6), BAND:SECONDS items or one of "
            + ", ".join(KNOWN_TARGETS)
        )
    try:
        with progress_bar("analysing", quiet=a.quiet or a.study is None) as progress:
            res = jobs.plan_treatment(
                study_path=a.study,
                results_path=a.results,
                volume_m3=a.volume,
                area_m2=a.area,
                target=a.target,
                treatments=a.treat or [],
                tolerance_pct=a.tolerance,
                basis=a.basis,
                temperature_c=a.temperature,
                humidity_pct=a.humidity,
                materials_file=a.materials_file,
                json_path=a.json,
                force=a.force,
                progress=progress,
            )
    except InputError as exc:
        where = _option_of(str(exc), a)
        if where is None:
            raise
        raise InputError(f"{where}: {exc}") from None
    if not a.quiet:
        show_plan(res.document)
        for n in res.notes:
            print(f"note: {n}")
    for p in res.written:
        out(f"wrote {p}", a)
    return 0


def configure_plan(p):
    """Add the options of ``roomconv plan`` to its sub-parser ``p`` (an argparse parser)."""
    src = p.add_mutually_exclusive_group(required=True)
    src.add_argument(
        "--study",
        type=Path,
        metavar="STUDY.toml",
        help="a study file: its responses are analysed, its room and [targets] used",
    )
    src.add_argument(
        "--results",
        type=Path,
        metavar="RESULTS.json",
        help="an analysis document written by 'roomconv analyze --json' (octave bands)",
    )
    p.add_argument(
        "--volume",
        type=opt(validate.positive, "room volume", unit="m³"),
        metavar="M3",
        help="room volume in m³ (with --results; overrides the study's)",
    )
    p.add_argument(
        "--area",
        type=opt(validate.positive, "room surface area", unit="m²"),
        metavar="M2",
        help="total surface area in m² (with --results; overrides the study's)",
    )
    p.add_argument(
        "--target",
        metavar="TARGET",
        help="seconds for every band (0.6), BAND:SECONDS items (500:0.6,1000:0.6) or a "
        f"published target: {', '.join(KNOWN_TARGETS)} (default with --study: its [targets])",
    )
    p.add_argument(
        "--treat",
        action="append",
        metavar="SURFACE=MATERIAL",
        help="a material to install, e.g. ceiling=acoustic-tile (repeatable; surfaces: "
        "floor, ceiling, left, right, front, back, walls; materials: 'roomconv materials')",
    )
    p.add_argument(
        "--tolerance",
        type=opt(jobs.parse_tolerance),
        default=(-20.0, 20.0),
        metavar="LOWER,UPPER",
        help="accepted range of a flat or per-band target, %% of the target (default -20,20)",
    )
    p.add_argument(
        "--basis",
        choices=jobs.BASES,
        help="measured decay time to plan from (default: the study target's, else t30)",
    )
    p.add_argument(
        "--temperature",
        type=opt(validate.finite, "air temperature"),
        metavar="C",
        help="air temperature in °C for the air absorption (default: the study's, else 20)",
    )
    p.add_argument(
        "--humidity",
        type=opt(validate.finite, "relative humidity"),
        metavar="PCT",
        help="relative humidity in %% (default: the study's, else 50)",
    )
    p.add_argument(
        "--materials-file",
        type=Path,
        metavar="FILE",
        help="extra materials (JSON or TOML, as for 'synth')",
    )
    p.add_argument("--json", type=Path, metavar="OUT.json", help="write the plan as JSON")
    p.add_argument("--force", action="store_true", help="replace an existing output")


COMMANDS = [
    Command(
        "plan",
        "absorption per octave band to reach a reverberation-time target, and how much of "
        "each chosen material",
        configure_plan,
        run_plan,
    )
]
