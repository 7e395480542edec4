"""Render jobs: one dry file through one response, a queue of dry files, a batch, live use.

Each job plans its outputs through one write guard before any work, names them
(:mod:`.naming`), writes the provenance sidecar after the render, and reports progress
through :class:`~roomconv.jobs.progress.ProgressCallback`.
"""

from __future__ import annotations

from collections.abc import Callable, Sequence
from dataclasses import dataclass, field
from pathlib import Path
from typing import TYPE_CHECKING

from .. import safety, validate
from ..audio import audio_info, read_audio, sidecar_path, write_provenance
from ..errors import InputError, RoomconvError
from ..render import offline
from ..render.offline import RenderReport, RenderSettings, resample_ir
from .guard import guarded, make_folders
from .naming import render_output_name
from .progress import Cancelled, ProgressCallback, silent

if TYPE_CHECKING:
    from ..render.stream import LiveProcessor

__all__ = [
    "check_predelay",
    "render_one",
    "render_many",
    "QueueResult",
    "run_batch",
    "BatchResult",
    "check_ceiling",
    "LiveSetup",
    "prepare_live",
    "run_live",
    "preview",
]


#: Longest pre-delay accepted, ms: a second is beyond any room's initial time gap (tens of
#: ms) and any musical use (common practice); longer ones only cost memory and time.
MAX_PREDELAY_MS = 1000.0


def check_predelay(predelay_ms: float, paths: Sequence) -> None:
    """Refuse a pre-delay longer than any room's (``MAX_PREDELAY_MS``) or whose buffer would
    not fit, at the rate and width of each file it applies to, before any work. Unreadable
    files are left to the render's own refusal.

    Examples
    --------
    >>> check_predelay(15.0, [])            # a room's pre-delay: accepted
    >>> check_predelay(1e9, [])
    Traceback (most recent call last):
    ...
    roomconv.errors.InputError: ...
    """
    for p in paths:
        try:
            info = audio_info(p)
        except Exception:  # noqa: BLE001 - an unreadable input gets its own message later
            continue
        validate.seconds_budget(
            predelay_ms / 1000.0, info.samplerate, "this pre-delay", channels=info.channels
        )
    validate.in_range(predelay_ms, "pre-delay", 0.0, MAX_PREDELAY_MS, unit="ms")


def render_one(
    dry,
    ir,
    output,
    settings: RenderSettings,
    *,
    force: bool = False,
    progress: ProgressCallback = silent,
) -> RenderReport:
    """Render ``dry`` through ``ir`` into ``output`` and write its provenance sidecar.

    Parameters
    ----------
    dry, ir, output : path-like
        Dry recording, impulse response, wet file to write.
    settings : RenderSettings
        Mix, pre-delay (ms), gain (dB), normalization, format, routing.
    force : bool
        Replace an existing output and sidecar (never an input).
    progress : callable
        ``progress(stage, fraction, message)``; may raise :class:`Cancelled`.

    Returns
    -------
    RenderReport

    Examples
    --------
    >>> import tempfile, pathlib, numpy as np, soundfile
    >>> tmp = tempfile.TemporaryDirectory()
    >>> d = pathlib.Path(tmp.name)
    >>> soundfile.write(d / "dry.wav", np.array([0.5, 0.0, 0.0]), 48000, subtype="DOUBLE")
    >>> soundfile.write(d / "ir.wav", np.array([1.0, 0.5]), 48000, subtype="DOUBLE")
    >>> s = RenderSettings(subtype="DOUBLE")
    >>> rep = render_one(d / "dry.wav", d / "ir.wav", d / "wet.wav", s)
    >>> rep.frames, sorted(p.name for p in d.iterdir())
    (4, ['dry.wav', 'ir.wav', 'wet.provenance.json', 'wet.wav'])
    >>> tmp.cleanup()
    """
    settings = settings.check()
    check_predelay(settings.predelay_ms, [dry])
    with guarded([dry, ir], force=force) as g:
        # Both files are planned against both inputs before the first block is computed.
        g.file(output)
        g.file(sidecar_path(output, "provenance"))
        stage = Path(output).name
        rep = offline.render_file(
            dry,
            ir,
            output,
            settings,
            force=force,
            guard=g,
            progress=lambda f: progress(stage, f, None),
        )
        write_provenance(output, [dry, ir], settings.as_dict(), guard=g)
    return rep


