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


def test_a_yield_design_and_a_yield_substitute_on_the_cluster_equal_this_process(
        cluster: str, tmp_path: Path) -> None:
    # candidate screening (groups of candidates on common boards), judging and the final
    # check all run on the cluster's workers; every count must equal the in-process run
    from test_yield_search import HEADER, JOB, PRECISE, TRANSISTOR, WIDE
    from test_yield_substitute import MORE_WIDE, TQ2, VALUES

    from stockbias.job import parse_job
    from stockbias.search.substitute import substitute
    from stockbias.search.yield_search import yield_design
    from stockbias.stock_io import read_inventory

    shelf = tmp_path / "shelf.csv"
    shelf.write_text(HEADER + PRECISE + WIDE + MORE_WIDE + TRANSISTOR + TQ2)
    job = parse_job(JOB.format(window=25))
    inv = read_inventory(shelf)
    ex = DaskCluster(cluster)
    try:
        here = yield_design(job, inv, executor=InProcess())
        there = yield_design(job, inv, executor=ex)
        sub_here = substitute(job, VALUES, "TQ-1", inv, purpose=False)
        sub_there = substitute(job, VALUES, "TQ-1", inv, purpose=False, executor=ex)
    finally:
        ex.close()
    assert here.designs and [d.to_dict() for d in here.designs] == \
        [d.to_dict() for d in there.designs]
    drop = ("executor",)
    assert {k: v for k, v in here.stats.items() if k not in drop} == \
        {k: v for k, v in there.stats.items() if k not in drop}
    assert any(c.yield_evidence is not None and c.yield_evidence.kind == "sampled"
               for c in sub_here.candidates)
    assert [c.to_dict() for c in sub_here.candidates] == \
        [c.to_dict() for c in sub_there.candidates]


def test_a_yield_board_on_the_cluster_equals_this_process(cluster: str, tmp_path: Path) -> None:
    # boards judged stage by stage: the screens and judgements run on the cluster's workers
    from test_yield_board import HEADER, PRECISE, TRANSISTOR, WIDE, board_text

    from stockbias.job import parse_job
    from stockbias.search.yield_board import yield_board
    from stockbias.stock_io import read_inventory

    shelf = tmp_path / "both.csv"
    shelf.write_text(HEADER + PRECISE + WIDE + TRANSISTOR)
    job = parse_job(board_text((14, 12), ("yield_min = 80\n", "yield_min = 70\n")))
    inv = read_inventory(shelf)
    here = yield_board(job, inv, top=1, executor=InProcess())
    ex = DaskCluster(cluster)
    try:
        there = yield_board(job, inv, top=1, executor=ex)
    finally:
        ex.close()
    assert here.designs and len(here.designs) == len(there.designs)
    for a, b in zip(here.designs, there.designs, strict=True):
        assert a.board.cost_micro == b.board.cost_micro
        assert [(s.kind, s.screen, s.judged) for s in a.stages] == \
            [(s.kind, s.screen, s.judged) for s in b.stages]
    assert there.stats["executor"] != here.stats["executor"]
    assert {k: v for k, v in here.stats.items() if k != "executor"} == \
        {k: v for k, v in there.stats.items() if k != "executor"}
