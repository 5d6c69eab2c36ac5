"""Every way a run can end: one line and its exit code, never a traceback.

Exit codes (cli/app.py): 0 done, 1 not met, 2 bad input, 3 internal error (with a
report file), 130 interrupted.
"""

from __future__ import annotations

import os
import re
import signal
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import pytest
from typer.testing import CliRunner

import stockbias
from stockbias.cli import check_cmd
from stockbias.cli.app import app

ROOT = Path(__file__).resolve().parent.parent
SAMPLES = ROOT / "inventory_samples"
JOB = SAMPLES / "line_driver_job.toml"
SHELF = SAMPLES / "workshop_drawers.csv"
BOARD = SAMPLES / "distribution_amp_board.toml"
PARTS = ["-v", "R1=CF-47K,R2=CF-10K,RC=CF-4K7,RE=CF-1K0", "-t", "QN-GP40"]

runner = CliRunner()


def _check(job: Path, *extra: str):
    return runner.invoke(app, ["check", str(job), "-i", str(SHELF), *PARTS, "--samples", "50",
                               *extra])


def _one_line(output: str) -> str:
    lines = [line for line in output.splitlines() if line.strip()]
    assert len(lines) == 1, output
    assert "Traceback" not in output
    return lines[0]


def _job(tmp_path: Path, text: str | bytes, name: str = "job.toml") -> Path:
    path = tmp_path / name
    if isinstance(text, str):
        path.write_text(text, encoding="utf-8")
    else:
        path.write_bytes(text)
    return path


GOOD = '[supply]\nvolts = 12\ntolerance_pct = 5\n[target]\nic = "1 mA"\nic_window_pct = 30\n'


# --- internal error: exit 3 and a report ------------------------------------------------


def _boom(*args: object, **kwargs: object) -> None:
    raise RuntimeError("boom in the analysis\nsecond line")


