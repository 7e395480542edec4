"""The workbench's plot widgets: what they are given is what they draw, to scale."""

import numpy as np
import pytest
from textual.app import App, ComposeResult

from roomconv.analysis.curves import band_decays, energy_time_curve
from roomconv.analysis.parameters import room_parameters
from tui.plots import (
    BAND_MARKS,
    CELL_ASPECT,
    RECEIVER_MARK,
    SOURCE_MARK,
    DecayPlot,
    DecayTimePlot,
    EnergyTimePlot,
    RoomPlan,
    plan_layout,
)

pytestmark = pytest.mark.timeout(60)
FS = 48000


def exponential_noise(T, seconds, seed=0, noise=0.0):
    """Noise under exp(−3 ln10 · t / T) (energy falls 60 dB in T), plus steady noise."""
    rng = np.random.default_rng(seed)
    t = np.arange(int(seconds * FS)) / FS
    h = rng.standard_normal(t.size) * np.exp(-3 * np.log(10) * t / T)
    return h + noise * rng.standard_normal(t.size)


class Holder(App):
    def __init__(self, *widgets):
        super().__init__()
        self.widgets = widgets

    def compose(self) -> ComposeResult:
        yield from self.widgets


def rendered(widget) -> str:
    return widget.render().plain


@pytest.mark.parametrize(
    ("length", "width", "cols", "rows"),
    [(12, 8, 60, 14), (30, 6, 40, 10), (5, 20, 70, 30), (3.3, 2.1, 20, 8)],
)
def test_plan_layout_is_to_scale_and_fits(length, width, cols, rows):
    # Closed form: one column is m_per_col metres across and one row CELL_ASPECT times that
    # down (cells about twice as tall as wide, common practice); each wall within half a
    # cell of its true distance, and the outline fills at least half the space it may use.
    lay = plan_layout(length, width, cols, rows)
    across, down = lay.m_per_col, lay.m_per_col * CELL_ASPECT
    assert lay.cols <= cols - 1 and lay.rows <= rows - 1
    assert abs(lay.cols * across - length) <= across / 2 + 1e-9
    assert abs(lay.rows * down - width) <= down / 2 + 1e-9
    assert lay.cols >= (cols - 1) / 2 or lay.rows >= (rows - 1) / 2
    # Corners land on the outline: (0, 0) is the front-left corner at the bottom.
    assert lay.cell(0, 0) == (lay.col0, lay.row0 + lay.rows)
    assert lay.cell(length, width) == (lay.col0 + lay.cols, lay.row0)


async def test_room_plan_marks_source_and_receiver_where_they_are():
    plan = RoomPlan()
    app = Holder(plan)
    async with app.run_test(size=(60, 20)) as pilot:
        plan.show(10, 5, (2.5, 1.25), [(7.5, 3.75)], {s: "plaster" for s in ("back", "front")})
        await pilot.pause()
        lines = rendered(plan).splitlines()
        lay = plan.layout_now
        for glyph, (x, y) in ((SOURCE_MARK, (2.5, 1.25)), (RECEIVER_MARK, (7.5, 3.75))):
            col, row = lay.cell(x, y)
            assert lines[row][col] == glyph
        # A quarter of the way across and a quarter up from the front wall: closed form.
        col, row = lay.cell(2.5, 1.25)
        assert col - lay.col0 == round(lay.cols / 4)
        assert lay.row0 + lay.rows - row == round(lay.rows / 4)
        assert "back: plaster" in lines[0]
        plan.show(10, 5, (12, 1), [], {})
        await pilot.pause()
        assert "source outside the room" in rendered(plan)


