"""Shared pieces of the workbench's look: band marker glyphs, the level meter, and small
text renderings (horizontal bars, decay plots) drawn with block characters, so they work in
any terminal and over SSH.

Shared names other modules use:

``BAND_MARKERS``
    One glyph per frequency band, in band order (lowest band first); plots and tables mark a
    band's curve, point or row with ``band_marker(k)`` so one band looks the same everywhere.
``level_meter(peak_dbfs, width)``
    A one-line input meter for the Measure tab.
"""

from __future__ import annotations

import numpy as np

#: One glyph per band, lowest band first (cycled past the last). Chosen from the Unicode
#: "Geometric Shapes" block, which common terminal fonts draw at one cell width.
BAND_MARKERS: tuple[str, ...] = ("●", "▲", "■", "◆", "▼", "○", "△", "□", "◇", "▽", "+", "×")


def band_marker(k: int) -> str:
    """The glyph of the ``k``-th band (from 0), cycling through :data:`BAND_MARKERS`."""
    return BAND_MARKERS[k % len(BAND_MARKERS)]


#: The meter's scale, dBFS: its left end and the marks where the input is loud enough for a
#: sweep and where it nears clipping (common practice: leave 6-10 dB of headroom).
METER_FLOOR_DBFS, METER_GOOD_DBFS, METER_HOT_DBFS = -60.0, -30.0, -6.0


def level_meter(peak_dbfs: float, width: int = 30) -> str:
    """A one-line input meter: ``▕███████░░░░▏ -23.4 dBFS``, full at 0 dBFS.

    The bar fills in proportion to the level in dB between :data:`METER_FLOOR_DBFS` and
    0 dBFS; the text says "near clipping" from :data:`METER_HOT_DBFS` and "low" below
    :data:`METER_GOOD_DBFS`.
    """
    if not np.isfinite(peak_dbfs):
        peak_dbfs = METER_FLOOR_DBFS
    frac = min(1.0, max(0.0, (peak_dbfs - METER_FLOOR_DBFS) / -METER_FLOOR_DBFS))
    n = int(round(frac * width))
    note = (
        "near clipping"
        if peak_dbfs >= METER_HOT_DBFS
        else "low"
        if peak_dbfs < METER_GOOD_DBFS
        else "good"
    )
    return f"▕{'█' * n}{'░' * (width - n)}▏ {peak_dbfs:6.1f} dBFS {note}"


def reflow(text: str) -> str:
    """Join the hard-wrapped lines of a text (such as the caution) into paragraphs and
    bullets, so a narrow overlay wraps them at word boundaries instead of mid-line."""
    blocks: list[str] = []
    for line in text.splitlines():
        stripped = line.strip()
        if not stripped:
            blocks.append("")
        elif stripped.startswith("* ") or not blocks or not blocks[-1]:
            blocks.append(("• " + stripped[2:]) if stripped.startswith("* ") else stripped)
        elif line.startswith("    ") or not blocks[-1].startswith("• "):
            blocks[-1] += " " + stripped
        else:
            blocks.append(stripped)
    return "\n".join(blocks)


def bar_chart(rows: list[tuple[str, float | None]], width: int = 36, unit: str = "s") -> str:
    """One line per (label, value): a bar scaled to the largest value."""
    vals = [v for _, v in rows if v is not None]
    top = max(vals) if vals else 1.0
    lines = []
    for label, v in rows:
        if v is None:
            lines.append(f"{label:>6} │ —")
            continue
        n = int(round(width * v / top)) if top > 0 else 0
        lines.append(f"{label:>6} │{'█' * n}{' ' * (width - n)} {v:.2f} {unit}")
    return "\n".join(lines)


def decay_plot(
    curves: list[tuple[str, np.ndarray, int]],
    width: int = 60,
    height: int = 12,
    floor_db: float = -60.0,
) -> str:
    """Decay curves (label, dB array from onset, rate) on a character grid, one mark per band."""
    marks = BAND_MARKERS
    t_max = max((c.size / r for _, c, r in curves if c is not None), default=1.0)
    grid = [[" "] * width for _ in range(height)]
    for k, (_, curve, rate) in enumerate(curves):
        if curve is None:
            continue
        t = np.arange(curve.size) / rate
        cols = np.minimum((t / t_max * (width - 1)).astype(int), width - 1)
        rows = np.clip(((curve / floor_db) * (height - 1)).round().astype(int), 0, height - 1)
        for c, r in zip(
            cols[:: max(1, curve.size // (width * 4))],
            rows[:: max(1, curve.size // (width * 4))],
            strict=True,
        ):
            grid[r][c] = marks[k % len(marks)]
    lines = []
    for i, row in enumerate(grid):
        db = floor_db * i / (height - 1)
        lines.append(f"{db:5.0f} dB ┤{''.join(row)}")
    lines.append(" " * 9 + "└" + "─" * width)
    lines.append(" " * 10 + f"0 s{' ' * (width - 12)}{t_max:.2f} s")
    legend = "  ".join(f"{marks[k % len(marks)]}={lab}" for k, (lab, _, _) in enumerate(curves))
    lines.append(legend)
    return "\n".join(lines)
