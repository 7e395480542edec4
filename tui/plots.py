"""Plot widgets of the workbench: the energy–time curve, the smoothed magnitude response,
band decay curves with their fitted lines, decay time per band with its uncertainty, and a
to-scale plan of a shoebox room.

Which widget draws them
-----------------------
The curves use ``textual-plotext`` (a maintained Textual widget around plotext): it gives
axes, ticks, a log frequency axis, error bars and reference lines in braille resolution
with nothing to maintain on our side. A second package on the index, ``textual-plot``, is
not installed; textual-plotext already does all that these four plots need, so no second
plotting dependency was added. The room plan is our own widget: a to-scale outline with
marks on exact cells, labelled walls and a stated scale is simpler on a character grid
than through a chart library's data axes.

Every widget keeps the data it was last given (``.data``) so tests and other screens can
read what is drawn. The numbers come from :mod:`roomconv.analysis.curves`; nothing here
computes an acoustic quantity.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from rich.text import Text
from textual.widget import Widget
from textual_plotext import PlotextPlot

__all__ = [
    "BAND_MARKS",
    "SOURCE_MARK",
    "RECEIVER_MARK",
    "band_mark",
    "EnergyTimePlot",
    "MagnitudePlot",
    "DecayPlot",
    "DecayTimePlot",
    "PlanLayout",
    "plan_layout",
    "RoomPlan",
]

#: One glyph per shown band, in band order (the same marks as the report's decay figure).
#: Kept as one constant so it can point at the workbench's shared band markers.
BAND_MARKS = "123456789abcdefghijklmnopqrstuvwxyz"
#: Plan marks: the report's plan uses a triangle for sources and a circle for receivers.
SOURCE_MARK = "▲"
RECEIVER_MARK = "●"

#: Curve colours (RGB) on the workbench's dark or light surface: the report's teal, slate
#: and burnt orange, lightened for a terminal.
AVERAGE = (40, 170, 170)
POSITION = (140, 155, 170)
FLAG = (230, 120, 40)
BAND_COLOURS = (
    (40, 170, 170),
    (170, 120, 220),
    (225, 150, 70),
    (110, 190, 90),
    (220, 95, 130),
    (100, 150, 220),
    (200, 200, 90),
    (200, 120, 90),
)
#: Frequency ticks of the magnitude plot (the nominal octave-band centres, IEC 61260-1).
FREQ_TICKS = (31.5, 63, 125, 250, 500, 1000, 2000, 4000, 8000, 16000)
FREQ_LABELS = ("31.5", "63", "125", "250", "500", "1k", "2k", "4k", "8k", "16k")
#: Points drawn per curve: a few per braille column of the widest plot.
MAX_POINTS = 600


def band_mark(index: int) -> str:
    """The glyph of the ``index``-th band shown (cycled)."""
    return BAND_MARKS[index % len(BAND_MARKS)]


def _thin(x: np.ndarray, y: np.ndarray, n: int = MAX_POINTS, keep_peaks: bool = False):
    """At most about ``n`` points: every k-th, or each group's maximum (a peak stays a peak)."""
    x, y = np.asarray(x, dtype=float), np.asarray(y, dtype=float)
    k = max(1, int(np.ceil(x.size / n)))
    if k == 1:
        return x, y
    m = x.size // k * k
    if keep_peaks and m:
        return x[:m:k], y[:m].reshape(-1, k).max(axis=1)
    return x[::k], y[::k]


class _Plot(PlotextPlot):
    """A plotext plot with a border title, a hint while empty, and the data it shows."""

    DEFAULT_CSS = """
    _Plot { height: 14; min-height: 10; border: round $primary 40%; }
    """

    def __init__(self, title: str, hint: str, **kwargs) -> None:
        super().__init__(**kwargs)
        self.border_title = title
        self.hint = hint
        self.data: dict = {}
        self.clear()

    def clear(self) -> None:
        """Back to the empty plot with its hint."""
        self.data = {}
        self.plt.clear_figure()
        self.plt.title(self.hint)
        self.refresh()

    def _start(self) -> None:
        self.plt.clear_figure()
        self.border_subtitle = ""

    def render(self):
        try:
            return super().render()
        except Exception as exc:  # a plot that cannot be drawn must not end the session
            return Text(f"cannot draw this plot: {type(exc).__name__}: {exc}", style="dim")


