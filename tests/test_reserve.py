"""`stock reserve`: only the qty fields change, atomically, with a backup, never losing one."""

from __future__ import annotations

import fcntl
import hashlib
import json
import os
import signal
import subprocess
import sys
import textwrap
import threading
import time
from datetime import datetime
from pathlib import Path

import numpy as np
import pytest
from typer.testing import CliRunner

from stockbias.cli.app import app
from stockbias.errors import InputError
from stockbias.stock_io import read_inventory
from stockbias.stock_write import (
    ShortStockError,
    StockChangedError,
    StockLockedError,
    reserve_stock,
)

ROOT = Path(__file__).resolve().parent.parent
SAMPLES = ROOT / "inventory_samples"
VALUES = "R1=CF-47K,R2=CF-10K,RC=CF-3K3,RE=CF-1K0"
# A divider stage built ten times from workshop_drawers.csv with a wide collector-current window,
# so that the designs these tests reserve meet it with a wide margin (reserve re-checks them):
# VALUES gives VBB = 12 V·10k/57k = 2.1 V, IC ≈ (2.1 − 0.65) V / 1 kΩ = 1.45 mA (hand
# calculation) against a window of 0.6–2.4 mA.
WIDE_JOB = """\
[supply]
volts = 12
tolerance_pct = 5

[target]
ic = "1.5 mA"
ic_window_pct = 60
vce_min = "1 V"

[limits]
supply_power_max = "100 mW"

[environment]
ambient_min_c = 0
ambient_max_c = 55

[build]
quantity = 10

[search]
topology = "divider"
model = "constant_vbe"
objectives = ["cost"]
top = 2
time_limit_s = 20
"""


def wide_job(folder: Path) -> Path:
    """WIDE_JOB written into ``folder``."""
    path = folder / "wide_job.toml"
    path.write_text(WIDE_JOB, encoding="utf-8")
    return path

runner = CliRunner()

# A semicolon file with a byte-order mark, CRLF line ends, decimal commas, quoting, padding,
# an embedded line break and delimiter inside a quoted note, comments, blank lines and
# unknown columns before and after qty.
AWKWARD = (
    "\ufeff# bench drawer; kept by hand\r\n"
    "\r\n"
    "Kind ; part_id;bin_colour;value;tolerance_pct;power_w;qty;unit_cost;location;note;"
    "supplier ref;polarity;hfe_min;hfe_max;vceo_max;ic_max;pd_max_w\r\n"
    'resistor;R-4K7;"blue;dark";4,7k;5;0,25; 40 ;0,01;A1;"two lines\r\nof note; with ;";'
    "X-11;;;;;;\r\n"
    "# a comment between rows\r\n"
    'resistor;R-1K;;1k;1;0,6;"25";0,03;A2;;"Q ""quoted""";;;;;;\r\n'
    "resistor;R-10K;red;10k;5;0,25;7;0,01;A3;;;;;;;;\r\n"
    "\r\n"
    "transistor;Q-N1;;;;;12;0,05;D1;;;NPN;100;300;40V;200mA;625mW\r\n"
)


def awkward(tmp_path: Path) -> Path:
    path = tmp_path / "drawer.csv"
    path.write_bytes(AWKWARD.encode("utf-8"))
    return path


def qty(path: Path) -> dict[str, int]:
    inv = read_inventory(path)
    return {p.part_id: p.qty for p in (*inv.resistors, *inv.transistors)}


