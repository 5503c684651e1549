"""The screen on a Dask cluster: a real dask.distributed.LocalCluster of two worker processes
(this machine's two cores) gives byte for byte the files the local engine writes; without Dask
the option stops in one line saying how to install it."""

from __future__ import annotations

import builtins
import os
from pathlib import Path

import pytest

from auditor.screen import DASK_MISSING, run_screen

pytestmark = pytest.mark.slow  # `make check` leaves these out: a real Dask LocalCluster is started

DEMO = Path(__file__).resolve().parent.parent / "demo" / "cycling_commute.csv"
FILES = ("screen.csv", "screen.json", "screen.html")

# make test installs the extra; under CI (as for the browser tests) a missing Dask fails here
# instead of skipping, so that CI never passes without having run a real cluster
if os.environ.get("CI", "").strip().lower() in ("", "0", "false", "no"):
    pytest.importorskip("dask.distributed", reason="install with pip install 'auditor[dask]'"
                        " (make test does)")
else:
    import dask.distributed  # noqa: F401


def _screen(folder: Path, **kw) -> dict[str, bytes]:
    run_screen(DEMO, group="scheme", resamples=300, out=folder, **kw)
    return {name: (folder / name).read_bytes() for name in FILES}


@pytest.fixture(scope="module")
def local_files(tmp_path_factory):
    return _screen(tmp_path_factory.mktemp("local"), jobs=2)


def test_a_local_dask_cluster_writes_the_local_engine_s_files(local_files, tmp_path):
    on_dask = _screen(tmp_path / "dask", jobs=2, engine="dask")
    for name in FILES:
        assert on_dask[name] == local_files[name], name


def test_the_command_line_takes_the_engine_and_streams_the_same_table(local_files, run_cli,
                                                                     tmp_path):
    out = tmp_path / "cli"
    res = run_cli("screen", DEMO, "--group", "scheme", "--boot", "300", "--jobs", "2",
                  "--engine", "dask", "--out", out, "--quiet")
    assert res.code == 0, res.err
    assert (out / "screen.csv").read_bytes() == local_files["screen.csv"]
    assert not (out / "screen.rows.jsonl").exists()  # the spool is gone once the table is whole


def test_a_scheduler_address_is_used_as_given(local_files, tmp_path):
    from dask.distributed import LocalCluster

    with LocalCluster(n_workers=2, threads_per_worker=1, processes=True,
                      dashboard_address=None) as cluster:
        found = _screen(tmp_path / "given", engine="dask", scheduler=cluster.scheduler_address)
    assert found["screen.csv"] == local_files["screen.csv"]


def test_without_dask_the_engine_stops_in_one_line(run_cli, tmp_path, monkeypatch):
    real_import = builtins.__import__

    def no_dask(name, *args, **kwargs):
        if name == "dask" or name.startswith("dask."):
            raise ImportError(f"No module named '{name}'")
        return real_import(name, *args, **kwargs)

    monkeypatch.setattr(builtins, "__import__", no_dask)
    out = tmp_path / "none"
    res = run_cli("screen", DEMO, "--group", "scheme", "--engine", "dask", "--out", out)
    assert res.code == 1, (res.code, res.err)
    assert res.err.count("\n") == 1 and "Traceback" not in res.err, res.err
    assert "pip install 'auditor[dask]'" in res.err and DASK_MISSING in res.err
    assert not out.exists()  # stopped before anything was written


def test_a_scheduler_without_the_dask_engine_is_refused(run_cli, tmp_path):
    res = run_cli("screen", DEMO, "--group", "scheme", "--scheduler", "tcp://127.0.0.1:1",
                  "--out", tmp_path / "x")
    assert res.code == 1 and "give --engine dask too" in res.err, res.err


def test_an_unreachable_scheduler_is_one_line(run_cli, tmp_path):
    res = run_cli("screen", DEMO, "--group", "scheme", "--engine", "dask", "--scheduler",
                  "tcp://127.0.0.1:9", "--out", tmp_path / "y")
    assert res.code == 1 and "no Dask scheduler answered" in res.err, res.err
    assert res.err.count("\n") == 1 and "Traceback" not in res.err
    assert not (tmp_path / "y").exists()  # nothing written before the scheduler answered