def test_unexpected_exception_is_one_line_exit_3_with_a_report(
        tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.setattr(check_cmd, "analyze", _boom)
    monkeypatch.setattr(tempfile, "tempdir", str(tmp_path))
    result = _check(JOB)
    assert result.exit_code == 3
    line = _one_line(result.output)
    match = re.fullmatch(r"stockbias: internal error: RuntimeError: boom in the analysis "
                         r"second line; a full report was written to (\S+); please attach it "
                         r"to a bug report", line)
    assert match, line
    report = Path(match.group(1))
    assert report.parent == tmp_path and report.name.startswith("stockbias-crash-")
    text = report.read_text(encoding="utf-8")
    assert "Traceback (most recent call last)" in text
    assert "RuntimeError: boom in the analysis" in text
    assert f"stockbias: {stockbias.__version__}" in text
    assert f"python: {sys.version.split()[0]}" in text
    assert "'check'" in text and str(JOB) in text           # argv


def test_a_second_crash_writes_a_new_report(tmp_path: Path,
                                            monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.setattr(check_cmd, "analyze", _boom)
    monkeypatch.setattr(tempfile, "tempdir", str(tmp_path))
    first, second = _check(JOB), _check(JOB)
    reports = sorted(tmp_path.glob("stockbias-crash-*.txt"))
    assert len(reports) == 2                                 # nothing overwritten
    assert first.exit_code == second.exit_code == 3


def test_crash_report_folder_not_writable_still_one_line(
        tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.setattr(check_cmd, "analyze", _boom)
    monkeypatch.setattr(tempfile, "tempdir", str(tmp_path / "missing"))
    result = _check(JOB)
    assert result.exit_code == 3
    assert "no report could be written" in _one_line(result.output)


def test_file_system_error_on_a_named_file_is_bad_input(monkeypatch: pytest.MonkeyPatch
                                                        ) -> None:
    def denied(*args: object, **kwargs: object) -> None:
        raise PermissionError(13, "Permission denied", "/some/where/out.html")

    monkeypatch.setattr(check_cmd, "analyze", denied)
    result = _check(JOB)
    assert result.exit_code == 2
    assert _one_line(result.output) == "/some/where/out.html: Permission denied"


# --- interrupts ------------------------------------------------------------------------


@pytest.mark.parametrize("exc", [KeyboardInterrupt, __import__("typer").Abort])
def test_interrupt_in_a_command_exits_130(monkeypatch: pytest.MonkeyPatch,
                                          exc: type[BaseException]) -> None:
    def interrupted(*args: object, **kwargs: object) -> None:
        raise exc()

    monkeypatch.setattr(check_cmd, "analyze", interrupted)
    result = _check(JOB)
    assert result.exit_code == 130
    assert _one_line(result.output) == "stockbias: interrupted"


# The console script calls cli.app.main(); this runs the same function.  Python installs
# its KeyboardInterrupt handler only when SIGINT is not ignored at start (a background job
# of a non-interactive shell ignores it), so the child sets it itself, as a terminal would.
_ENTRY = ("import signal, sys; signal.signal(signal.SIGINT, signal.default_int_handler); "
          "sys.argv[0] = 'stockbias'; from stockbias.cli.app import main; main()")


def _cpu_seconds(pid: int) -> float:
    fields = Path(f"/proc/{pid}/stat").read_text().rsplit(")", 1)[1].split()
    return (int(fields[11]) + int(fields[12])) / os.sysconf("SC_CLK_TCK")


@pytest.mark.skipif(not Path("/proc/self/stat").exists(), reason="needs /proc (Linux)")
def test_ctrl_c_during_a_board_design_exits_130_and_writes_no_report(tmp_path: Path) -> None:
    report = tmp_path / "report.html"
    proc = subprocess.Popen(
        [sys.executable, "-c", _ENTRY, "design", str(BOARD), "-i", str(SHELF),
         "--time-limit", "600", "--report", str(report)],
        stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True, cwd=tmp_path)
    try:
        # 1.5 s of the child's own CPU time: past the imports (about 1 s), inside the board
        # search (the whole run takes about 4 s), whatever the load on the machine
        while proc.poll() is None and _cpu_seconds(proc.pid) < 1.5:
            time.sleep(0.02)
        assert proc.poll() is None, proc.communicate()
        proc.send_signal(signal.SIGINT)
        out, err = proc.communicate(timeout=120)
    finally:
        if proc.poll() is None:
            proc.kill()
    assert proc.returncode == 130, (out, err)
    assert err.strip().splitlines()[-1] == "stockbias: interrupted", err
    assert "Traceback" not in err
    assert "time limit" not in out + err
    assert not report.exists()
    assert list(tmp_path.iterdir()) == []                   # no staged file left either


_NATIVE = """
import signal, sys
signal.signal(signal.SIGINT, signal.default_int_handler)
from ortools.sat.python import cp_model
from stockbias.cli.failsafe import watch_interrupts
watch_interrupts()
m = cp_model.CpModel()
xs = [m.new_int_var(0, 59, f"x{i}") for i in range(60)]
m.add_all_different(xs)
m.add_all_different([x + i for i, x in enumerate(xs)])
m.add_all_different([x - i for i, x in enumerate(xs)])
m.minimize(sum((i % 7) * x for i, x in enumerate(xs)))
solver = cp_model.CpSolver()
solver.parameters.catch_sigint_signal = False
solver.parameters.num_workers = 1
solver.parameters.max_time_in_seconds = 300
print("solving", flush=True)
solver.solve(m)
print("returned", flush=True)
"""


def test_ctrl_c_inside_a_native_solve_ends_the_process() -> None:
    # a 60-queens-like model that no 300 s search finishes: the solve cannot return
    # before the interrupt unless something stopped it
    proc = subprocess.Popen([sys.executable, "-c", _NATIVE], stdout=subprocess.PIPE,
                            stderr=subprocess.PIPE, text=True)
    try:
        assert proc.stdout is not None
        assert proc.stdout.readline() == "solving\n"
        time.sleep(0.3)                                  # let the solve start
        proc.send_signal(signal.SIGINT)
        out, err = proc.communicate(timeout=120)
    finally:
        if proc.poll() is None:
            proc.kill()
    assert proc.returncode == 130
    assert err == "stockbias: interrupted\n"
    assert "returned" not in out


# --- usage --------------------------------------------------------------------------------


def test_no_arguments_prints_only_the_help_and_exits_2() -> None:
    result = runner.invoke(app, [])
    assert result.exit_code == 2
    assert "Usage: stockbias" in result.output and "design" in result.output
    assert "usage error" not in result.output


def test_version_and_short_help() -> None:
    result = runner.invoke(app, ["--version"])
    assert (result.exit_code, result.output) == (0, f"stockbias {stockbias.__version__}\n")
    short, long = runner.invoke(app, ["-h"]), runner.invoke(app, ["--help"])
    assert short.exit_code == long.exit_code == 0
    assert short.output == long.output
    sub = runner.invoke(app, ["design", "-h"])
    assert sub.exit_code == 0 and "--time-limit" in sub.output


@pytest.mark.parametrize("seed", ["-1", str(2**64 + 1), str(2**31), "1.5", "1e" + "9" * 5000,
                                  "9" * 5000])
def test_bad_seed_is_a_usage_error(seed: str) -> None:
    result = _check(JOB, "--seed", seed)
    assert result.exit_code == 2
    assert "--seed" in _one_line(result.output)


def test_largest_seed_is_accepted() -> None:
    assert _check(JOB, "--seed", str(2**31 - 1)).exit_code in (0, 1)


# --- job files ----------------------------------------------------------------------------


@pytest.mark.parametrize(
    ("text", "where"),
    [
        (GOOD.replace("12", '"1e' + "9" * 5000 + '"'), ":2: key 'supply.volts': "),
        (GOOD.replace("12", "1" + "0" * 5000), ":2: "),
        (GOOD.replace("volts = 12", "volts = 1e308"), ":2: key 'supply.volts': "),
        (GOOD + "[environment]\nambient_min_c = -273.15\n",
         ":8: key 'environment.ambient_min_c': "),
        (GOOD.replace('"1 mA"', "1e-300"), ":5: key 'target.ic': "),
        (GOOD + "[search]\nseed = " + "9" * 40 + "\n", ":8: key 'search.seed': "),
        ("[supply]\nvolts = 12\n[[stage]]\nname = \"a\"\ntarget = 5\n",
         ":5: key 'stage.target': "),
        ("[supply]\nvolts = 12\n[[stage]]\nname = \"a\"\nlimits = [1]\n[stage.target]\n"
         "ic = 1e-3\nic_window_pct = 5\n", ":5: key 'stage.limits': "),
        ("stage = [1, 2]\n[supply]\nvolts = 12\n", ": key 'stage': "),
        (GOOD + "[search]\nobjectives = [[\"cost\"], \"cost\"]\n",
         ":8: key 'search.objectives': "),
        ("a = " + "[" * 5000 + "]" * 5000 + "\n", ":1: "),
        ("[supply]\nvolts = {a = " * 1 + "{b = " * 3000 + "1" + "}" * 3001 + "\n", ":2: "),
    ],
    ids=["exponent-5000-digits", "integer-5000-digits", "volts-1e308", "ambient-absolute-zero",
         "ic-1e-300", "seed-past-64-bits", "stage-target-number", "stage-limits-array",
         "stage-not-tables", "objective-not-string", "deep-array", "deep-inline-table"],
)
def test_bad_job_is_one_line_naming_file_and_line(tmp_path: Path, text: str,
                                                  where: str) -> None:
    job = _job(tmp_path, text)
    result = _check(job)
    assert result.exit_code == 2, result.output
    line = _one_line(result.output)
    assert line.startswith(f"{job}{where}"), line
    assert len(line) < 400                                   # long offending text shortened


def test_job_with_a_byte_order_mark_reads_like_without(tmp_path: Path) -> None:
    plain = _check(_job(tmp_path, GOOD, "plain.toml"), "--json")
    marked = _check(_job(tmp_path, b"\xef\xbb\xbf" + GOOD.encode(), "marked.toml"), "--json")
    assert plain.exit_code == marked.exit_code
    assert plain.exit_code in (0, 1), plain.output
    assert marked.stdout.replace("marked.toml", "plain.toml") == plain.stdout


def test_job_not_utf8_directory_and_missing(tmp_path: Path) -> None:
    result = _check(_job(tmp_path, b"[supply]\nvolts = 12\xff\n"))
    assert result.exit_code == 2
    assert _one_line(result.output).endswith("job file is not UTF-8 text")
    for path in (tmp_path, tmp_path / "none.toml"):
        result = _check(path)
        assert result.exit_code == 2
        assert "JOB_FILE" in _one_line(result.output)  # the usage line's name for it


def test_permission_denied_reading_the_job_or_the_stock(
        tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    # tests may run as root, who reads any file: the refusal is simulated at the read
    job = _job(tmp_path, GOOD)
    real_text, real_bytes = Path.read_text, Path.read_bytes

    def no_text(self: Path, *args: object, **kwargs: object) -> str:
        if self == job:
            raise PermissionError(13, "Permission denied", str(self))
        return real_text(self, *args, **kwargs)  # type: ignore[arg-type]

    def no_bytes(self: Path) -> bytes:
        if self.name == SHELF.name:
            raise PermissionError(13, "Permission denied", str(self))
        return real_bytes(self)

    with monkeypatch.context() as m:
        m.setattr(Path, "read_text", no_text)
        result = _check(job)
    assert result.exit_code == 2
    assert _one_line(result.output) == f"{job}: cannot read the job file: Permission denied"
    with monkeypatch.context() as m:
        m.setattr(Path, "read_bytes", no_bytes)
        result = _check(job)
    assert result.exit_code == 2
    line = _one_line(result.output)
    assert line.startswith(str(SHELF)) and "Permission denied" in line


def test_line_breaks_in_a_key_or_text_stay_on_one_line(tmp_path: Path) -> None:
    result = _check(_job(tmp_path, GOOD + '"a\\nb\\u001b[2J" = 1\n'))
    assert result.exit_code == 2
    line = _one_line(result.output)
    assert "unknown key 'a\\nb\\x1b[2J'" in line       # escaped, not a line break or a
    assert "\x1b" not in line                              # terminal control sequence
    result = _check(_job(tmp_path, GOOD + '[build]\nallow_pairs = """x\ny"""\n'))
    assert result.exit_code == 2
    assert _one_line(result.output).endswith("(text 'x\\ny')")
