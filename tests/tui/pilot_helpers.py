"""Helpers for driving the workbench headlessly with Textual's Pilot."""

from __future__ import annotations

import numpy as np
import soundfile as sf

FS = 48000


def decaying_ir(path, T=0.3, seconds=0.8, seed=0, channels=1, rate=FS):
    """A response of our own: noise decaying by 60 dB in ``T`` seconds (6.9 = ln 1000)."""
    rng = np.random.default_rng(seed)
    t = np.arange(int(seconds * rate)) / rate
    h = rng.standard_normal((t.size, channels)) * np.exp(-6.9 * t / T)[:, None] * 0.1
    sf.write(path, h, rate, subtype="FLOAT")
    return path


def dry_clip(path, seconds=0.5, seed=1, rate=FS):
    """A dry clip of our own: a decaying 440 Hz tone in quiet noise."""
    rng = np.random.default_rng(seed)
    t = np.arange(int(seconds * rate)) / rate
    x = 0.3 * np.sin(2 * np.pi * 440 * t) * np.exp(-2 * t) + 0.01 * rng.standard_normal(t.size)
    sf.write(path, x, rate)
    return path


async def press(app, pilot, selector):
    """Press a button the way Enter does (clicks depend on the layout's geometry)."""
    found = app.screen.query(selector)  # a button of an overlay first, else of the tabs
    (found.first() if found else app.query_one(selector)).press()
    await pilot.pause()


async def settle(app, pilot):
    await pilot.pause()
    await app.workers.wait_for_complete()
    await pilot.pause()


def status(app) -> str:
    return str(app.query_one("#status-line").render())


def text_of(app, selector) -> str:
    return str(app.query_one(selector).render())


def confirm_caution(app):
    """Tick the caution the only way the app allows: after its full text was shown."""
    app._caution_read = True
    app.query_one("#caution-ack").value = True


async def quick_simulated_measure(app, pilot, room, folder, *, duration="1", silence="1"):
    await pilot.press("m")
    app.query_one("#ms-sim").value = str(room)
    app.query_one("#ms-duration").value = duration
    app.query_one("#ms-silence").value = silence
    app.query_one("#ms-folder").value = str(folder)
    await press(app, pilot, "#ms-run")
    await settle(app, pilot)