@dataclass
class QueueResult:
    """What :func:`render_many` did: reports of the files written, ``(dry, reason)`` of those
    that failed, and whether the queue was cancelled.

    Examples
    --------
    See :func:`render_many`, which returns one.
    """

    out_dir: Path
    reports: list[RenderReport] = field(default_factory=list)
    failed: list[tuple[Path, str]] = field(default_factory=list)
    cancelled: bool = False


def render_many(
    drys: Sequence,
    ir,
    out_dir,
    settings: RenderSettings,
    *,
    force: bool = False,
    progress: ProgressCallback = silent,
) -> QueueResult:
    """Render each dry file through ``ir`` into ``out_dir``, one after the other.

    A file that cannot be rendered is recorded and the queue goes on; a progress callback
    that raises :class:`Cancelled` stops the queue after removing the unfinished file.
    Progress stages are ``"<k>/<n> <output name>"``, with a fraction per file.

    Examples
    --------
    A file that cannot be read is recorded and the queue goes on:

    >>> import tempfile, pathlib, numpy as np, soundfile
    >>> tmp = tempfile.TemporaryDirectory()
    >>> d = pathlib.Path(tmp.name)
    >>> soundfile.write(d / "dry.wav", np.array([0.5, 0.0, 0.0]), 48000, subtype="DOUBLE")
    >>> soundfile.write(d / "ir.wav", np.array([1.0, 0.5]), 48000, subtype="DOUBLE")
    >>> q = render_many([d / "dry.wav", d / "missing.wav"], d / "ir.wav", d / "out",
    ...                 RenderSettings())
    >>> [r.output.name for r in q.reports], [p.name for p, _ in q.failed]
    (['dry__ir.wav'], ['missing.wav'])
    >>> tmp.cleanup()
    """
    drys = [Path(d) for d in drys]
    if not drys:
        raise InputError("no dry files given: name one or more")
    ir, out_dir = Path(ir), Path(out_dir)
    settings = settings.check()
    result = QueueResult(out_dir)
    make_folders(out_dir)
    for k, dry in enumerate(drys, 1):
        out = out_dir / render_output_name(dry, ir)
        stage = f"{k}/{len(drys)} {out.name}"

        def tick(_stage, frac, message=None, stage=stage):
            progress(stage, frac, message)

        try:
            result.reports.append(render_one(dry, ir, out, settings, force=force, progress=tick))
        except Cancelled:
            result.cancelled = True
            break
        except RoomconvError as exc:
            result.failed.append((dry, str(exc)))
            try:
                progress(stage, 1.0, f"failed: {exc}")
            except Cancelled:
                result.cancelled = True
                break
    return result


@dataclass
class BatchResult:
    """Outcomes of :func:`run_batch` (see :class:`roomconv.render.batch.Outcome`).

    Examples
    --------
    >>> from pathlib import Path
    >>> r = BatchResult(Path("wet"), [])
    >>> r.count("done"), r.failed, r.exit_code
    (0, [], 0)
    """

    out_dir: Path
    outcomes: list

    def count(self, status: str) -> int:
        """How many jobs ended with ``status`` (``"done"``, ``"skipped"``, ``"failed"``...)."""
        return sum(o.status == status for o in self.outcomes)

    @property
    def failed(self) -> list:
        """The outcomes of the jobs that failed."""
        return [o for o in self.outcomes if o.status == "failed"]

    @property
    def exit_code(self) -> int:
        """0 when nothing failed, 2 when every failure was bad input, else 1."""
        f = self.failed
        if not f:
            return 0
        return 2 if all(o.exit_code == 2 for o in f) else 1