def test_only_the_qty_fields_change(tmp_path: Path) -> None:
    path = awkward(tmp_path)
    res = reserve_stock(path, lambda inv: {"R-4K7": 3, "R-1K": 25, "Q-N1": 2},
                        now=datetime(2026, 6, 1, 9, 30, 0))
    expected = (AWKWARD.replace(";0,25; 40 ;", ";0,25; 37 ;")
                .replace(';"25";', ';"0";')
                .replace(";12;0,05;", ";10;0,05;"))
    assert expected != AWKWARD
    assert path.read_bytes() == expected.encode("utf-8")  # every other byte kept
    assert [(c.part_id, c.before, c.after) for c in res.changes] == [
        ("R-4K7", 40, 37), ("R-1K", 25, 0), ("Q-N1", 12, 10)]
    backup = Path(res.backup or "")
    assert backup.name == "drawer.csv.20260601-093000.bak"
    assert backup.read_bytes() == AWKWARD.encode("utf-8")
    assert not list(tmp_path.glob(".drawer.csv.*.tmp"))


def test_round_trip_keeps_unknown_columns_byte_identical(tmp_path: Path) -> None:
    path = awkward(tmp_path)
    reserve_stock(path, lambda inv: {"R-10K": 7})
    before = AWKWARD.split("\r\n")
    after = path.read_bytes().decode("utf-8").split("\r\n")
    assert len(before) == len(after)
    changed = [(a, b) for a, b in zip(before, after, strict=True) if a != b]
    assert changed == [("resistor;R-10K;red;10k;5;0,25;7;0,01;A3;;;;;;;;",
                        "resistor;R-10K;red;10k;5;0,25;0;0,01;A3;;;;;;;;")]
    assert read_inventory(path).extra_columns == ("bin_colour", "supplier ref")


def test_backups_are_never_overwritten(tmp_path: Path) -> None:
    path = awkward(tmp_path)
    now = datetime(2026, 6, 1, 9, 30, 0)
    first = reserve_stock(path, lambda inv: {"R-4K7": 1}, now=now)
    second = reserve_stock(path, lambda inv: {"R-4K7": 1}, now=now)
    assert Path(first.backup or "").name == "drawer.csv.20260601-093000.bak"
    assert Path(second.backup or "").name == "drawer.csv.20260601-093000-2.bak"
    assert qty(Path(first.backup or ""))["R-4K7"] == 40
    assert qty(Path(second.backup or ""))["R-4K7"] == 39
    assert qty(path)["R-4K7"] == 38


def test_short_stock_names_every_short_line_and_writes_nothing(tmp_path: Path) -> None:
    path = awkward(tmp_path)
    with pytest.raises(ShortStockError) as err:
        reserve_stock(path, lambda inv: {"R-4K7": 41, "R-1K": 1, "Q-N1": 13})
    assert "R-4K7 (line 4) have 40, need 41" in str(err.value)
    assert "Q-N1 (line 10) have 12, need 13" in str(err.value)
    assert "R-1K" not in str(err.value)
    assert path.read_bytes() == AWKWARD.encode("utf-8")
    assert sorted(p.name for p in tmp_path.iterdir()) == ["drawer.csv"]   # no lock file


def test_dry_run_writes_nothing(tmp_path: Path) -> None:
    path = awkward(tmp_path)
    res = reserve_stock(path, lambda inv: {"R-4K7": 5}, dry_run=True)
    assert not res.written and res.backup is None
    assert res.changes[0].after == 35
    assert path.read_bytes() == AWKWARD.encode("utf-8")
    assert [p.name for p in tmp_path.iterdir()] == ["drawer.csv"]  # not even a lock file


def test_a_change_by_another_program_is_detected_and_nothing_replaced(tmp_path: Path) -> None:
    path = awkward(tmp_path)
    edited = AWKWARD.replace(";7;0,01;", ";8;0,01;").encode("utf-8")

    def editor_saves(step: str) -> None:
        if step == "before_replace":
            path.write_bytes(edited)  # an editor saves while the reservation writes

    with pytest.raises(StockChangedError, match="changed by another program"):
        reserve_stock(path, lambda inv: {"R-4K7": 1}, fault=editor_saves)
    assert path.read_bytes() == edited
    assert sorted(p.name for p in tmp_path.iterdir()) == ["drawer.csv"]   # no lock file


