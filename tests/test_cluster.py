"""Monte Carlo on a real Dask cluster: a scheduler and two workers started as separate
processes on localhost; the result must equal the in-process run exactly."""

from __future__ import annotations

import os
import socket
import subprocess
import sys
import time
from collections.abc import Iterator
from pathlib import Path

import numpy as np
import pytest

pytest.importorskip("distributed")

from test_montecarlo_stream import LIMITS, _same
from test_worst_case import make_spec

from stockbias.analysis.montecarlo import STREAM_BLOCK, monte_carlo
from stockbias.executor import DaskCluster, InProcess

DASK = str(Path(sys.executable).with_name("dask"))


def _free_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return int(s.getsockname()[1])


@pytest.fixture(scope="module")
def cluster(tmp_path_factory: pytest.TempPathFactory) -> Iterator[str]:
    port = _free_port()
    address = f"tcp://127.0.0.1:{port}"
    logs = tmp_path_factory.mktemp("dask")
    env = {**os.environ, "PYTHONWARNINGS": "ignore"}
    files = [open(logs / f"{name}.log", "w")  # noqa: SIM115 - closed with the processes
             for name in ("scheduler", "worker0", "worker1")]
    procs = [subprocess.Popen([DASK, "scheduler", "--host", "127.0.0.1", "--port", str(port),
                               "--no-dashboard"], stdout=subprocess.DEVNULL,
                              stderr=files[0], env=env)]
    time.sleep(1.0)
    for i in range(2):
        procs.append(subprocess.Popen(
            [DASK, "worker", address, "--nworkers", "1", "--nthreads", "1", "--no-dashboard",
             "--name", f"w{i}"], stdout=subprocess.DEVNULL, stderr=files[1 + i], env=env))
    try:
        from distributed import Client

        with Client(address, timeout=30, set_as_default=False) as client:
            client.wait_for_workers(2, timeout=60)
        yield address
    finally:
        for p in reversed(procs):
            p.terminate()
        for p in procs:
            try:
                p.wait(timeout=20)
            except subprocess.TimeoutExpired:
                p.kill()
                p.wait()
        for f in files:
            f.close()


def test_a_dask_cluster_gives_the_in_process_result(cluster: str) -> None:
    spec = make_spec("divider")
    samples = 9 * STREAM_BLOCK + 77
    local = monte_carlo(spec, LIMITS, samples, 21, chunk=1_000, executor=InProcess())
    ex = DaskCluster(cluster)
    try:
        assert ex.workers == 2
        done: list[int] = []
        remote = monte_carlo(spec, LIMITS, samples, 21, chunk=2 * STREAM_BLOCK, executor=ex,
                             progress=done.append)
    finally:
        ex.close()
    _same(local, remote)
    assert done[-1] == samples and np.all(np.diff(done) > 0)


def test_check_on_the_cluster_equals_check_in_this_process(cluster: str) -> None:
    import json

    from typer.testing import CliRunner

    from stockbias.cli.app import app
    from stockbias.samples import sample_path

    args = ["check", str(sample_path("line_driver_job.toml")), "-i",
            str(sample_path("workshop_drawers.csv")), "-v",
            "R1=MF-47K5,R2=MF-10K0,RE=CF-1K0,RC=CF-3K3", "-t", "QN-LB2", "--samples", "30000",
            "--seed", "9", "--json"]
    here = CliRunner().invoke(app, [*args, "--workers", "1"])
    there = CliRunner().invoke(app, [*args, "--cluster", cluster])
    assert here.exit_code == there.exit_code == 0, here.output + there.output
    assert json.loads(here.stdout)["monte_carlo"] == json.loads(there.stdout)["monte_carlo"]
