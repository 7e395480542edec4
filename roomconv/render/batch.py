"""Many dry files × many IRs: a batch written against ``concurrent.futures.Executor``, so a
local process pool and a Dask cluster run the very same code.

Each job writes one output (named by the caller) and a provenance sidecar holding the inputs' hashes, the
settings and the output's frame count and SHA-256; a later run skips a job only when its
sidecar matches and the output still has those frames and that hash (resume), and renders
again a job whose output is damaged or whose sidecar is missing.

Interrupts: on Ctrl-C, SIGTERM or SIGHUP the queued jobs are cancelled and the running
workers are stopped at once (each removes its unfinished files). A worker whose parent dies
outright (SIGKILL) notices within a fraction of a second and exits the same way.
"""

from __future__ import annotations

import dataclasses
import os
import queue as queue_mod
import signal
import threading
import time
import traceback
from concurrent.futures import Executor, Future
from dataclasses import dataclass, field
from pathlib import Path
from typing import Callable

from ..audio import (WriteGuard, check_input_file, drop_live_temps, file_sha256, output_record,
                     read_json, sidecar_path)
from ..errors import InputError, RoomconvError
from .offline import RenderSettings, render_file


@dataclass(frozen=True)
class Job:
    dry: str
    ir: str
    output: str
    settings: dict
    provenance: dict  #: the sidecar this job writes (and a finished job must match)
    problem: str = ""  #: why an input cannot be used (the job then fails with this message)
    replace: bool = False  #: the output exists and this run has decided to render it again

    @property
    def name(self) -> str:
        return Path(self.output).name


@dataclass
class Outcome:
    job: Job
    status: str                    #: done | skipped | failed
    message: str = ""
    exit_code: int = 0
    report: dict = field(default_factory=dict)


def plan_jobs(drys, irs, out_dir, settings: RenderSettings,
              guard: WriteGuard | None = None, *,
              output_name: Callable[[Path, Path], str]) -> list[Job]:
    """One job per (dry, IR) pair; inputs are checked and hashed once here, not once per job.

    ``output_name(dry, ir)`` names each output (the job layer owns naming:
    :func:`roomconv.jobs.naming.render_output_name`).

    With ``guard`` (which knows every input of the batch), each output and its sidecar are
    planned against all inputs and against each other, so a batch whose outputs would land on
    its own inputs is refused before any work.
    """
    out_dir = Path(out_dir)
    hashes, problems = {}, {}
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
            out = out_dir / output_name(d, i)
            if out in seen:
                raise InputError(f"two jobs would both write {out.name}: rename one of the "
                                 f"inputs ({d.name}, {i.name})")
            seen.add(out)
            if guard is not None:
                guard.file(out, exists_ok=True)
                guard.file(sidecar_path(out, "provenance"), exists_ok=True)
            prov = {"roomconv_version": __version__,
                    "inputs": [{"file": str(d), "sha256": hashes[d]},
                               {"file": str(i), "sha256": hashes[i]}],
                    "settings": settings.as_dict()}
            problem = problems.get(d) or problems.get(i) or ""
            jobs.append(Job(str(d), str(i), str(out), settings.as_dict(), prov, problem))
    return jobs