def test_a_held_lock_is_waited_for_then_refused(tmp_path: Path) -> None:
    path = awkward(tmp_path)
    fd = os.open(path, os.O_RDONLY)
    try:
        fcntl.flock(fd, fcntl.LOCK_EX)
        with pytest.raises(StockLockedError, match="held the lock on the stock file"):
            reserve_stock(path, lambda inv: {"R-4K7": 1}, lock_timeout_s=0.2)
    finally:
        os.close(fd)
    assert path.read_bytes() == AWKWARD.encode("utf-8")
    assert [p.name for p in tmp_path.iterdir()] == ["drawer.csv"]


def test_a_lock_on_a_replaced_file_is_let_go_for_the_current_ones(tmp_path: Path) -> None:
    """A waits on the file B is replacing; B replaces it, C locks the new one, B lets go:
    A must wait for C (the lock of the file now at the path), not write beside it."""
    path = awkward(tmp_path)
    old_fd = os.open(path, os.O_RDONLY)
    fcntl.flock(old_fd, fcntl.LOCK_EX)                     # B holds the lock of the file
    done: list[object] = []
    worker = threading.Thread(target=lambda: done.append(
        reserve_stock(path, lambda inv: {"R-4K7": 1}, lock_timeout_s=30)))
    worker.start()                                         # A waits on B's file
    time.sleep(0.3)
    replaced = AWKWARD.replace(";0,25; 40 ;", ";0,25; 30 ;")
    staged = tmp_path / "staged.csv"
    staged.write_bytes(replaced.encode("utf-8"))
    os.replace(staged, path)                               # B's reservation: 40 -> 30
    new_fd = os.open(path, os.O_RDONLY)
    fcntl.flock(new_fd, fcntl.LOCK_EX)                     # C locks the new file
    os.close(old_fd)                                       # B lets go
    time.sleep(0.5)
    assert path.read_bytes() == replaced.encode("utf-8")  # A did not write beside C
    assert worker.is_alive()
    os.close(new_fd)                                       # C lets go
    worker.join(timeout=30)
    assert not worker.is_alive() and done
    assert qty(path)["R-4K7"] == 29                        # A took one from B's result


def test_unknown_part_is_refused(tmp_path: Path) -> None:
    path = awkward(tmp_path)
    with pytest.raises(InputError, match="not in the stock file"):
        reserve_stock(path, lambda inv: {"R-NOPE": 1})
    assert path.read_bytes() == AWKWARD.encode("utf-8")


# --- crashes and concurrency (separate processes) ---------------------------------

_CHILD = textwrap.dedent("""
    import os, signal, sys
    from stockbias.stock_write import reserve_stock
    path, stop_at = sys.argv[1], sys.argv[2]
    def fault(step):
        if step == stop_at:
            os.kill(os.getpid(), signal.SIGKILL)
    reserve_stock(path, lambda inv: {"R-4K7": 3, "Q-N1": 1}, fault=fault)
""")


@pytest.mark.parametrize("stop_at", ["read", "temp_partial", "temp_written", "backup_written",
                                     "before_replace", "replaced"])
def test_a_killed_reservation_leaves_the_old_or_the_new_file_whole(tmp_path: Path,
                                                                  stop_at: str) -> None:
    path = awkward(tmp_path)
    proc = subprocess.run([sys.executable, "-c", _CHILD, str(path), stop_at],
                          capture_output=True, text=True, timeout=120, check=False)
    assert proc.returncode == -signal.SIGKILL, proc.stderr
    new = AWKWARD.replace(";0,25; 40 ;", ";0,25; 37 ;").replace(";12;0,05;", ";11;0,05;")
    expected = new if stop_at == "replaced" else AWKWARD
    assert path.read_bytes() == expected.encode("utf-8")
    # a leftover temporary file never gets in the way of the next reservation
    reserve_stock(path, lambda inv: {"R-1K": 1})
    assert qty(path)["R-1K"] == 24