def test_a_worker_killed_mid_screen_costs_nothing_but_time(tmp_path):
    # the first finished outcome kills one worker process outright (SIGKILL, no goodbye); the
    # scheduler hands its batches to the other worker (and to the one its nanny restarts) and
    # the files are still byte for byte the local engine's
    import signal

    from dask.distributed import LocalCluster

    killed = []
    with LocalCluster(n_workers=2, threads_per_worker=1, processes=True,
                      dashboard_address=None) as cluster:
        def kill_one(done, total, column):
            if not killed:
                nanny = next(iter(cluster.workers.values()))
                pid = nanny.process.process.pid
                os.kill(pid, signal.SIGKILL)
                killed.append(pid)

        # jobs=2 cuts the screen into one-outcome batches, and 1,500 resamples make each take
        # long enough that most are still pending or running when the first one comes back
        folder = tmp_path / "killed"
        run_screen(DEMO, group="scheme", resamples=1500, jobs=2, out=folder, engine="dask",
                   scheduler=cluster.scheduler_address, progress=kill_one)
    assert killed
    run_screen(DEMO, group="scheme", resamples=1500, jobs=2, out=tmp_path / "local")
    for name in FILES:
        assert (folder / name).read_bytes() == (tmp_path / "local" / name).read_bytes(), name


# ------------------------------------------------------------------ many files


def _small_file(path: Path, seed: int) -> None:
    import numpy as np

    rng = np.random.default_rng(seed)
    lines = ["arm,y1,y2"]
    for label, shift in (("treated", 0.5), ("control", 0.0)):
        lines += [f"{label},{rng.normal(shift, 1):.3f},{rng.lognormal(shift, 0.7):.3f}"
                  for _ in range(12)]
    path.write_text("\n".join(lines) + "\n", encoding="utf-8")


def test_a_manifest_of_a_hundred_files_on_dask_is_the_local_table(tmp_path):
    from auditor.screen import run_screens
    from auditor.sources import read_manifest

    (tmp_path / "sites").mkdir()
    for k in range(100):
        _small_file(tmp_path / "sites" / f"site{k:03d}.csv", k)
    manifest = tmp_path / "manifest.csv"
    manifest.write_text("file,group\n" + "".join(f"sites/site{k:03d}.csv,arm\n"
                                                 for k in range(100)), encoding="utf-8")
    sources = read_manifest(manifest)
    written = {}
    for engine in ("local", "dask"):
        out = tmp_path / engine
        files, _ = run_screens(sources, resamples=200, jobs=2, out=out, engine=engine)
        assert files.rows == 200
        written[engine] = {name: (out / name).read_bytes() for name in FILES}
    for name in FILES:
        assert written["dask"][name] == written["local"][name], name


class _HideFile:
    """A worker plugin: the worker process cannot read one path (as on a worker without the
    shared storage the data file sits on)."""

    def __init__(self, path: str):
        self.path = path

    def setup(self, worker):
        import os as worker_os

        real = worker_os.access
        hidden = self.path

        def access(path, mode, *args, **kwargs):
            if worker_os.fspath(path) == hidden:
                return False
            return real(path, mode, *args, **kwargs)

        worker_os.access = access


def test_a_worker_that_cannot_read_the_file_stops_the_screen_in_one_line(run_cli, tmp_path):
    from dask.distributed import Client, LocalCluster, WorkerPlugin

    data = tmp_path / "private.csv"
    _small_file(data, 1)
    plugin = type("HideFile", (_HideFile, WorkerPlugin), {})(str(data))
    with LocalCluster(n_workers=1, threads_per_worker=1, processes=True,
                      dashboard_address=None) as cluster, Client(cluster) as client:
        client.register_plugin(plugin)
        out = tmp_path / "out"
        res = run_cli("screen", data, "--group", "arm", "--boot", "200", "--engine", "dask",
                      "--scheduler", cluster.scheduler_address, "--out", out, "--quiet")
    assert res.code == 1, res.err
    assert "Traceback" not in res.err
    lines = res.err.strip().splitlines()
    assert len(lines) == 1, res.err
    for needle in (str(data), "a Dask worker", "cannot read this file", "shared", "storage"):
        assert needle in lines[0], (needle, lines[0])
    assert not any((out / name).exists() for name in FILES + ("screen.rows.jsonl",))


def test_ctrl_c_cancels_the_pending_tasks_and_leaves_no_table(tmp_path):
    import time

    from dask.distributed import Client, LocalCluster

    def interrupt(done, total, column):
        raise KeyboardInterrupt  # as Ctrl-C arrives while the first results come back

    with LocalCluster(n_workers=2, threads_per_worker=1, processes=True,
                      dashboard_address=None) as cluster, Client(cluster) as watcher:
        out = tmp_path / "out"
        with pytest.raises(KeyboardInterrupt):
            run_screen(DEMO, group="scheme", resamples=1500, jobs=2, out=out, engine="dask",
                       scheduler=cluster.scheduler_address, progress=interrupt)
        assert not any((out / name).exists() for name in FILES + ("screen.rows.jsonl",))
        deadline = time.monotonic() + 10  # the scheduler forgets the cancelled tasks
        while time.monotonic() < deadline:
            left = watcher.run_on_scheduler(lambda dask_scheduler: len(dask_scheduler.tasks))
            if left == 0:
                break
            time.sleep(0.1)
        assert left == 0