def check_finished(job: Job) -> tuple[str, str]:
    """Where a job stands: ``("finished", "")``, ``("damaged", why)`` for our own output that
    no longer matches its sidecar, ``("orphan", why)`` for an output without a sidecar,
    ``("foreign", why)`` for an output made with other inputs or settings, or ``("new", "")``.
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
    if (old.get("inputs") != job.provenance["inputs"]
            or old.get("settings") != job.provenance["settings"]):
        return "foreign", "the output was made with other inputs or settings"
    rec = old.get("output")
    if not isinstance(rec, dict) or "sha256" not in rec:
        return "damaged", "the output's sidecar recorded no hash"
    try:
        now = output_record(out)
    except OSError as exc:
        return "damaged", f"the output could not be read ({exc.strerror})"
    if now.get("frames") != rec.get("frames"):
        return "damaged", (f"the output held {now.get('frames')} frames, its sidecar "
                           f"says {rec.get('frames')}")
    if now["sha256"] != rec["sha256"]:
        return "damaged", "the output differed from the hash in its sidecar"
    return "finished", ""


def is_finished(job: Job) -> bool:
    return check_finished(job)[0] == "finished"


# --- worker side ---------------------------------------------------------------------------
_WORKER: dict = {"progress": None, "busy": False}


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
    """Render one job (in a worker); returns a small dict. ``progress`` has ``put(item)``."""
    progress = progress if progress is not None else _WORKER["progress"]

    def tick(frac):
        if progress is not None:
            try:
                progress.put((job.name, float(frac)))
            except Exception:  # progress is best effort; the render is not
                pass
    _WORKER["busy"] = True
    try:
        if job.problem:
            raise InputError(job.problem)
        settings = RenderSettings(**job.settings)
        # The parent has planned this output against every input of the batch and decided
        # whether an existing one is replaced. One FFT thread per job: jobs run side by side.
        guard = WriteGuard([job.dry, job.ir], force=job.replace)
        rep = render_file(job.dry, job.ir, job.output, settings, force=True, progress=tick,
                          workers=1, guard=guard)
        # The sidecar comes last: it vouches for the output's frames and hash.
        guard.write_json(sidecar_path(job.output, "provenance"),
                         {**job.provenance, "output": output_record(job.output)})
        return {"ok": True, "peak_dbfs": rep.peak_dbfs, "seconds": rep.frames / rep.rate,
                "warnings": rep.warnings}
    except _Stop as stop:
        drop_live_temps()
        os._exit(128 + int(stop.args[0]) if stop.args else 143)
    except RoomconvError as exc:
        return {"ok": False, "error": str(exc), "exit_code": exc.exit_code}
    except Exception as exc:  # noqa: BLE001 - isolate one job's failure from the rest
        return {"ok": False, "error": f"internal error: {type(exc).__name__}: {exc}",
                "exit_code": 1, "trace": traceback.format_exc()}
    finally:
        _WORKER["busy"] = False


# --- parent side ---------------------------------------------------------------------------
def run_batch(jobs: list[Job], executor: Executor, *, force: bool = False, progress=None,
              on_event: Callable[[str, object], None] | None = None,
              poll_s: float = 0.1, before_first=None) -> list[Outcome]:
    """Submit every unfinished job to ``executor`` and collect the outcomes.

    ``progress`` is a queue-like object shared with the workers (``put``/``get``) for per-job
    fractions; ``on_event(kind, payload)`` receives 'skip', 'start', 'progress' (name,
    fraction) and 'done' (Outcome) events for a display. ``before_first()`` runs once before
    the first job is submitted (the CLI creates the output folder there). On an interrupt
    (KeyboardInterrupt, which SIGTERM/SIGHUP also raise in the CLI) the queued jobs are
    cancelled and the workers stopped before the interrupt goes on.
    """
    emit = on_event or (lambda *_: None)
    outcomes: list[Outcome] = []
    futures: dict[Future, Job] = {}
    job_progress = None if getattr(executor, "_roomconv_local", False) else progress
    redo: dict[str, str] = {}
    try:
        for job in jobs:
            state, why = check_finished(job)
            if state == "finished":
                outcomes.append(Outcome(job, "skipped", "finished earlier (output and sidecar "
                                        "verified)"))
                emit("skip", outcomes[-1])
                continue
            if state == "foreign" and not force:
                outcomes.append(Outcome(job, "failed", f"{job.output} exists with other "
                                        "inputs or settings (replace it only on purpose)", 2))
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
                    o = Outcome(job, "failed", res.get("error", "unknown error"),
                                res.get("exit_code", 1), res)
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
    """Cancel every queued job and stop running workers now (they remove their unfinished
    files on SIGTERM); a worker that does not stop within a few seconds is killed."""
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
        try:
            p.terminate()
        except (OSError, ValueError, AttributeError):
            pass
    deadline = time.monotonic() + 5.0
    for p in procs:
        try:
            p.join(max(0.0, deadline - time.monotonic()))
            if p.is_alive():
                p.kill()
                p.join(1.0)
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
    """
    import multiprocessing as mp
    from concurrent.futures import ProcessPoolExecutor
    ctx = mp.get_context("spawn")
    q = ctx.Queue()
    pool = ProcessPoolExecutor(max_workers=workers, mp_context=ctx, initializer=_worker_init,
                               initargs=(os.getpid(), q))
    pool._roomconv_local = True
    return pool, q, q


class ClusterProgress:
    """Per-job progress from Dask workers: a named ``distributed.Queue`` behind the same
    ``put`` / ``get_nowait`` as the local pool's manager queue.

    Only the queue's name travels with a job; each side opens the queue when it first
    uses it (a pickled Queue would be opened by the scheduler as it unpacks the task, and a
    LocalCluster's in-process scheduler then waits on itself). A render reports once per
    engine block (a few seconds of audio or more): a handful of round trips per job.
    """

    def __init__(self, client=None, name: str | None = None):
        import uuid  # noqa: PLC0415
        self.name = name or f"roomconv-progress-{uuid.uuid4().hex}"
        self._client = client
        self._queue = None

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
        self._open().put(item)

    def get_nowait(self):
        q = self._open()
        if q.qsize() == 0:
            raise queue_mod.Empty
        try:
            return q.get(timeout=1)
        except TimeoutError:
            raise queue_mod.Empty from None


def dask_executor(address: str):
    """An executor on a Dask distributed scheduler, with a :class:`ClusterProgress`."""
    try:
        from distributed import Client  # noqa: PLC0415 - optional extra
    except ImportError:
        raise InputError("a Dask cluster needs the optional Dask extra: pip install "
                         "'roomconv[cluster]'") from None
    try:
        client = Client(address, timeout="10s")
    except (OSError, TimeoutError) as exc:
        raise InputError(f"cannot reach the Dask scheduler at {address}: {exc}") from None
    return client.get_executor(), ClusterProgress(client), client
