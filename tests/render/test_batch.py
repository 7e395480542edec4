"""``roomconv batch``: outputs, resume, failure isolation, and the Dask path on a local
cluster (loopback only)."""

import json
import time

import numpy as np
import pytest
import soundfile as sf
from scipy.signal import fftconvolve

FS = 16000


@pytest.fixture
def inputs(tmp_path):
    rng = np.random.default_rng(0)
    for i in range(2):
        sf.write(tmp_path / f"take{i}.wav", 0.1 * rng.standard_normal(FS), FS, subtype="DOUBLE")
    for i in range(2):
        t = np.arange(int(0.2 * FS)) / FS
        sf.write(
            tmp_path / f"room{i}.wav",
            rng.standard_normal(t.size) * np.exp(-30 * t) * 0.1,
            FS,
            subtype="DOUBLE",
        )
    bad = np.zeros(100)
    bad[3] = np.nan
    sf.write(tmp_path / "broken.wav", bad, FS, subtype="FLOAT")
    return tmp_path


def test_batch_renders_every_pair_with_provenance_and_resumes(inputs, cli):
    out = inputs / "wet"
    args = [
        "batch",
        inputs / "take0.wav",
        inputs / "take1.wav",
        "--ir",
        inputs / "room0.wav",
        inputs / "room1.wav",
        "--out-dir",
        out,
        "--workers",
        2,
        "--subtype",
        "DOUBLE",
        "--keep-ir-level",
    ]
    code, text, err = cli(*args)
    assert code == 0, err
    assert "4 rendered" in text
    y, _ = sf.read(out / "take1__room0.wav")
    d, _ = sf.read(inputs / "take1.wav")
    h, _ = sf.read(inputs / "room0.wav")
    assert np.allclose(y, fftconvolve(d, h))
    prov = json.loads((out / "take1__room0.provenance.json").read_text())
    assert [i["file"] for i in prov["inputs"]] == [
        str(inputs / "take1.wav"),
        str(inputs / "room0.wav"),
    ]
    stamp = (out / "take1__room0.wav").stat().st_mtime_ns
    code, text, err = cli(*args)
    assert code == 0 and "0 rendered, 4 already finished" in text
    assert (out / "take1__room0.wav").stat().st_mtime_ns == stamp
    # Changed settings: the finished outputs no longer match and need --force.
    code, text, err = cli(*args, "--gain", "-6")
    assert code == 2 and "exists with other inputs or settings" in err
    code, text, err = cli(*args, "--gain", "-6", "--force")
    assert code == 0 and "4 rendered" in text


def test_one_bad_input_is_reported_and_the_rest_finish(inputs, cli):
    out = inputs / "wet"
    code, text, err = cli(
        "batch",
        inputs / "take0.wav",
        "--ir",
        inputs / "room0.wav",
        inputs / "broken.wav",
        "--out-dir",
        out,
        "--workers",
        1,
    )
    assert code == 2
    assert "1 rendered" in text and "1 failed" in text
    assert "broken.wav" in err and "NaN" in err
    assert (out / "take0__room0.wav").exists()
    assert not (out / "take0__broken.wav").exists()
    assert not list(out.glob(".rc-*.tmp"))


