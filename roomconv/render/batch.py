"""Many dry files × many IRs: a batch written against ``concurrent.futures.Executor``, so a
local process pool and a Dask cluster run the very same code.

Each job writes ``<dry>__<ir>.wav`` and a provenance sidecar holding the inputs' hashes, the
settings and the output's frame count and SHA-256; a later run skips a job only when its
sidecar matches and the output still has those frames and that hash (resume), and renders
again a job whose output is damaged or whose sidecar is missing.

Interrupts: on Ctrl-C, SIGTERM or SIGHUP the queued jobs are cancelled and the running
workers are stopped at once (each removes its unfinished files). A worker whose parent dies
outright (SIGKILL) notices within a fraction of a second and exits the same way.
"""

from __future__ import annotations

import contextlib
import dataclasses
import os
import queue as queue_mod
import signal
import threading
import time
import traceback
import weakref
from collections.abc import Callable
from concurrent.futures import Executor, Future
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from ..audio import (
    WriteGuard,
    check_input_file,
    drop_live_temps,
    file_sha256,
    output_record,
    read_json,
    sidecar_path,
)
from ..errors import InputError, RoomconvError
from .offline import RenderSettings, render_file

__all__ = [
    "Job",
    "Outcome",
    "plan_jobs",
    "check_finished",
    "is_finished",
    "run_job",
    "run_batch",
    "stop_executor",
    "local_executor",
    "ClusterProgress",
    "dask_executor",
]


@dataclass(frozen=True)
class Job:
    """One render of a batch: a dry file through a response into an output, with its sidecar.

    Attributes
    ----------
    dry, ir, output : str
        Paths.
    settings : dict
        :meth:`RenderSettings.as_dict` of the render.
    provenance : dict
        The sidecar this job writes (a finished job's sidecar must match it).
    problem : str
        Why an input cannot be used; the job then fails with this message.
    replace : bool
        The output exists and this run has decided to render it again.

    Examples
    --------
    >>> Job("a.wav", "hall.wav", "out/a__hall.wav", {}, {}).name
    'a__hall.wav'
    """

    dry: str
    ir: str
    output: str
    settings: dict
    provenance: dict  #: the sidecar this job writes (and a finished job must match)
    problem: str = ""  #: why an input cannot be used (the job then fails with this message)
    replace: bool = False  #: the output exists and this run has decided to render it again

    @property
    def name(self) -> str:
        """The output's file name (what progress and messages show)."""
        return Path(self.output).name


@dataclass
class Outcome:
    """What became of one :class:`Job`.

    Attributes
    ----------
    job : Job
    status : str
        ``"done"``, ``"skipped"`` or ``"failed"``.
    message : str
        Why it was skipped or failed.
    exit_code : int
        0, or the exit code the failure maps to (2 bad input, 1 other).
    report : dict
        ``peak_dbfs`` (dBFS), ``seconds`` (s) and ``warnings`` of a done job.

    Examples
    --------
    >>> Outcome(Job("a.wav", "h.wav", "a__h.wav", {}, {}), "done").exit_code
    0
    """

    job: Job
    status: str  #: done | skipped | failed
    message: str = ""
    exit_code: int = 0
    report: dict = field(default_factory=dict)