def run_batch(
    drys: Sequence,
    irs: Sequence,
    out_dir,
    settings: RenderSettings,
    *,
    workers: int | None = None,
    scheduler: str | None = None,
    force: bool = False,
    on_event: Callable[[str, object], None] | None = None,
) -> BatchResult:
    """Every dry file through every response into ``out_dir``, on a local process pool or a
    Dask cluster at ``scheduler``; finished jobs whose sidecar verifies are skipped (resume).

    ``on_event(kind, payload)`` receives the batch runner's events ('skip', 'start',
    'progress', 'done') for a display.

    Examples
    --------
    Not run here (it starts worker processes); the batch tests in ``tests/render/`` run it.
    A typical call::

        result = run_batch(["take1.wav", "take2.wav"], ["hall.wav"], "wet/",
                           RenderSettings(mix=0.3), workers=2)
        result.exit_code    # 0 when every job was done or skipped
    """
    from ..render.batch import dask_executor, local_executor, plan_jobs
    from ..render.batch import run_batch as _run

    settings = settings.check()
    check_predelay(settings.predelay_ms, drys)
    with guarded([*drys, *irs], force=force) as g:
        # One guard knows every dry file and response: no output or sidecar may land on any.
        # The folder is created only when the first job starts.
        folder = g.folder(out_dir)
        jobs = plan_jobs(drys, irs, folder, settings, guard=g, output_name=render_output_name)
        if jobs and all(j.problem for j in jobs):
            # Nothing could be rendered: one refusal before any worker starts. With some
            # good inputs the batch goes on and reports each failed job instead.
            raise InputError(jobs[0].problem)
        if scheduler:
            executor, queue, owner = dask_executor(scheduler)
        else:
            executor, queue, owner = local_executor(workers)
        try:
            with executor:
                outcomes = _run(
                    jobs,
                    executor,
                    force=force,
                    progress=queue,
                    on_event=on_event,
                    before_first=lambda: g.make_folder(folder),
                )
        finally:
            closer = getattr(owner, "close", None) or getattr(owner, "shutdown", None)
            if closer:
                closer()
    return BatchResult(Path(folder), outcomes)


def check_ceiling(ceiling_dbfs: float) -> None:
    """Refuse a limiter ceiling above the output cap every sound card output keeps.

    Examples
    --------
    >>> check_ceiling(-1.0)
    >>> check_ceiling(3.0)
    Traceback (most recent call last):
    ...
    roomconv.errors.InputError: limiter ceiling 3 dBFS is above the output cap of -1 dBFS
    """
    if ceiling_dbfs > safety.OUTPUT_CAP_DBFS:
        raise InputError(
            f"limiter ceiling {ceiling_dbfs:g} dBFS is above the output cap of "
            f"{safety.OUTPUT_CAP_DBFS:g} dBFS"
        )


@dataclass
class LiveSetup:
    """A live convolution ready to start: the processor and the stream's settings.

    Examples
    --------
    Not run here: it plays sound. Show the hearing caution and obtain a confirmation first
    (the front end's job), then::

        setup = prepare_live("hall.wav", block_samples=128, gain_db=-12.0)
        # ... caution shown and confirmed here ...
        stats = run_live(setup, duration_s=30.0)

    The output is ramped, limited at ``ceiling_dbfs`` and capped whatever the settings;
    ``tests/render/test_live.py`` runs it through a virtual sound card.
    """

    processor: LiveProcessor
    rate_hz: int
    device: int | str | None
    input_channels: tuple[int, ...]
    output_channels: tuple[int, ...]
    ir_resampled_from_hz: int | None = None