_LOOP = textwrap.dedent("""
    import sys
    from stockbias.stock_write import reserve_stock
    path, n = sys.argv[1], int(sys.argv[2])
    for _ in range(n):
        reserve_stock(path, lambda inv: {"R-4K7": 1, "Q-N1": 1}, lock_timeout_s=120)
""")


def test_kills_at_random_moments_never_tear_the_file(tmp_path: Path) -> None:
    path = awkward(tmp_path)
    rng = np.random.default_rng(7)
    for _ in range(4):
        proc = subprocess.Popen([sys.executable, "-c", _LOOP, str(path), "6"])
        time.sleep(float(rng.uniform(0.3, 1.5)))  # somewhere inside the loop, or after it
        proc.send_signal(signal.SIGKILL)
        proc.wait(timeout=60)
        q = qty(path)  # the file reads as a whole stock file
        # each reservation takes one of each line together: never one without the other
        assert 40 - q["R-4K7"] == 12 - q["Q-N1"]
        assert q["R-10K"] == 7 and q["R-1K"] == 25


def test_two_concurrent_reservations_never_lose_one(tmp_path: Path) -> None:
    path = awkward(tmp_path)
    procs = [subprocess.Popen([sys.executable, "-c", _LOOP, str(path), "5"],
                              stderr=subprocess.PIPE, text=True) for _ in range(2)]
    for p in procs:
        _, err = p.communicate(timeout=300)
        assert p.returncode == 0, err
    q = qty(path)
    assert q["R-4K7"] == 40 - 10 and q["Q-N1"] == 12 - 10  # start − both processes' takes
    assert len(list(tmp_path.glob("drawer.csv.*.bak"))) == 10


def test_two_concurrent_cli_reservations_never_lose_one(tmp_path: Path) -> None:
    path = tmp_path / "shelf.csv"
    path.write_bytes((SAMPLES / "workshop_drawers.csv").read_bytes())
    cmd = [sys.executable, "-m", "stockbias", "stock", "reserve", str(path), "--job",
           str(wide_job(tmp_path)),
           "--values", VALUES, "--transistor", "QN-GP40", "--quantity", "3"]
    procs = [subprocess.Popen(cmd, stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True)
             for _ in range(2)]
    for p in procs:
        _, err = p.communicate(timeout=300)
        assert p.returncode == 0, err
    q = qty(path)
    # workshop_drawers.csv: CF-47K 40, CF-3K3 20, QN-GP40 120; two builds of 3 boards
    assert (q["CF-47K"], q["CF-3K3"], q["QN-GP40"]) == (34, 14, 114)


# --- the command line ----------------------------------------------------------

def shelf(tmp_path: Path) -> Path:
    path = tmp_path / "shelf.csv"
    path.write_bytes((SAMPLES / "workshop_drawers.csv").read_bytes())
    return path


def test_cli_reserve_takes_uses_times_build_quantity(tmp_path: Path) -> None:
    path = shelf(tmp_path)
    result = runner.invoke(app, ["stock", "reserve", str(path), "--job", str(wide_job(tmp_path)),
                                 "--values", "R1=CF-22K+CF-22K,R2=CF-10K,RC=CF-3K3,RE=CF-1K0",
                                 "--transistor", "QN-GP40", "--json"])
    assert result.exit_code == 0, result.output
    payload = json.loads(result.stdout)  # JSON alone on stdout
    taken = {c["part_id"]: c["taken"] for c in payload["changes"]}
    # job: [build] quantity = 10; the series pair uses two CF-22K per board
    assert taken == {"CF-22K": 20, "CF-10K": 10, "CF-3K3": 10, "CF-1K0": 10, "QN-GP40": 10}
    assert payload["written"] and Path(payload["backup"]).exists()
    assert qty(path)["CF-22K"] == 45 - 20


