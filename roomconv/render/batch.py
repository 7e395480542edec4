"""Many dry files × many IRs: a batch written against ``concurrent.futures.Executor``, so a
local process pool and a Dask cluster run the very same code.

Each job writes ``<dry>__<ir>.wav`` and a provenance sidecar holding the inputs' hashes and
the settings; a later run skips any job whose output and sidecar already match (resume).
"""

from __future__ import annotations

import queue as queue_mod
import time
import traceback
from concurrent.futures import Executor, Future
from dataclasses import dataclass, field
from pathlib import Path
from typing import Callable

from ..audio import file_sha256, read_json, sidecar_path, write_json
from ..errors import InputError, RoomconvError
from .offline import RenderSettings, render_file


@dataclass(frozen=True)
class Job:
    dry: str
    ir: str
    output: str
    settings: dict
    provenance: dict  #: the sidecar this job writes (and a finished job must match)

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


def plan_jobs(drys, irs, out_dir, settings: RenderSettings) -> list[Job]:
    """One job per (dry, IR) pair; inputs are hashed once here, not once per job."""
    out_dir = Path(out_dir)
    hashes = {}
    for p in list(drys) + list(irs):
        p = Path(p)
        if p not in hashes:
            hashes[p] = file_sha256(p) if p.is_file() else None
    jobs, seen = [], set()
    from .. import __version__
    for d in drys:
        for i in irs:
            d, i = Path(d), Path(i)
            out = out_dir / f"{d.stem}__{i.stem}.wav"
            if out in seen:
                raise InputError(f"two jobs would both write {out.name}: rename one of the "
                                 f"inputs ({d.name}, {i.name})")
            seen.add(out)
            prov = {"roomconv_version": __version__,
                    "inputs": [{"file": str(d), "sha256": hashes[d]},
                               {"file": str(i), "sha256": hashes[i]}],
                    "settings": settings.as_dict()}
            jobs.append(Job(str(d), str(i), str(out), settings.as_dict(), prov))
    return jobs


def is_finished(job: Job) -> bool:
    out = Path(job.output)
    side = sidecar_path(out, "provenance")
    if not (out.exists() and side.exists()):
        return False
    try:
        old = read_json(side)
    except InputError:
        return False
    return (old.get("inputs") == job.provenance["inputs"]
            and old.get("settings") == job.provenance["settings"])


def run_job(job: Job, progress=None) -> dict:
    """Render one job (in a worker); returns a small dict. ``progress`` has ``put(item)``."""
    def tick(frac):
        if progress is not None:
            try:
                progress.put((job.name, float(frac)))
            except Exception:  # progress is best effort; the render is not
                pass
    try:
        settings = RenderSettings(**job.settings)
        if any(i["sha256"] is None for i in job.provenance["inputs"]):
            missing = [i["file"] for i in job.provenance["inputs"] if i["sha256"] is None]
            raise InputError(f"{missing[0]}: file not found")
        # One FFT thread per job: the pool (or the cluster) already runs jobs side by side.
        rep = render_file(job.dry, job.ir, job.output, settings, force=True, progress=tick,
                          workers=1)
        write_json(sidecar_path(job.output, "provenance"), job.provenance, force=True)
        return {"ok": True, "peak_dbfs": rep.peak_dbfs, "seconds": rep.frames / rep.rate,
                "warnings": rep.warnings}
    except RoomconvError as exc:
        return {"ok": False, "error": str(exc), "exit_code": exc.exit_code}
    except Exception as exc:  # noqa: BLE001 - isolate one job's failure from the rest
        return {"ok": False, "error": f"internal error: {type(exc).__name__}: {exc}",
                "exit_code": 1, "trace": traceback.format_exc()}


def run_batch(jobs: list[Job], executor: Executor, *, force: bool = False, progress=None,
              on_event: Callable[[str, object], None] | None = None,
              poll_s: float = 0.1) -> list[Outcome]:
    """Submit every unfinished job to ``executor`` and collect the outcomes.

    ``progress`` is a queue-like object shared with the workers (``put``/``get``) for per-job
    fractions; ``on_event(kind, payload)`` receives 'skip', 'start', 'progress' (name,
    fraction) and 'done' (Outcome) events for a display.
    """
    emit = on_event or (lambda *_: None)
    outcomes: list[Outcome] = []
    futures: dict[Future, Job] = {}
    for job in jobs:
        if is_finished(job):
            outcomes.append(Outcome(job, "skipped", "finished earlier (sidecar matches)"))
            emit("skip", outcomes[-1])
            continue
        if Path(job.output).exists() and not force:
            outcomes.append(Outcome(job, "failed", f"{job.output} exists with other inputs or "
                                    "settings (pass --force to replace it)", 2))
            emit("done", outcomes[-1])
            continue
        futures[executor.submit(run_job, job, progress)] = job
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
                o = Outcome(job, "done", "", 0, res)
            else:
                o = Outcome(job, "failed", res.get("error", "unknown error"),
                            res.get("exit_code", 1), res)
            outcomes.append(o)
            emit("done", o)
        pending -= finished
        if pending:
            time.sleep(poll_s)
    _drain(progress, emit)
    return outcomes


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
    """A process pool and a manager queue for progress."""
    import multiprocessing as mp
    from concurrent.futures import ProcessPoolExecutor
    ctx = mp.get_context("spawn")
    manager = ctx.Manager()
    return ProcessPoolExecutor(max_workers=workers, mp_context=ctx), manager.Queue(), manager


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
        raise InputError("--scheduler needs the optional Dask extra: pip install "
                         "'roomconv[cluster]'") from None
    try:
        client = Client(address, timeout="10s")
    except (OSError, TimeoutError) as exc:
        raise InputError(f"cannot reach the Dask scheduler at {address}: {exc}") from None
    return client.get_executor(), ClusterProgress(client), client
