"""The report's plots (matplotlib, no pyplot state): decay times against targets, energy
ratios, energy–time and decay curves with their fits, frequency responses, a plan view."""

from __future__ import annotations

import base64
import io

import numpy as np

from ..analysis.curves import decay_line, energy_time_curve, smoothed_magnitude_db
from ..analysis.report import band_label

#: The report's colours. Averages in deep teal, single positions in slate, targets in sand,
#: flagged values in burnt orange (the same warning role as the terminal workbench's).
INK = "#1d2b36"
AVERAGE = "#0f6e74"
POSITION = "#8a97a3"
TARGET = "#e9d8a6"
TARGET_EDGE = "#b08a2e"
FLAG = "#c2571a"
#: One mark per band, in band order: the marks of the terminal workbench's decay plot.
BAND_MARKS = "123456789abcdefghij"
#: One colour per position, cycled.
POSITION_COLOURS = (
    "#0f6e74",
    "#7a4e9c",
    "#b5651d",
    "#2f7d32",
    "#9c2f4e",
    "#36597a",
    "#6b6b20",
    "#a0522d",
)


def png_uri(fig, dpi: int = 110) -> str:
    """The figure as a PNG data URI (the page makes no external requests).

    Examples
    --------
    >>> from matplotlib.figure import Figure
    >>> png_uri(Figure(figsize=(1, 1)))[:22]
    'data:image/png;base64,'
    """
    buf = io.BytesIO()
    fig.savefig(buf, format="png", dpi=dpi, bbox_inches="tight", facecolor="white")
    return "data:image/png;base64," + base64.b64encode(buf.getvalue()).decode("ascii")


def _figure(w: float, h: float, ncols: int = 1):
    from matplotlib.figure import Figure  # lazy: only reports need matplotlib

    fig = Figure(figsize=(w, h))
    axes = [fig.add_subplot(1, ncols, i + 1) for i in range(ncols)]
    for ax in axes:
        ax.grid(alpha=0.3, color=POSITION)
        for s in ("top", "right"):
            ax.spines[s].set_visible(False)
    return fig, axes


def _band_axis(ax, bands):
    ax.set_xscale("log")
    ax.set_xticks(bands)
    ax.set_xticklabels([band_label(b) for b in bands], fontsize=7)
    ax.minorticks_off()
    ax.set_xlabel("band (Hz)")


def _flagged(stat: dict) -> bool:
    return stat.get("verdict") == "caution"


