"""`stockbias ... | head -1`: a reader that goes away ends the command quietly, exit 0.

Each run's output is far beyond a pipe's buffer (64 KiB on Linux), so the command is
still writing when the reader closes the pipe: the write fails with EPIPE.
"""

from __future__ import annotations

import os
import subprocess
import sys
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parent.parent


@pytest.fixture(scope="module")
def big_shelf(tmp_path_factory: pytest.TempPathFactory) -> Path:
    path = tmp_path_factory.mktemp("pipe") / "big.csv"
    rows = [f"resistor,R{i},{1 + i % 999}k,5,0.25,{i % 50}" for i in range(6000)]
    path.write_text("kind,part_id,value,tolerance_pct,power_w,qty\n" + "\n".join(rows) + "\n")
    return path


def _read_one_line_then_close(args: list[str], *, stream: str = "stdout") -> tuple[bytes, bytes,
                                                                                   int]:
    env = {**os.environ, "COLUMNS": "80"}
    proc = subprocess.Popen([sys.executable, "-m", "stockbias", *args], cwd=ROOT, env=env,
                            stdout=subprocess.PIPE, stderr=subprocess.PIPE)
    reader, other = (proc.stdout, proc.stderr) if stream == "stdout" else \
        (proc.stderr, proc.stdout)
    assert reader is not None and other is not None
    with proc:
        first = reader.readline()
        reader.close()
        rest = other.read()
        code = proc.wait(timeout=600)
    return first, rest, code


@pytest.mark.parametrize("extra", [["--rows"], ["--json"]])
def test_stock_check_into_a_closed_pipe_ends_quietly_with_0(big_shelf: Path,
                                                            extra: list[str]) -> None:
    first, stderr, code = _read_one_line_then_close(["stock", "check", str(big_shelf), *extra])
    assert first                                    # the reader got its line
    assert (code, stderr) == (0, b"")               # no traceback, no "Exception ignored"


def test_an_error_into_a_closed_stderr_keeps_its_exit_code(tmp_path: Path) -> None:
    # 6000 broken rows: one error line each, far beyond the pipe's buffer
    bad = tmp_path / "bad.csv"
    bad.write_text("kind,part_id,value,tolerance_pct,power_w,qty\n"
                   + "".join(f"resistor,R{i},4k7k,5,0.25,1\n" for i in range(6000)))
    first, stdout, code = _read_one_line_then_close(["stock", "check", str(bad)],
                                                    stream="stderr")
    assert b"letter code" in first
    assert (code, stdout) == (2, b"")               # bad input stays exit 2