async def test_energy_time_plot_shows_slope_noise_floor_and_truncation():
    # Exponential decay, T = 0.5 s, over a steady noise floor: the analysis finds the floor
    # and the truncation point; the plot marks both and its curve falls at −60/T dB/s
    # (closed form) before the floor.
    T = 0.5
    h = exponential_noise(T, 1.5, seed=4, noise=1e-3)
    _res, wide, _ = room_parameters(h, FS, bands="octave", low=500, high=1000)
    etc = energy_time_curve(h, FS, average_s=0.01)
    plot = EnergyTimePlot()
    app = Holder(plot)
    async with app.run_test(size=(90, 20)) as pilot:
        plot.show(etc, truncation_s=wide.truncation_s, noise_db=wide.noise_db, label="t")
        await pilot.pause()
        d = plot.data
        sel = (d["t_s"] > 0.05) & (d["t_s"] < 0.3)
        slope = np.polyfit(d["t_s"][sel], d["smooth_db"][sel], 1)[0]
        assert slope == pytest.approx(-60 / T, rel=0.05)
        # The floor: 10·log10(1e-6) = −60 dB re a unit-variance start (closed form); the
        # analysis reads it re its peak sample, so within a few dB of −60 minus the crest.
        assert d["noise_db"] < -55
        assert 0.3 < d["truncation_s"] < 1.5
        assert "noise floor" in plot.border_subtitle and "truncation" in plot.border_subtitle
        assert plot.plt.build()  # draws without error at this size


async def test_decay_plot_marks_each_band_and_draws_its_line():
    h = exponential_noise(0.8, 2.0, seed=5)
    res, _, _ = room_parameters(h, FS, bands="octave", low=250, high=2000)
    decays = band_decays(res, FS)
    plot = DecayPlot()
    app = Holder(plot)
    async with app.run_test(size=(90, 20)) as pilot:
        labels = [f"{d.band_hz:g}" for d in decays]
        plot.show(decays, labels)
        await pilot.pause()
        out = plot.plt.uncolorize(plot.plt.build())
        for n in range(len(decays)):
            assert f"{BAND_MARKS[n]} {labels[n]}" in plot.border_subtitle
        assert BAND_MARKS[0] in out and "·" in out
        # Each line's T is the analysed T30 (the same fit, ISO 3382-1 range −5 … −35 dB).
        for d, r in zip(plot.data["decays"], res, strict=True):
            assert d.line.reverberation_s == pytest.approx(r.t30_s, rel=1e-9)


async def test_decay_time_plot_flags_cautioned_bands():
    plot = DecayTimePlot()
    app = Holder(plot)
    async with app.run_test(size=(80, 18)) as pilot:
        plot.show(
            [("125", 1.2, 0.1, True), ("250", 1.0, 0.05, False), ("500", None, None, False)], "T30"
        )
        await pilot.pause()
        out = plot.plt.uncolorize(plot.plt.build())
        assert "⚠" in out and "●" in out
        assert "caution" in plot.border_subtitle
        plot.show([("125", None, None, False)], "T30")  # nothing evaluable: the hint again
        await pilot.pause()
        assert plot.data == {}


async def test_plots_draw_the_same_on_every_redraw():
    # A resize redraws a plot: the picture must not change from one draw to the next (a
    # plotting library's log axis once rewrote its data at every draw).
    from roomconv.analysis.curves import smoothed_magnitude_db
    from tui.plots import MagnitudePlot

    h = exponential_noise(0.5, 1.0, seed=6)
    res, wide, _ = room_parameters(h, FS, bands="octave", low=250, high=1000)
    f, db = smoothed_magnitude_db(h, FS)
    plots = [EnergyTimePlot(), MagnitudePlot(), DecayPlot(), DecayTimePlot()]
    app = Holder(*plots)
    async with app.run_test(size=(90, 60)) as pilot:
        plots[0].show(energy_time_curve(h, FS), truncation_s=wide.truncation_s)
        plots[1].show([("h", f, db)])
        plots[2].show(band_decays(res, FS), ["250", "500", "1k"])
        plots[3].show([("250", 0.5, 0.02, False), ("500", 0.49, 0.01, False)], "T30")
        await pilot.pause()
        for plot in plots:
            first = plot.plt.uncolorize(plot.plt.build())
            assert plot.plt.uncolorize(plot.plt.build()) == first, type(plot).__name__
        mag = plots[1].plt.uncolorize(plots[1].plt.build())
        assert "1k" in mag  # ticks drawn
        assert any(ch in mag for ch in "⠁⠂⠄⡀⢀⣀⠉⠒⠤")  # and the curve itself