class EnergyTimePlot(_Plot):
    """Energy–time curve in dB re peak, with the noise floor and the truncation point."""

    def __init__(self, **kwargs) -> None:
        super().__init__("Energy–time curve", "analyze a response to see its energy", **kwargs)

    def show(self, etc, *, truncation_s=None, noise_db=None, label: str = "") -> None:
        """``etc``: an :class:`~roomconv.analysis.curves.EnergyTimeCurve`; ``truncation_s``
        from the onset and ``noise_db`` re peak, both from the broadband analysis (None when
        no noise floor was reached)."""
        self._start()
        t = etc.t_s - etc.onset_s
        self.data = {
            "t_s": t,
            "peak_db": etc.peak_db,
            "smooth_db": etc.smooth_db,
            "truncation_s": truncation_s,
            "noise_db": noise_db,
        }
        p = self.plt
        x, y = _thin(t, etc.peak_db, keep_peaks=True)
        p.plot(x.tolist(), y.tolist(), marker="braille", color=POSITION)
        x, y = _thin(t, etc.smooth_db)
        p.plot(x.tolist(), y.tolist(), marker="braille", color=AVERAGE)
        low = -100.0
        if noise_db is not None and np.isfinite(noise_db):
            p.hline(noise_db, FLAG)
            low = min(low, noise_db - 10)
        if truncation_s is not None:
            p.vline(truncation_s, FLAG)
        p.ylim(low, 3)
        p.xlim(float(t[0]), float(t[-1]))
        p.xlabel("time after onset (s)")
        p.ylabel("dB re peak")
        marks = []
        if noise_db is not None:
            marks.append(f"noise floor {noise_db:.0f} dB")
        if truncation_s is not None:
            marks.append(f"truncation {truncation_s:.2f} s")
        self.border_subtitle = (label + ("  ·  " if label and marks else "")) + ", ".join(marks)
        self.refresh()


class MagnitudePlot(_Plot):
    """Third-octave smoothed magnitude response, dB re the loudest shown curve's maximum."""

    def __init__(self, **kwargs) -> None:
        super().__init__(
            "Magnitude response, 1/3 octave", "analyze a response to see its spectrum", **kwargs
        )

    def show(self, curves: list[tuple[str, np.ndarray, np.ndarray]]) -> None:
        """``curves``: (label, frequencies Hz, level dB) from
        :func:`~roomconv.analysis.curves.smoothed_magnitude_db`."""
        self._start()
        if not curves:
            self.clear()
            return
        top = max(float(np.max(db)) for _, _, db in curves)
        self.data = {label: (f, db - top) for label, f, db in curves}
        p = self.plt
        # The log axis is drawn on log10(f) with labelled ticks: plotext's own log scale
        # rewrites its stored data at every draw, so a redraw (a resize) would spoil it.
        lows = []
        for n, (label, (f, db)) in enumerate(self.data.items()):
            p.plot(
                np.log10(f).tolist(),
                db.tolist(),
                marker="braille",
                color=BAND_COLOURS[n % len(BAND_COLOURS)],
                label=label if len(self.data) > 1 else None,
            )
            audible = db[(f >= 31.5) & (f <= 16000)]
            lows.append(float(audible.min()) if audible.size else -60.0)
        f_all = np.concatenate([f for f, _ in self.data.values()])
        ticks = [(t, lab) for t, lab in zip(FREQ_TICKS, FREQ_LABELS, strict=True)]
        ticks = [(t, lab) for t, lab in ticks if f_all.min() <= t <= f_all.max()]
        p.xticks([float(np.log10(t)) for t, _ in ticks], [lab for _, lab in ticks])
        p.xlim(float(np.log10(f_all.min())), float(np.log10(f_all.max())))
        p.ylim(max(-60.0, np.floor(min(lows) / 10) * 10 - 5), 3)
        p.xlabel("frequency (Hz)")
        p.ylabel("dB re max")
        self.refresh()