def test_local_pool_progress_arrives_and_an_interrupt_stops_the_pool(inputs):
    # Library level: the first per-job progress event from a worker raises KeyboardInterrupt
    # in the parent; run_batch must cancel the queue and stop the worker processes.
    from roomconv.render.batch import local_executor, plan_jobs, run_batch
    from roomconv.render.offline import RenderSettings

    rng = np.random.default_rng(3)
    for k in range(3):
        sf.write(inputs / f"long{k}.wav", 0.1 * rng.standard_normal(30 * FS), FS)
    out = inputs / "stopped"
    out.mkdir()
    from roomconv.jobs.naming import render_output_name

    jobs = plan_jobs(
        [inputs / f"long{k}.wav" for k in range(3)],
        [inputs / "room0.wav"],
        out,
        RenderSettings(normalize="loudness"),
        output_name=render_output_name,
    )
    executor, progress, owner = local_executor(1)
    procs = []

    def on_event(kind, payload):
        if kind == "progress":
            procs.extend(executor._processes.values())
            raise KeyboardInterrupt

    with pytest.raises(KeyboardInterrupt):
        run_batch(jobs, executor, progress=progress, on_event=on_event, poll_s=0.01)
    owner.close()
    # Stopped: terminated, or killed after the grace period. On a loaded 2-core machine the
    # killed process may take a moment more to be reaped, so allow it some seconds.
    deadline = time.monotonic() + 20.0
    while any(p.is_alive() for p in procs) and time.monotonic() < deadline:
        time.sleep(0.1)
    assert procs and not any(p.is_alive() for p in procs)
    assert len(list(out.glob("*.wav"))) < 3
    assert not list(out.glob(".rc-*.tmp"))


@pytest.mark.timeout(180)
def test_dask_local_cluster_runs_the_same_code_path(inputs, cli):
    distributed = pytest.importorskip("distributed")
    with distributed.LocalCluster(
        n_workers=1, threads_per_worker=1, processes=True, host="127.0.0.1", dashboard_address=None
    ) as cluster:
        code, text, err = cli(
            "batch",
            inputs / "take0.wav",
            inputs / "take1.wav",
            "--ir",
            inputs / "room1.wav",
            "--out-dir",
            inputs / "dask",
            "--scheduler",
            cluster.scheduler_address,
            "--subtype",
            "DOUBLE",
            "--keep-ir-level",
        )
    assert code == 0, err
    assert "2 rendered" in text
    y, _ = sf.read(inputs / "dask" / "take0__room1.wav")
    d, _ = sf.read(inputs / "take0.wav")
    h, _ = sf.read(inputs / "room1.wav")
    assert np.allclose(y, fftconvolve(d, h))


@pytest.mark.timeout(180)
def test_dask_workers_report_per_job_progress(inputs):
    # The cluster path reports fractions while a job renders, as the local pool does.
    distributed = pytest.importorskip("distributed")
    from roomconv.render.batch import dask_executor, plan_jobs, run_batch
    from roomconv.render.offline import RenderSettings

    # A 3 s response keeps the engine's hop short, so each take renders in several blocks.
    rng = np.random.default_rng(9)
    sf.write(inputs / "long_room.wav", 0.01 * rng.standard_normal(3 * 48000), 48000)
    sf.write(inputs / "long_take.wav", 0.1 * rng.standard_normal(40 * 48000), 48000)
    (inputs / "dask_progress").mkdir()
    from roomconv.jobs.naming import render_output_name

    jobs = plan_jobs(
        [inputs / "long_take.wav"],
        [inputs / "long_room.wav"],
        inputs / "dask_progress",
        RenderSettings(),
        output_name=render_output_name,
    )
    events = []
    with distributed.LocalCluster(
        n_workers=1, threads_per_worker=1, processes=True, host="127.0.0.1", dashboard_address=None
    ) as cluster:
        executor, progress, client = dask_executor(cluster.scheduler_address)
        try:
            outcomes = run_batch(
                jobs,
                executor,
                progress=progress,
                on_event=lambda kind, payload: events.append((kind, payload)),
            )
        finally:
            client.close()
    assert [o.status for o in outcomes] == ["done"], [o.message for o in outcomes]
    fractions = [p[1] for kind, p in events if kind == "progress"]
    assert len(fractions) >= 3 and fractions == sorted(fractions) and fractions[-1] == 1.0
    assert all(p[0] == jobs[0].name for kind, p in events if kind == "progress")


def test_unreachable_scheduler_is_a_clear_error(inputs, cli):
    pytest.importorskip("distributed")
    code, _, err = cli(
        "batch",
        inputs / "take0.wav",
        "--ir",
        inputs / "room0.wav",
        "--out-dir",
        inputs / "x",
        "--scheduler",
        "tcp://127.0.0.1:9",
    )
    assert code == 2 and "cannot reach the Dask scheduler" in err