def plan_jobs(
    drys,
    irs,
    out_dir,
    settings: RenderSettings,
    guard: WriteGuard | None = None,
    *,
    output_name: Callable[[Path, Path], str] | None = None,
) -> list[Job]:
    """One job per (dry, response) pair; inputs are checked and hashed once here.

    ``output_name(dry, ir)`` names each output; the job layer passes its one naming
    function (:func:`roomconv.jobs.naming.render_output_name`). Without it the outputs are
    ``<dry stem>__<ir stem>.wav``, the same rule, for library callers.

    With ``guard`` (which knows every input of the batch), each output and its sidecar are
    planned against all inputs and against each other, so a batch whose outputs would land on
    its own inputs is refused before any work.

    Parameters
    ----------
    drys, irs : iterable of path
        Dry files and impulse responses.
    out_dir : str or Path
        Folder of the outputs ``<dry stem>__<ir stem>.wav``.
    settings : RenderSettings
    guard : WriteGuard, optional

    Returns
    -------
    list of Job
        In order: every response for the first dry file, then the next.

    Raises
    ------
    InputError
        When two jobs would write one output, or an output clashes with an input.

    Examples
    --------
    >>> import tempfile, pathlib, numpy as np, soundfile
    >>> tmp = tempfile.TemporaryDirectory()
    >>> d = pathlib.Path(tmp.name)
    >>> soundfile.write(d / "voice.wav", np.array([0.5, 0.0]), 48000, subtype="DOUBLE")
    >>> soundfile.write(d / "hall.wav", np.array([1.0, 0.5]), 48000, subtype="DOUBLE")
    >>> jobs = plan_jobs([d / "voice.wav"], [d / "hall.wav"], d / "wet", RenderSettings())
    >>> [j.name for j in jobs]
    ['voice__hall.wav']
    >>> tmp.cleanup()
    """
    out_dir = Path(out_dir)
    hashes: dict[Path, str | None] = {}
    problems: dict[Path, str] = {}
    for p in list(drys) + list(irs):
        p = Path(p)
        if p in hashes:
            continue
        try:
            # Refuse pipes and devices before opening them: hashing a FIFO would block.
            check_input_file(p, "dry file" if p in map(Path, drys) else "impulse response")
            hashes[p] = file_sha256(p)
        except InputError as exc:
            hashes[p], problems[p] = None, str(exc)
    jobs, seen = [], set()
    from .. import __version__

    for d in drys:
        for i in irs:
            d, i = Path(d), Path(i)
            out = out_dir / (output_name(d, i) if output_name else f"{d.stem}__{i.stem}.wav")
            if out in seen:
                raise InputError(
                    f"two jobs would both write {out.name}: rename one of the "
                    f"inputs ({d.name}, {i.name})"
                )
            seen.add(out)
            if guard is not None:
                guard.file(out, exists_ok=True)
                guard.file(sidecar_path(out, "provenance"), exists_ok=True)
            prov = {
                "roomconv_version": __version__,
                "inputs": [
                    {"file": str(d), "sha256": hashes[d]},
                    {"file": str(i), "sha256": hashes[i]},
                ],
                "settings": settings.as_dict(),
            }
            problem = problems.get(d) or problems.get(i) or ""
            jobs.append(Job(str(d), str(i), str(out), settings.as_dict(), prov, problem))
    return jobs


def check_finished(job: Job) -> tuple[str, str]:
    """Where a job stands, from its output and sidecar.

    Parameters
    ----------
    job : Job

    Returns
    -------
    state : str
        ``"finished"``, ``"damaged"`` (our own output that no longer matches its sidecar),
        ``"orphan"`` (an output without a usable sidecar), ``"foreign"`` (made with other
        inputs or settings) or ``"new"``.
    why : str
        A reason to show, empty for ``"finished"`` and ``"new"``.

    Examples
    --------
    >>> check_finished(Job("a.wav", "h.wav", "/nonexistent/a__h.wav", {}, {}))
    ('new', '')
    """
    out = Path(job.output)
    side = sidecar_path(out, "provenance")
    if not out.exists():
        return "new", ""
    if not side.exists():
        return "orphan", "the output had no sidecar"
    try:
        old = read_json(side)
    except InputError:
        return "orphan", "the output's sidecar was unreadable"
    if not isinstance(old, dict):
        return "orphan", "the output's sidecar was malformed"
    if (
        old.get("inputs") != job.provenance["inputs"]
        or old.get("settings") != job.provenance["settings"]
    ):
        return "foreign", "the output was made with other inputs or settings"
    rec = old.get("output")
    if not isinstance(rec, dict) or "sha256" not in rec:
        return "damaged", "the output's sidecar recorded no hash"
    try:
        now = output_record(out)
    except OSError as exc:
        return "damaged", f"the output could not be read ({exc.strerror})"
    if now.get("frames") != rec.get("frames"):
        return "damaged", (
            f"the output held {now.get('frames')} frames, its sidecar says {rec.get('frames')}"
        )
    if now["sha256"] != rec["sha256"]:
        return "damaged", "the output differed from the hash in its sidecar"
    return "finished", ""