def decay_time_figure(doc: dict, metric: str, targets=None):
    """Per-band average of a decay time with its uncertainty (ISO 3382-2 for T20/T30, the
    positions' standard deviation for EDT), each position's value, and the target band.

    Examples
    --------
    >>> import tempfile, pathlib, numpy as np, soundfile
    >>> from roomconv.study import parse_study, template_text
    >>> tmp = tempfile.TemporaryDirectory()
    >>> d = pathlib.Path(tmp.name)
    >>> rate, T = 8000, 0.5
    >>> t = np.arange(2 * rate) / rate
    >>> for i in (1, 2):
    ...     h = np.random.default_rng(i).standard_normal(t.size) * 10 ** (-3 * t / T)
    ...     soundfile.write(d / f"S1R{i}.wav", 0.5 * h, rate, subtype="DOUBLE")
    >>> study = parse_study(template_text("Hall B"), d / "study.toml")
    >>> from roomconv.report.inputs import analyse_study
    >>> res = analyse_study(study)
    >>> doc = res.analysis.document
    >>> type(decay_time_figure(doc, "t30_s")).__name__
    'Figure'
    >>> tmp.cleanup()
    """
    fig, (ax,) = _figure(7.5, 3.4)
    avg = doc["average"]["bands"]
    bands = [r["band_hz"] for r in avg]
    if targets is not None and targets.reverberation_s:
        tb = sorted(targets.reverberation_s)
        tv = np.array([targets.reverberation_s[b] for b in tb])
        lo, hi = targets.tolerance_pct
        ax.fill_between(
            tb,
            tv * (1 + lo / 100),
            tv * (1 + hi / 100),
            color=TARGET,
            label=f"target {lo:+g} %/{hi:+g} %",
            zorder=0,
        )
        ax.plot(tb, tv, "--", color=TARGET_EDGE, lw=1, label="target")
    for p in doc["positions"]:
        pts = [(r["band_hz"], r[metric]) for r in p["bands"] if r.get(metric) is not None]
        if pts:
            ax.plot(*zip(*pts, strict=True), "o", ms=3, color=POSITION, alpha=0.6)
    rows = [r for r in avg if r[metric]["mean"] is not None]
    if rows:
        x = np.array([r["band_hz"] for r in rows])
        y = np.array([r[metric]["mean"] for r in rows])
        e = np.array([r[metric].get("uncertainty") or r[metric]["std"] or 0.0 for r in rows])
        ax.errorbar(
            x,
            y,
            yerr=e,
            fmt="-",
            color=AVERAGE,
            capsize=3,
            lw=1.5,
            label="average ± uncertainty" if metric != "edt_s" else "average ± std",
        )
        ok = np.array([not _flagged(r[metric]) for r in rows])
        ax.plot(x[ok], y[ok], "o", color=AVERAGE, ms=5)
        if (~ok).any():
            ax.plot(
                x[~ok],
                y[~ok],
                "o",
                mfc="white",
                mec=FLAG,
                mew=1.8,
                ms=7,
                label="caution (see warnings)",
            )
    _band_axis(ax, bands)
    ax.set_ylabel(f"{metric.split('_')[0].upper()} (s)")
    ax.set_ylim(bottom=0)
    if ax.get_legend_handles_labels()[0]:
        ax.legend(fontsize=7, loc="upper right")
    return fig


def ratio_figure(doc: dict):
    """C80 and D50 per band: average ± positions' standard deviation, and each position.

    Examples
    --------
    >>> import tempfile, pathlib, numpy as np, soundfile
    >>> from roomconv.study import parse_study, template_text
    >>> tmp = tempfile.TemporaryDirectory()
    >>> d = pathlib.Path(tmp.name)
    >>> rate, T = 8000, 0.5
    >>> t = np.arange(2 * rate) / rate
    >>> for i in (1, 2):
    ...     h = np.random.default_rng(i).standard_normal(t.size) * 10 ** (-3 * t / T)
    ...     soundfile.write(d / f"S1R{i}.wav", 0.5 * h, rate, subtype="DOUBLE")
    >>> study = parse_study(template_text("Hall B"), d / "study.toml")
    >>> from roomconv.report.inputs import analyse_study
    >>> res = analyse_study(study)
    >>> doc = res.analysis.document
    >>> type(ratio_figure(doc)).__name__
    'Figure'
    >>> tmp.cleanup()
    """
    fig, axes = _figure(7.5, 3.0, ncols=2)
    avg = doc["average"]["bands"]
    bands = [r["band_hz"] for r in avg]
    for ax, metric, label in ((axes[0], "c80_db", "C80 (dB)"), (axes[1], "d50", "D50")):
        for p in doc["positions"]:
            pts = [(r["band_hz"], r[metric]) for r in p["bands"] if r.get(metric) is not None]
            if pts:
                ax.plot(*zip(*pts, strict=True), "o", ms=3, color=POSITION, alpha=0.6)
        rows = [r for r in avg if r[metric]["mean"] is not None]
        if rows:
            x = np.array([r["band_hz"] for r in rows])
            y = np.array([r[metric]["mean"] for r in rows])
            ax.errorbar(
                x,
                y,
                yerr=[r[metric]["std"] or 0.0 for r in rows],
                fmt="-o",
                ms=4,
                color=AVERAGE,
                capsize=3,
            )
            bad = np.array([_flagged(r[metric]) for r in rows])
            if bad.any():
                ax.plot(x[bad], y[bad], "o", mfc="white", mec=FLAG, mew=1.8, ms=7)
        _band_axis(ax, bands)
        ax.set_ylabel(label)
    return fig