class DecayPlot(_Plot):
    """Band decay curves (a glyph per band) with their fitted evaluation lines (dotted)."""

    def __init__(self, **kwargs) -> None:
        super().__init__(
            "Decay curves and fitted lines", "analyze a response to see its decay", **kwargs
        )

    def show(self, decays, labels: list[str]) -> None:
        """``decays``: :class:`~roomconv.analysis.curves.BandDecay` items; ``labels`` their
        band names, in the same order."""
        self._start()
        self.data = {"decays": list(decays), "labels": list(labels)}
        if not decays:
            self.clear()
            return
        p = self.plt
        t_end = 0.0
        for n, d in enumerate(decays):
            colour = BAND_COLOURS[n % len(BAND_COLOURS)]
            x, y = _thin(d.t_s, d.curve_db, n=300)
            p.plot(x.tolist(), y.tolist(), marker="braille", color=colour)
            # A glyph at a few points names the band even without colour.
            idx = np.linspace(0, x.size - 1, 4).astype(int)[1:]
            p.scatter(x[idx].tolist(), y[idx].tolist(), marker=band_mark(n), color=colour)
            if d.line is not None:
                lt = np.linspace(d.line.t_s[0], d.line.t_s[1], 24)
                ly = np.interp(lt, d.line.t_s, d.line.level_db)
                p.scatter(lt.tolist(), ly.tolist(), marker="·", color=colour)
            t_end = max(t_end, float(d.t_s[-1]))
        p.ylim(-65, 2)
        p.xlim(0, t_end or 1.0)
        p.xlabel("time after onset (s)")
        p.ylabel("decay (dB)")
        self.border_subtitle = (
            "  ".join(f"{band_mark(n)} {lab}" for n, lab in enumerate(labels)) + "  · fitted line"
        )
        self.refresh()


class DecayTimePlot(_Plot):
    """A decay time per band (average) with its uncertainty as error bars; flagged values
    drawn with a warning glyph."""

    def __init__(self, **kwargs) -> None:
        super().__init__("Decay time per band", "analyze responses to see T per band", **kwargs)

    def show(self, rows: list[tuple[str, float | None, float | None, bool]], name: str) -> None:
        """``rows``: (band label, value s or None, uncertainty s or None, flagged)."""
        self._start()
        self.data = {"rows": list(rows), "name": name}
        shown = [(i, r) for i, r in enumerate(rows) if r[1] is not None]
        if not shown:
            self.clear()
            return
        p = self.plt
        x = [float(i) for i, _ in shown]
        y = [float(r[1] or 0.0) for _, r in shown]  # None was left out above
        err = [float(r[2] or 0.0) for _, r in shown]
        p.plot(x, y, marker="braille", color=AVERAGE)
        p.error(x, y, yerr=err, color=AVERAGE)
        ok = [(xi, yi) for xi, yi, (_, r) in zip(x, y, shown, strict=True) if not r[3]]
        bad = [(xi, yi) for xi, yi, (_, r) in zip(x, y, shown, strict=True) if r[3]]
        if ok:
            p.scatter(*map(list, zip(*ok, strict=True)), marker="●", color=AVERAGE)
        if bad:
            p.scatter(*map(list, zip(*bad, strict=True)), marker="⚠", color=FLAG)
        every = max(1, int(np.ceil(len(rows) / 10)))
        p.xticks(
            [float(i) for i in range(0, len(rows), every)],
            [rows[i][0] for i in range(0, len(rows), every)],
        )
        p.xlim(-0.5, len(rows) - 0.5)
        top = max(yi + e for yi, e in zip(y, err, strict=True))
        p.ylim(0, top * 1.15 if top > 0 else 1.0)
        p.xlabel("band (Hz)")
        p.ylabel(f"{name} (s)")
        self.border_subtitle = f"{name} average ± uncertainty" + ("  ⚠ caution" if bad else "")
        self.refresh()