def is_finished(job: Job) -> bool:
    """Whether :func:`check_finished` vouches for the job's output.

    Parameters
    ----------
    job : Job

    Returns
    -------
    bool

    Examples
    --------
    >>> is_finished(Job("a.wav", "h.wav", "/nonexistent/a__h.wav", {}, {}))
    False
    """
    return check_finished(job)[0] == "finished"


# --- worker side ---------------------------------------------------------------------------
_WORKER: dict = {"progress": None, "busy": False}
#: Pools made by :func:`local_executor`: their workers get progress through the initializer.
_LOCAL_POOLS: weakref.WeakSet = weakref.WeakSet()


class _Stop(BaseException):
    """Raised in a worker by SIGTERM/SIGHUP: unwind (removing unfinished files), then exit."""


def _worker_signal(signum, _frame):
    if not _WORKER["busy"]:
        os._exit(128 + signum)
    raise _Stop(signum)


def _watch_parent(parent_pid: int) -> None:
    while os.getppid() == parent_pid:
        time.sleep(0.2)
    # The parent is gone: stop like on SIGTERM, and make sure not to linger either way.
    if _WORKER["busy"]:
        os.kill(os.getpid(), signal.SIGTERM)
        time.sleep(10)
    os._exit(1)


def _worker_init(parent_pid: int, progress) -> None:
    """Initializer of a local worker process."""
    _WORKER["progress"] = progress
    signal.signal(signal.SIGINT, signal.SIG_IGN)  # the parent decides what Ctrl-C does
    signal.signal(signal.SIGTERM, _worker_signal)
    if hasattr(signal, "SIGHUP"):
        signal.signal(signal.SIGHUP, _worker_signal)
    threading.Thread(target=_watch_parent, args=(parent_pid,), daemon=True).start()


def run_job(job: Job, progress=None) -> dict:
    """Render one job (normally in a worker process) and write its sidecar last.

    Parameters
    ----------
    job : Job
    progress : object with ``put(item)``, optional
        Receives ``(job.name, fraction)``; a pool worker's own queue by default.

    Returns
    -------
    dict
        ``{"ok": True, "peak_dbfs", "seconds", "warnings"}`` or
        ``{"ok": False, "error", "exit_code"}``; a failure never raises.

    Examples
    --------
    >>> import tempfile, pathlib, numpy as np, soundfile
    >>> tmp = tempfile.TemporaryDirectory()
    >>> d = pathlib.Path(tmp.name)
    >>> soundfile.write(d / "voice.wav", np.array([0.5, 0.0]), 48000, subtype="DOUBLE")
    >>> soundfile.write(d / "hall.wav", np.array([1.0, 0.5]), 48000, subtype="DOUBLE")
    >>> job = plan_jobs([d / "voice.wav"], [d / "hall.wav"], d, RenderSettings())[0]
    >>> run_job(job)["ok"], is_finished(job)
    (True, True)
    >>> tmp.cleanup()
    """
    progress = progress if progress is not None else _WORKER["progress"]

    def tick(frac):
        if progress is not None:
            # Progress is best effort; the render is not.
            with contextlib.suppress(Exception):
                progress.put((job.name, float(frac)))

    _WORKER["busy"] = True
    try:
        if job.problem:
            raise InputError(job.problem)
        settings = RenderSettings(**job.settings)
        # The parent has planned this output against every input of the batch and decided
        # whether an existing one is replaced. One FFT thread per job: jobs run side by side.
        guard = WriteGuard([job.dry, job.ir], force=job.replace)
        rep = render_file(
            job.dry, job.ir, job.output, settings, force=True, progress=tick, workers=1, guard=guard
        )
        # The sidecar comes last: it vouches for the output's frames and hash.
        guard.write_json(
            sidecar_path(job.output, "provenance"),
            {**job.provenance, "output": output_record(job.output)},
        )
        return {
            "ok": True,
            "peak_dbfs": rep.peak_dbfs,
            "seconds": rep.frames / rep.rate,
            "warnings": rep.warnings,
        }
    except _Stop as stop:
        drop_live_temps()
        os._exit(128 + int(stop.args[0]) if stop.args else 143)
    except RoomconvError as exc:
        return {"ok": False, "error": str(exc), "exit_code": exc.exit_code}
    except Exception as exc:  # noqa: BLE001 - isolate one job's failure from the rest
        return {
            "ok": False,
            "error": f"internal error: {type(exc).__name__}: {exc}",
            "exit_code": 1,
            "trace": traceback.format_exc(),
        }
    finally:
        _WORKER["busy"] = False