def prepare_live(
    ir,
    *,
    rate_hz: int | None = None,
    device=None,
    block_samples: int = 128,
    input_channels: Sequence[int] = (1,),
    output_channels: Sequence[int] = (1,),
    mix: float = 1.0,
    gain_db: float = -6.0,
    ceiling_dbfs: float = -1.0,
    precision: str = "auto",
    match_ir_level: bool = True,
    measurement: int | None = None,
) -> LiveSetup:
    """Load the response and build the live processor; nothing is played yet.

    The caller shows the hearing caution and obtains confirmation between this and
    :func:`run_live`. ``rate_hz`` None takes the device's default rate (else the response's).
    Channels count from 1; so does ``measurement``, one measurement of a SOFA response set.

    Examples
    --------
    Not run here: it plays sound. Show the hearing caution and obtain a confirmation first
    (the front end's job), then::

        setup = prepare_live("hall.wav", block_samples=128, gain_db=-12.0)
        # ... caution shown and confirmed here ...
        stats = run_live(setup, duration_s=30.0)

    The output is ramped, limited at ``ceiling_dbfs`` and capped whatever the settings;
    ``tests/render/test_live.py`` runs it through a virtual sound card.
    """
    from ..measure.capture import load_sounddevice
    from ..render.stream import LiveProcessor

    check_ceiling(ceiling_dbfs)
    data, ir_rate = read_audio(ir, what="impulse response", measurement=measurement, single=True)
    sd = load_sounddevice()
    rate = rate_hz
    if rate is None:
        try:
            rate = int(sd.query_devices(device, "output")["default_samplerate"])
        except Exception:  # noqa: BLE001 - PortAudio errors are not one stable type
            rate = ir_rate
    resampled = None
    if ir_rate != rate:
        data, resampled = resample_ir(data, ir_rate, rate), ir_rate
    proc = LiveProcessor(
        data,
        rate,
        block=block_samples,
        n_in=len(input_channels),
        mix=mix,
        gain_db=gain_db,
        ceiling_dbfs=ceiling_dbfs,
        precision=precision,
        match_ir_level=match_ir_level,
    )
    return LiveSetup(proc, rate, device, tuple(input_channels), tuple(output_channels), resampled)


def run_live(setup: LiveSetup, *, duration_s: float | None = None, on_meter=None, stop_event=None):
    """Run a prepared live convolution until ``duration_s``, the event, or an interrupt;
    returns the stream statistics.

    Examples
    --------
    Not run here: it plays sound. Show the hearing caution and obtain a confirmation first
    (the front end's job), then::

        setup = prepare_live("hall.wav", block_samples=128, gain_db=-12.0)
        # ... caution shown and confirmed here ...
        stats = run_live(setup, duration_s=30.0)

    The output is ramped, limited at ``ceiling_dbfs`` and capped whatever the settings;
    ``tests/render/test_live.py`` runs it through a virtual sound card.
    """
    from ..render.stream import run_live as _run

    return _run(
        setup.processor,
        setup.rate_hz,
        device=setup.device,
        input_channels=setup.input_channels,
        output_channels=setup.output_channels,
        duration_s=duration_s,
        on_meter=on_meter,
        stop_event=stop_event,
    )


#: Preview: the first seconds of the dry file, played this far below the render's own level
#: (common practice: start quiet and let the listener raise the volume).
PREVIEW_S, PREVIEW_ATTENUATION_DB = 10.0, -12.0


def preview(
    dry,
    ir,
    settings: RenderSettings,
    *,
    confirm: Callable[[], None],
    seconds: float = PREVIEW_S,
    device=None,
    play: Callable | None = None,
) -> safety.PlayResult:
    """Render the first ``seconds`` of ``dry`` through ``ir`` and play them through
    :func:`roomconv.safety.safe_play` (attenuated, ramped, limited, capped). ``confirm``
    shows the hearing caution and raises to refuse; it runs before any sound. A device that
    cannot play (none, busy, no PortAudio) is reported in the result's ``message``, not
    raised. ``play(samples, rate)`` replaces the sound card (tests).

    Examples
    --------
    Not run here: it plays sound. ``confirm`` shows the hearing caution and raises to
    refuse; nothing is played before it returns::

        result = preview("vocal.wav", "hall.wav", RenderSettings(mix=0.3),
                         confirm=ask_after_showing_the_caution)
        result.message    # None, or why the device could not play
    """
    x, rate = read_audio(dry, what="dry file")
    h, ir_rate = read_audio(
        ir, what="impulse response", measurement=settings.ir_measurement, single=True
    )
    y = offline.render_arrays(x[: int(seconds * rate)], h, rate, settings.check(), ir_rate=ir_rate)

    def card(samples, rate_hz):
        from ..measure.capture import load_sounddevice

        load_sounddevice().play(samples, rate_hz, blocking=True, device=device)

    return safety.safe_play(
        y, rate, confirm=confirm, play=play or card, attenuation_db=PREVIEW_ATTENUATION_DB
    )