# --- the room plan -------------------------------------------------------------------------
#: Terminal cells are about twice as tall as they are wide (common practice for monospace
#: fonts); the plan keeps metres square under that assumption.
CELL_ASPECT = 2.0


@dataclass(frozen=True)
class PlanLayout:
    """Where a room of ``length`` × ``width`` m sits on a grid of character cells."""

    length_m: float
    width_m: float
    col0: int  #: column of the left wall (x = 0)
    row0: int  #: row of the back wall (y = width)
    cols: int  #: columns from the left to the right wall
    rows: int  #: rows from the back to the front wall
    m_per_col: float  #: metres per column across (a row is CELL_ASPECT times that)

    def cell(self, x_m: float, y_m: float) -> tuple[int, int]:
        """(column, row) of a point; y runs from the front wall (bottom) to the back (top)."""
        c = self.col0 + int(round(x_m / self.m_per_col))
        r = self.row0 + self.rows - int(round(y_m / (self.m_per_col * CELL_ASPECT)))
        return c, r

    def inside(self, x_m: float, y_m: float) -> bool:
        return 0 <= x_m <= self.length_m and 0 <= y_m <= self.width_m


def plan_layout(
    length_m: float, width_m: float, cols: int, rows: int, aspect: float = CELL_ASPECT
) -> PlanLayout:
    """The largest to-scale outline of the room inside ``cols`` × ``rows`` cells (walls
    included), centred across, at a round scale; each wall lies within half a cell of its
    true place.

    Examples
    --------
    >>> lay = plan_layout(12, 6, 50, 14)
    >>> lay.cols, lay.rows, lay.m_per_col
    (48, 12, 0.25)
    """
    if not (length_m > 0 and width_m > 0):
        raise ValueError("the room needs a positive length and width")
    if cols < 2 or rows < 2:
        raise ValueError("the plan needs at least 2 × 2 cells")
    per_m = min((cols - 1) / length_m, aspect * (rows - 1) / width_m)  # columns per metre
    if not 0 < per_m < float("inf"):
        raise ValueError(f"a {length_m:g} × {width_m:g} m room cannot be drawn to scale")
    nice = _nice_scale(1.0 / per_m)
    c = max(1, int(round(length_m / nice)))
    r = max(1, int(round(width_m / nice / aspect)))
    col0 = max(0, (cols - 1 - c) // 2)
    return PlanLayout(length_m, width_m, col0, 0, c, r, nice)


def _nice_scale(m_per_col: float) -> float:
    """The next round number of metres per column at or above ``m_per_col`` (1, 1.2, 1.5,
    2, 2.5, 3, 4, 5, 6 or 8 times a power of ten), so the stated scale is easy to read."""
    exp = np.floor(np.log10(m_per_col))
    for k in (1.0, 1.2, 1.5, 2.0, 2.5, 3.0, 4.0, 5.0, 6.0, 8.0, 10.0):
        v = k * 10**exp
        if v >= m_per_col * (1 - 1e-9):
            return float(v)
    return float(10 ** (exp + 1))


class RoomPlan(Widget):
    """Top view of a shoebox room drawn to scale, with the source and receiver marks and
    the wall materials; :meth:`show` redraws it, :meth:`problem` shows why it cannot."""

    DEFAULT_CSS = """
    RoomPlan { height: 1fr; min-height: 9; border: round $primary 40%; padding: 0 1; }
    """

    def __init__(self, **kwargs) -> None:
        super().__init__(**kwargs)
        self.border_title = "Plan (top view)"
        self.data: dict = {}
        self.message = "type the room's size"
        self.layout_now: PlanLayout | None = None

    def show(self, length_m, width_m, source_xy, receivers_xy, walls: dict[str, str]) -> None:
        """Room sides in m, the source's (x, y), the receivers' [(x, y), …] and the material
        of each surface."""
        self.data = {
            "length_m": float(length_m),
            "width_m": float(width_m),
            "source": tuple(source_xy) if source_xy is not None else None,
            "receivers": [tuple(r) for r in receivers_xy],
            "walls": dict(walls),
        }
        self.message = ""
        self.refresh()

    def problem(self, text: str) -> None:
        self.data = {}
        self.message = text
        self.refresh()

    def render(self) -> Text:
        try:
            return self._render_plan()
        except Exception as exc:  # a plan that cannot be drawn must not end the session
            self.layout_now = None
            return Text(f"cannot draw the plan: {exc}", style="dim")

    def _render_plan(self) -> Text:
        d = self.data
        width, height = self.content_size.width, self.content_size.height
        if not d or width < 12 or height < 8:
            self.layout_now = None
            return Text(self.message or "the plan needs a larger window", style="dim")
        walls = d["walls"]
        # Rows: back label, the outline, front label, then the legend, side walls and scale.
        lay = plan_layout(d["length_m"], d["width_m"], width, height - 5)
        lay = PlanLayout(lay.length_m, lay.width_m, lay.col0, 1, lay.cols, lay.rows, lay.m_per_col)
        self.layout_now = lay
        grid = [[" "] * width for _ in range(height)]
        styles: dict[tuple[int, int], str] = {}
        c0, r0, c1, r1 = lay.col0, lay.row0, lay.col0 + lay.cols, lay.row0 + lay.rows
        for c in range(c0, c1 + 1):
            grid[r0][c] = grid[r1][c] = "─"
        for r in range(r0, r1 + 1):
            grid[r][c0] = grid[r][c1] = "│"
        grid[r0][c0], grid[r0][c1], grid[r1][c0], grid[r1][c1] = "┌", "┐", "└", "┘"

        def put(row: int, col: int, text: str, style: str = "") -> None:
            for i, ch in enumerate(text):
                if 0 <= col + i < width and 0 <= row < height:
                    grid[row][col + i] = ch
                    if style:
                        styles[(row, col + i)] = style

        def centred(row: int, text: str) -> None:
            put(row, max(0, c0 + (lay.cols + 1 - len(text)) // 2), text[:width], "dim")

        centred(r0 - 1, f"back: {walls.get('back', '')}")
        centred(r1 + 1, f"front: {walls.get('front', '')}")
        if c0 >= 1:
            put((r0 + r1) // 2, c0 - 1, "L", "dim")
        put((r0 + r1) // 2, c1 + 1, "R", "dim")
        outside = []
        marks = [(d["source"], SOURCE_MARK, "bold #e67828", "source")] if d["source"] else []
        marks += [(r, RECEIVER_MARK, "bold #28aaaa", "receiver") for r in d["receivers"]]
        for (x, y), glyph, style, what in marks:
            if not lay.inside(x, y):
                outside.append(what)
                x, y = min(max(x, 0.0), lay.length_m), min(max(y, 0.0), lay.width_m)
            c, r = lay.cell(x, y)
            put(r, c, glyph, style)
        put(r1 + 2, 0, f"{SOURCE_MARK} source  {RECEIVER_MARK} receiver"[:width])
        sides = f"L: {walls.get('left', '')}  R: {walls.get('right', '')}"
        put(r1 + 3, 0, sides[:width], "dim")
        scale = f"1 column = {lay.m_per_col:.3g} m · {lay.length_m:g} × {lay.width_m:g} m"
        if outside:
            scale = f"{' and '.join(outside)} outside the room! · " + scale
        put(r1 + 4, 0, scale[:width], "bold #e67828" if outside else "dim")
        text = Text()
        for row in range(min(height, r1 + 5)):
            for col in range(width):
                text.append(grid[row][col], styles.get((row, col), ""))
            text.append("\n")
        text.rstrip()
        return text
