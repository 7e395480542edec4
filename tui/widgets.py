"""Small text renderings used by the screens: horizontal bars and decay plots drawn with
block characters, so they work in any terminal and over SSH."""

from __future__ import annotations

import numpy as np


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
    marks = "123456789abcdefghij"
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