# --- parent side ---------------------------------------------------------------------------
def run_batch(
    jobs: list[Job],
    executor: Executor,
    *,
    force: bool = False,
    progress=None,
    on_event: Callable[[str, object], None] | None = None,
    poll_s: float = 0.1,
    before_first=None,
) -> list[Outcome]:
    """Submit every unfinished job to ``executor`` and collect the outcomes.

    ``on_event(kind, payload)`` receives 'skip', 'start', 'progress' (name, fraction) and
    'done' (Outcome) events for a display. On an interrupt (KeyboardInterrupt, which
    SIGTERM/SIGHUP also raise in the CLI) the queued jobs are cancelled and the workers stopped
    before the interrupt goes on.

    Parameters
    ----------
    jobs : list of Job
        From :func:`plan_jobs`.
    executor : concurrent.futures.Executor
        :func:`local_executor`'s pool, a Dask executor, or any executor.
    force : bool
        Replace outputs made with other inputs or settings.
    progress : queue-like, optional
        Shared with the workers (``put`` / ``get_nowait``) for per-job fractions.
    on_event : callable, optional
    poll_s : float
        Interval at which progress is drained and finished jobs collected, s.
    before_first : callable, optional
        Runs once before the first job is submitted (e.g. to create the output folder).

    Returns
    -------
    list of Outcome
        Skipped jobs first, then the others in the order they finished.

    Examples
    --------
    >>> import tempfile, pathlib, numpy as np, soundfile
    >>> tmp = tempfile.TemporaryDirectory()
    >>> d = pathlib.Path(tmp.name)
    >>> soundfile.write(d / "voice.wav", np.array([0.5, 0.0]), 48000, subtype="DOUBLE")
    >>> soundfile.write(d / "hall.wav", np.array([1.0, 0.5]), 48000, subtype="DOUBLE")
    >>> from concurrent.futures import ThreadPoolExecutor
    >>> jobs = plan_jobs([d / "voice.wav"], [d / "hall.wav"], d, RenderSettings())
    >>> with ThreadPoolExecutor(1) as pool:
    ...     [o.status for o in run_batch(jobs, pool)]
    ['done']
    >>> with ThreadPoolExecutor(1) as pool:  # a second run verifies and skips
    ...     [o.status for o in run_batch(jobs, pool)]
    ['skipped']
    >>> tmp.cleanup()
    """
    emit = on_event or (lambda *_: None)
    outcomes: list[Outcome] = []
    futures: dict[Future, Job] = {}
    job_progress = None if executor in _LOCAL_POOLS else progress
    redo: dict[str, str] = {}
    try:
        for job in jobs:
            state, why = check_finished(job)
            if state == "finished":
                outcomes.append(
                    Outcome(job, "skipped", "finished earlier (output and sidecar verified)")
                )
                emit("skip", outcomes[-1])
                continue
            if state == "foreign" and not force:
                outcomes.append(
                    Outcome(
                        job,
                        "failed",
                        f"{job.output} exists with other "
                        "inputs or settings (replace it only on purpose)",
                        2,
                    )
                )
                emit("done", outcomes[-1])
                continue
            if job.problem:
                outcomes.append(Outcome(job, "failed", job.problem, 2))
                emit("done", outcomes[-1])
                continue
            if before_first is not None:
                before_first()
                before_first = None
            # A new output is written no-clobber: should another run create it meanwhile,
            # this job fails instead of replacing it.
            # (A sidecar left without its output is this batch's own, and is replaced.)
            stale_side = sidecar_path(job.output, "provenance").exists()
            job = dataclasses.replace(job, replace=state != "new" or stale_side)
            futures[executor.submit(run_job, job, job_progress)] = job
            if state in ("damaged", "orphan", "foreign"):
                redo[job.output] = f"rendered again ({why})"
            emit("start", job)
        pending = set(futures)
        while pending:
            _drain(progress, emit)
            finished = {f for f in pending if f.done()}
            for f in finished:
                job = futures[f]
                try:
                    res = f.result()
                except Exception as exc:  # noqa: BLE001 - a worker died or the cluster failed
                    res = {"ok": False, "error": f"worker failed: {exc}", "exit_code": 1}
                if res.get("ok"):
                    o = Outcome(job, "done", redo.get(job.output, ""), 0, res)
                else:
                    o = Outcome(
                        job,
                        "failed",
                        res.get("error", "unknown error"),
                        res.get("exit_code", 1),
                        res,
                    )
                outcomes.append(o)
                emit("done", o)
            pending -= finished
            if pending:
                time.sleep(poll_s)
        _drain(progress, emit)
    except BaseException:
        stop_executor(executor, futures)
        raise
    return outcomes


