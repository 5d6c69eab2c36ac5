"""`stock reserve` through links, on a dry run and in folders it cannot write.

Every step works on the real file: a symbolic link stays a link and the file it points to
changes; a link and the real path share one lock, so two reservations through them both land;
a file with several hard links is refused; a dry run creates nothing; a read-only folder is a
one-line error.
"""

from __future__ import annotations

import os
import subprocess
import sys
from pathlib import Path

import pytest
from test_outputs import read_only
from test_reserve import _LOOP, AWKWARD, VALUES, awkward, qty, shelf, wide_job
from typer.testing import CliRunner

from stockbias.cli.app import app
from stockbias.errors import InputError
from stockbias.stock_write import reserve_stock

runner = CliRunner()


def linked(tmp_path: Path) -> tuple[Path, Path]:
    """The AWKWARD stock file in ``real/`` and a symbolic link to it in ``bench/``."""
    (tmp_path / "real").mkdir()
    (tmp_path / "bench").mkdir()
    real = awkward(tmp_path / "real")
    link = tmp_path / "bench" / "drawer.csv"
    link.symlink_to(os.path.relpath(real, link.parent))
    return real, link


def test_a_reservation_through_a_link_changes_the_real_file(tmp_path: Path) -> None:
    real, link = linked(tmp_path)
    res = reserve_stock(link, lambda inv: {"R-4K7": 3, "Q-N1": 2})
    assert link.is_symlink() and link.resolve() == real.resolve()
    assert qty(real)["R-4K7"] == 40 - 3 and qty(real)["Q-N1"] == 12 - 2
    assert res.path == str(link)  # reported as the user named it
    backup = Path(res.backup or "")
    assert backup.parent == real.parent and backup.read_bytes() == AWKWARD.encode("utf-8")
    # the temporary file and the backup live beside the real file only; no lock file
    assert sorted(p.name for p in (tmp_path / "bench").iterdir()) == ["drawer.csv"]
    assert sorted(p.name for p in real.parent.iterdir()) == sorted([backup.name, "drawer.csv"])


def test_the_cli_through_a_link_keeps_the_link(tmp_path: Path) -> None:
    real = shelf(tmp_path)
    link = tmp_path / "via_link.csv"
    link.symlink_to(real.name)
    result = runner.invoke(app, ["stock", "reserve", str(link), "--job", str(wide_job(tmp_path)),
                                 "--values", VALUES, "--transistor", "QN-GP40", "-q", "2"])
    assert result.exit_code == 0, result.output
    assert link.is_symlink()
    # workshop_drawers.csv: CF-47K 40 pieces, QN-GP40 120; one of each per board, 2 boards
    assert (qty(real)["CF-47K"], qty(real)["QN-GP40"]) == (40 - 2, 120 - 2)


def test_two_processes_through_a_link_and_the_real_path_both_land(tmp_path: Path) -> None:
    real, link = linked(tmp_path)
    rounds = 5
    procs = [subprocess.Popen([sys.executable, "-c", _LOOP, str(p), str(rounds)],
                              stderr=subprocess.PIPE, text=True) for p in (link, real)]
    for p in procs:
        _, err = p.communicate(timeout=300)
        assert p.returncode == 0, err
    q = qty(real)
    # start − 2 processes × rounds × 1 piece of each line (the loop takes R-4K7 and Q-N1)
    assert q["R-4K7"] == 40 - 2 * rounds and q["Q-N1"] == 12 - 2 * rounds
    assert link.is_symlink()
    assert len(list(real.parent.glob("drawer.csv.*.bak"))) == 2 * rounds


def test_a_file_with_two_hard_links_is_refused(tmp_path: Path) -> None:
    path = awkward(tmp_path)
    other = tmp_path / "other_name.csv"
    os.link(path, other)
    with pytest.raises(InputError, match="has 2 names") as err:
        reserve_stock(other, lambda inv: {"R-4K7": 1})
    assert "\n" not in str(err.value)
    assert path.read_bytes() == AWKWARD.encode("utf-8")
    assert sorted(p.name for p in tmp_path.iterdir()) == ["drawer.csv", "other_name.csv"]


def test_a_dry_run_through_the_cli_creates_nothing(tmp_path: Path) -> None:
    path = shelf(tmp_path)
    job = wide_job(tmp_path)
    before = sorted(p.name for p in tmp_path.iterdir())
    result = runner.invoke(app, ["stock", "reserve", str(path), "--job", str(job), "--values",
                                 VALUES, "--transistor", "QN-GP40", "--dry-run"])
    assert result.exit_code == 0, result.output
    assert sorted(p.name for p in tmp_path.iterdir()) == before  # no lock file either


def test_a_read_only_folder_is_one_line(tmp_path: Path) -> None:
    folder = tmp_path / "shelf"
    folder.mkdir()
    path = shelf(folder)
    job = wide_job(tmp_path)
    before = {p.name: p.read_bytes() for p in folder.iterdir()}
    with read_only(folder):
        result = runner.invoke(app, ["stock", "reserve", str(path), "--job", str(job),
                                     "--values", VALUES, "--transistor", "QN-GP40", "-q", "1"])
        assert result.exit_code == 2, result.output
        lines = result.stderr.strip().splitlines()
        assert len(lines) == 1 and lines[0].startswith(f"{path}: "), result.stderr
        assert "nothing written" in lines[0]
        assert "temporary file" in lines[0]   # the lock is on the file: nothing to create
        assert {p.name: p.read_bytes() for p in folder.iterdir()} == before