def test_cli_short_stock_exit_2_file_byte_identical(tmp_path: Path) -> None:
    path = shelf(tmp_path)
    before = path.read_bytes()
    result = runner.invoke(app, ["stock", "reserve", str(path), "--job", str(wide_job(tmp_path)),
                                 "--values", VALUES, "--transistor", "QN-GP40", "--quantity", "25"])
    assert result.exit_code == 2
    assert result.stderr.strip() == (
        f"{path}: not enough stock for 25 board(s), nothing written: "
        "CF-3K3 (line 12) have 20, need 25")
    assert path.read_bytes() == before
    assert not list(tmp_path.glob("*.bak"))


def test_cli_dry_run(tmp_path: Path) -> None:
    path = shelf(tmp_path)
    before = path.read_bytes()
    result = runner.invoke(app, ["stock", "reserve", str(path), "--job", str(wide_job(tmp_path)),
                                 "--values", VALUES, "--transistor", "QN-GP40", "--dry-run"])
    assert result.exit_code == 0, result.output
    assert "dry run, nothing written" in result.stdout
    assert path.read_bytes() == before


@pytest.mark.parametrize(("args", "message"), [
    (["--values", VALUES], "--values needs --transistor ID"),
    (["--transistor", "QN-GP40"], "--transistor goes with --values"),
    ([], "say which design: --rank N"),
    (["--values", "R1=9k1,R2=CF-10K,RC=CF-3K3,RE=CF-1K0", "--transistor", "QN-GP40"],
     "reserve takes stock parts only, and R1 is not a stock part"),
    (["--values", VALUES, "--transistor", "QX-NONE"], "no transistor with that part id"),
    (["--values", "R9=CF-10K", "--transistor", "QN-GP40"], "divider has no role R9"),
])
def test_cli_reserve_errors_are_one_line_exit_2(tmp_path: Path, args: list[str],
                                                message: str) -> None:
    path = shelf(tmp_path)
    before = path.read_bytes()
    result = runner.invoke(app, ["stock", "reserve", str(path), "--job", str(wide_job(tmp_path)),
                                 *args])
    assert result.exit_code == 2, result.output
    lines = result.stderr.strip().splitlines()
    assert len(lines) == 1 and message in lines[0], result.stderr
    assert path.read_bytes() == before


#: One design in the shape design --save writes it (it meets WIDE_JOB; see test_outputs.py).
SAVED_DESIGN = {
    "rank": 1, "topology": "divider", "transistor": {"part_id": "QN-LB1"},
    "parts": {"R1": {"part_id": "MF-23K7", "value_ohm": 23700.0},
              "R2": {"part_id": "MF-4K99", "value_ohm": 4990.0},
              "RC": {"part_id": "CF-2K2", "value_ohm": 2200.0},
              "RE": {"part_id": ["CF-470R", "CF-470R"], "value_ohm": 940.0,
                     "arrangement": "series"}}}


def record(path: Path) -> dict[str, object]:
    """What a saved result records of an input: path, SHA-256 (hashlib) and size."""
    data = path.read_bytes()
    return {"path": str(path), "sha256": hashlib.sha256(data).hexdigest(), "size": len(data)}


def saved_result(folder: Path, job: Path, stock: Path) -> Path:
    """A result file holding SAVED_DESIGN, recording ``job`` and ``stock`` as they are now."""
    saved = folder / "result.json"
    saved.write_text(json.dumps({"status": "optimal", "designs": [SAVED_DESIGN],
                                 "inputs": {"job": record(job), "inventory": record(stock)}}))
    return saved


def test_cli_reserve_from_a_saved_result(tmp_path: Path) -> None:
    path = shelf(tmp_path)
    job = wide_job(tmp_path)
    saved = saved_result(tmp_path, job, path)
    result = runner.invoke(app, ["stock", "reserve", str(path), "--job", str(job),
                                 "--from", str(saved), "--quantity", "2"])
    assert result.exit_code == 0, result.output
    q = qty(path)
    assert (q["MF-23K7"], q["CF-470R"], q["QN-LB1"]) == (12 - 2, 50 - 4, 60 - 2)