def stop_executor(executor: Executor, futures=()) -> None:
    """Cancel every queued job and stop running workers now.

    Workers remove their unfinished files on SIGTERM; one that does not stop within a few
    seconds is killed.

    Parameters
    ----------
    executor : concurrent.futures.Executor
    futures : iterable of Future
        Futures to cancel as well.

    Returns
    -------
    None

    Examples
    --------
    >>> from concurrent.futures import ThreadPoolExecutor
    >>> pool = ThreadPoolExecutor(1)
    >>> stop_executor(pool)
    """
    for f in futures:
        f.cancel()
    procs = list((getattr(executor, "_processes", None) or {}).values())
    try:
        try:
            executor.shutdown(wait=False, cancel_futures=True)
        except TypeError:  # Dask's executor has no cancel_futures; its futures are cancelled
            executor.shutdown(wait=False)
    except Exception:  # noqa: BLE001 - stopping must go on whatever the executor says
        pass
    for p in procs:
        with contextlib.suppress(OSError, ValueError, AttributeError):
            p.terminate()
    deadline = time.monotonic() + 5.0
    for p in procs:
        try:
            p.join(max(0.0, deadline - time.monotonic()))
            if p.is_alive():
                p.kill()
                # SIGKILL cannot be ignored, but on a loaded machine the dying process may
                # take more than a moment to be scheduled and reaped.
                p.join(10.0)
        except (OSError, ValueError, AssertionError, AttributeError):
            pass


def _drain(progress, emit) -> None:
    if progress is None:
        return
    for _ in range(1000):
        try:
            item = progress.get_nowait()
        except (queue_mod.Empty, EOFError, OSError):
            return
        emit("progress", item)