def position_figure(h: np.ndarray, rate: int, band_results, title: str):
    """Left: the energy–time curve; right: the band decay curves with their T30 line fits.

    Examples
    --------
    >>> from roomconv.analysis.parameters import room_parameters
    >>> rate, T = 8000, 0.5
    >>> t = np.arange(2 * rate) / rate
    >>> h = np.random.default_rng(0).standard_normal(t.size) * 10 ** (-3 * t / T)
    >>> bands, _, _ = room_parameters(h, rate)
    >>> len(position_figure(h, rate, bands, "S1-R1").axes)
    2
    """
    fig, (a1, a2) = _figure(7.5, 2.9, ncols=2)
    etc = energy_time_curve(h, rate)
    t_ms = etc.t_s * 1000
    a1.plot(t_ms, etc.peak_db, lw=0.5, color=POSITION)
    # The moving energy average makes the decay's slope readable over the raw curve.
    a1.plot(t_ms, etc.smooth_db, lw=1.0, color=AVERAGE)
    a1.set_ylim(-90, 3)
    a1.set_xlim(0, t_ms[-1] if t_ms.size else 1)
    a1.set_xlabel("time (ms)")
    a1.set_ylabel("energy (dB re peak)")
    a1.set_title(f"Energy–time curve, {title}", fontsize=8)
    shown = [
        (i, r)
        for i, r in enumerate(band_results)
        if r.curve_db is not None and r.band_hz is not None and 125 <= r.band_hz <= 4000
    ]
    for n, (i, r) in enumerate(shown):
        colour = POSITION_COLOURS[n % len(POSITION_COLOURS)]
        t = np.arange(r.curve_db.size) / rate
        mark = f"${BAND_MARKS[i % len(BAND_MARKS)]}$"
        a2.plot(
            t,
            r.curve_db,
            lw=1.0,
            color=colour,
            marker=mark,
            markevery=max(1, t.size // 4),
            ms=7,
            label=band_label(r.band_hz),
        )
        line = decay_line(r.curve_db, rate, -5.0, -35.0) if r.t30_s is not None else None
        if line is not None:
            a2.plot(line.t_s, line.level_db, ":", color=colour, lw=1)
    a2.set_ylim(-60, 2)
    a2.set_xlim(left=0)
    a2.set_xlabel("time after onset (s)")
    a2.set_ylabel("decay (dB)")
    a2.set_title("Decay curves with T30 fits (dotted)", fontsize=8)
    if shown:
        a2.legend(fontsize=6, ncol=2, loc="upper right")
    return fig


def frequency_response_figure(irs: dict):
    """Each position's magnitude response, 1/6-octave smoothed, relative to the loudest.

    Examples
    --------
    >>> h = np.zeros(4096)
    >>> h[0] = 1.0
    >>> type(frequency_response_figure({"S1-R1": (h, 8000)})).__name__
    'Figure'
    """
    fig, (ax,) = _figure(7.5, 3.0)
    curves = {k: smoothed_magnitude_db(h, rate, fraction=6) for k, (h, rate) in irs.items()}
    top = max(float(np.max(db)) for _, db in curves.values())
    for n, (label, (f, db)) in enumerate(curves.items()):
        ax.semilogx(
            f, db - top, lw=1.0, color=POSITION_COLOURS[n % len(POSITION_COLOURS)], label=label
        )
    ax.set_xlim(20, 20000)
    low = min(float(np.min(db[(f >= 31.5) & (f <= 16000)])) for f, db in curves.values())
    ax.set_ylim(max(-60.0, np.floor((low - top) / 10) * 10 - 5), 3)
    ax.set_xticks([31.5, 63, 125, 250, 500, 1000, 2000, 4000, 8000, 16000])
    ax.set_xticklabels(
        ["31.5", "63", "125", "250", "500", "1k", "2k", "4k", "8k", "16k"], fontsize=7
    )
    ax.minorticks_off()
    ax.set_xlabel("frequency (Hz)")
    ax.set_ylabel("level (dB re loudest)")
    ax.legend(fontsize=6, ncol=4, loc="lower center")
    return fig


def plan_figure(study):
    """Sources (triangles) and receivers (circles) in plan, with heights; the room's outline
    when its dimensions are given. ``None`` when no position has coordinates.

    Examples
    --------
    >>> from pathlib import Path
    >>> from roomconv.study import parse_study, template_text
    >>> study = parse_study(template_text("Hall B"), Path("/data/study.toml"))
    >>> plan_figure(study) is None      # the template gives coordinates
    False
    """
    pts = [p for p in study.sources + study.receivers if p.x_m is not None]
    if not pts:
        return None
    fig, (ax,) = _figure(5.5, 4.0)
    ax.grid(False)
    dims = study.room.dimensions_m
    if dims is not None:
        ax.add_patch(_rect(dims[0], dims[1]))
    for group, marker, colour in ((study.sources, "^", FLAG), (study.receivers, "o", AVERAGE)):
        for p in group:
            if p.x_m is None:
                continue
            ax.plot(p.x_m, p.y_m, marker, color=colour, ms=8)
            h = "" if p.height_m is None else f" ({p.height_m:g} m)"
            ax.annotate(
                p.id + h,
                (p.x_m, p.y_m),
                textcoords="offset points",
                xytext=(5, 5),
                fontsize=7,
                color=INK,
            )
    ax.set_aspect("equal", adjustable="datalim")
    ax.set_xlabel("x (m)")
    ax.set_ylabel("y (m)")
    ax.set_title("Plan: sources ▲, receivers ● (height above floor)", fontsize=8)
    return fig


def _rect(w, d):
    from matplotlib.patches import Rectangle

    return Rectangle((0, 0), w, d, fill=False, ec=INK, lw=1.2)


def treatment_figure(bands: list[dict], title: str = ""):
    """Measured decay time, the target with its accepted range, and the time predicted after
    treatment, per octave band (the ``bands`` entries of a treatment plan)."""
    fig, (ax,) = _figure(7.5, 3.2)
    x = [r["band_hz"] for r in bands]
    tgt = np.array([np.nan if r["target_s"] is None else r["target_s"] for r in bands])
    lo = np.array([0.0 if r["target_min_s"] is None else r["target_min_s"] for r in bands])
    hi = np.array([np.nan if r["target_max_s"] is None else r["target_max_s"] for r in bands])
    ax.fill_between(x, lo, hi, color=TARGET, label="target range", zorder=0)
    ax.plot(x, tgt, "--", color=TARGET_EDGE, lw=1, label="target")
    for key, colour, mark, label in (
        ("measured_s", POSITION, "s", "measured"),
        ("predicted_s", AVERAGE, "o", "after treatment"),
    ):
        pts = [(r["band_hz"], r[key]) for r in bands if r.get(key) is not None]
        if pts:
            ax.plot(*zip(*pts, strict=True), "-" + mark, color=colour, ms=5, label=label)
    off = [(r["band_hz"], r["predicted_s"]) for r in bands if r.get("within_tolerance") is False]
    off = [p for p in off if p[1] is not None]
    if off:
        ax.plot(
            *zip(*off, strict=True),
            "o",
            mfc="white",
            mec=FLAG,
            mew=1.8,
            ms=8,
            label="outside the range",
        )
    _band_axis(ax, x)
    ax.set_ylabel("T (s)")
    ax.set_ylim(bottom=0)
    if title:
        ax.set_title(title, fontsize=8, loc="left", color=INK)
    ax.legend(fontsize=7, loc="upper right")
    return fig