def local_executor(workers: int | None):
    """A process pool whose workers stop with their parent, and a queue for progress.

    The queue reaches the workers through the pool's initializer rather than with each job,
    so no manager process is needed (one that could outlive a killed parent).

    Parameters
    ----------
    workers : int, optional
        Worker processes (default: one per core).

    Returns
    -------
    pool : ProcessPoolExecutor
    progress : multiprocessing.Queue
        Pass it to :func:`run_batch` as ``progress``.
    closer : multiprocessing.Queue
        The same queue, to close when the batch ends.

    Examples
    --------
    >>> pool, progress, _ = local_executor(2)  # doctest: +SKIP
    >>> outcomes = run_batch(jobs, pool, progress=progress)  # doctest: +SKIP
    """
    import multiprocessing as mp
    from concurrent.futures import ProcessPoolExecutor

    ctx = mp.get_context("spawn")
    q = ctx.Queue()
    pool = ProcessPoolExecutor(
        max_workers=workers, mp_context=ctx, initializer=_worker_init, initargs=(os.getpid(), q)
    )
    _LOCAL_POOLS.add(pool)
    return pool, q, q


class ClusterProgress:
    """Per-job progress from Dask workers: a named ``distributed.Queue`` behind the same
    ``put`` / ``get_nowait`` as the local pool's queue.

    Only the queue's name travels with a job; each side opens the queue when it first
    uses it (a pickled Queue would be opened by the scheduler as it unpacks the task, and a
    LocalCluster's in-process scheduler then waits on itself). A render reports once per
    engine block (a few seconds of audio or more): a handful of round trips per job.

    Parameters
    ----------
    client : distributed.Client, optional
    name : str, optional
        Queue name (a unique one by default).

    Examples
    --------
    >>> import pickle
    >>> p = ClusterProgress(name="demo-progress")
    >>> pickle.loads(pickle.dumps(p)).name  # only the name travels
    'demo-progress'
    """

    def __init__(self, client=None, name: str | None = None):
        import uuid  # noqa: PLC0415

        self.name = name or f"roomconv-progress-{uuid.uuid4().hex}"
        self._client = client
        self._queue: Any = None

    def __getstate__(self):
        return {"name": self.name}

    def __setstate__(self, state):
        self.name, self._client, self._queue = state["name"], None, None

    def _open(self):
        if self._queue is None:
            from distributed import Queue  # noqa: PLC0415 - optional extra

            self._queue = Queue(self.name, client=self._client)
        return self._queue

    def put(self, item) -> None:
        """Send ``item`` (``(job name, fraction)``) to the parent.

        Parameters
        ----------
        item : tuple

        Examples
        --------
        >>> ClusterProgress(client).put(("a__hall.wav", 0.5))  # doctest: +SKIP
        """
        self._open().put(item)

    def get_nowait(self):
        """The next item, or :class:`queue.Empty` when there is none.

        Returns
        -------
        tuple

        Examples
        --------
        >>> ClusterProgress(client).get_nowait()  # doctest: +SKIP
        ('a__hall.wav', 0.5)
        """
        q = self._open()
        if q.qsize() == 0:
            raise queue_mod.Empty
        try:
            return q.get(timeout=1)
        except TimeoutError:
            raise queue_mod.Empty from None


def dask_executor(address: str):
    """An executor on a Dask distributed scheduler, with a :class:`ClusterProgress`.

    Parameters
    ----------
    address : str
        The scheduler's address, e.g. ``"tcp://10.0.0.5:8786"``.

    Returns
    -------
    executor : Executor
    progress : ClusterProgress
    client : distributed.Client
        Close it when the batch ends.

    Raises
    ------
    InputError
        When the optional Dask extra is missing or the scheduler cannot be reached.

    Examples
    --------
    >>> pool, progress, client = dask_executor("tcp://127.0.0.1:8786")  # doctest: +SKIP
    """
    try:
        from distributed import Client  # noqa: PLC0415 - optional extra
    except ImportError:
        raise InputError(
            "a Dask cluster needs the optional Dask extra: pip install 'roomconv[cluster]'"
        ) from None
    try:
        client = Client(address, timeout="10s")
    except (OSError, TimeoutError, ValueError) as exc:
        raise InputError(f"cannot reach the Dask scheduler at {address}: {exc}") from None
    return client.get_executor(), ClusterProgress(client), client
