"""Saved results belong to one job and one shelf; reserve re-checks what it reserves.

`design --save` records the job and stock files with their SHA-256 and size; `export --from`
and `stock reserve --from` refuse a result whose files changed (exit 2, naming the file and the
ways on) unless --accept-changed-inputs, which re-verifies the design against the current
files.  `stock reserve` refuses a design that fails the job (exit 1, naming the limit) unless
--force.  Expected hashes are hashlib's SHA-256 of the files the tests write.
"""

from __future__ import annotations

import hashlib
import json
import os
from pathlib import Path

import pytest
from test_reserve import SAVED_DESIGN, VALUES, WIDE_JOB, qty, saved_result, shelf, wide_job
from typer.testing import CliRunner

from stockbias.cli.app import app

runner = CliRunner()


def one_line(result) -> str:
    lines = result.stderr.strip().splitlines()
    assert len(lines) == 1, result.output
    return lines[0]


def export(job: Path, stock: Path, saved: Path, out: Path, *extra: str):
    return runner.invoke(app, ["export", str(job), "-i", str(stock), "--from", str(saved),
                               "--netlist", str(out), *extra])


def reserve(job: Path, stock: Path, *extra: str):
    return runner.invoke(app, ["stock", "reserve", str(stock), "--job", str(job), "-q", "1",
                               *extra])


# --- what design --save records --------------------------------------------------------------

def test_design_save_records_both_files_with_their_sha256_and_size(tmp_path: Path) -> None:
    stock = shelf(tmp_path)
    job = wide_job(tmp_path)
    saved = tmp_path / "r.json"
    result = runner.invoke(app, ["design", str(job), "-i", str(stock), "--save", str(saved)])
    assert result.exit_code == 0, result.output
    inputs = json.loads(saved.read_text())["inputs"]
    for key, path in (("job", job), ("inventory", stock)):
        data = path.read_bytes()
        assert inputs[key] == {"path": os.path.abspath(path),
                               "sha256": hashlib.sha256(data).hexdigest(), "size": len(data)}
    # the saved result feeds export and reserve while both files are unchanged
    assert export(job, stock, saved, tmp_path / "a.cir").exit_code == 0
    done = reserve(job, stock, "--from", str(saved))
    assert done.exit_code == 0, done.output


# --- a changed file ---------------------------------------------------------------------------

def edit_stock(stock: Path, old: str, new: str) -> None:
    text = stock.read_text()
    assert old in text
    stock.write_text(text.replace(old, new))


@pytest.mark.parametrize("changed", ["inventory", "job"])
def test_a_changed_file_is_named_exit_2(tmp_path: Path, changed: str) -> None:
    stock, job = shelf(tmp_path), wide_job(tmp_path)
    saved = saved_result(tmp_path, job, stock)
    recorded = hashlib.sha256((stock if changed == "inventory" else job).read_bytes()).hexdigest()
    if changed == "inventory":  # one more piece of a line the design does not use
        edit_stock(stock, "CF-22K,22k,5,0.25,-600,45,", "CF-22K,22k,5,0.25,-600,46,")
        path, noun = stock, "stock file"
    else:
        job.write_text("# a note added later\n" + WIDE_JOB)
        path, noun = job, "job file"
    now = hashlib.sha256(path.read_bytes()).hexdigest()
    before = stock.read_bytes()
    for result in (export(job, stock, saved, tmp_path / "a.cir"),
                   reserve(job, stock, "--from", str(saved))):
        assert result.exit_code == 2, result.output
        line = one_line(result)
        assert line.startswith(f"{saved}: key 'inputs.{changed}.sha256': the {noun} {path} "
                               "is not the one this result was designed from")
        assert f"SHA-256 {recorded[:12]}…, now {now[:12]}…" in line
        assert "run design again" in line and "--accept-changed-inputs" in line
    assert not (tmp_path / "a.cir").exists()
    assert stock.read_bytes() == before


def test_accept_changed_inputs_reverifies_and_goes_on(tmp_path: Path) -> None:
    stock, job = shelf(tmp_path), wide_job(tmp_path)
    saved = saved_result(tmp_path, job, stock)
    edit_stock(stock, "CF-22K,22k,5,0.25,-600,45,", "CF-22K,22k,5,0.25,-600,46,")
    result = export(job, stock, saved, tmp_path / "a.cir", "--accept-changed-inputs", "--json")
    assert result.exit_code == 0, result.output
    payload = json.loads(result.stdout)
    assert payload["reverified"] == {"changed": [f"the stock file {stock}"], "ok": True}
    assert (tmp_path / "a.cir").read_text().count(".model") == 1
    done = reserve(job, stock, "--from", str(saved), "--accept-changed-inputs")
    assert done.exit_code == 0, done.output
    assert "re-verified against the current files" in done.stderr
    assert qty(stock)["MF-23K7"] == 12 - 1  # one board


def test_accept_changed_inputs_refuses_a_design_the_change_breaks(tmp_path: Path) -> None:
    stock, job = shelf(tmp_path), wide_job(tmp_path)
    saved = saved_result(tmp_path, job, stock)
    # the design's R1 line now holds 100 kΩ parts: VBB = 12 V·4.99k/104.99k = 0.57 V, below
    # VBE, so the collector current falls out of the window (hand calculation)
    edit_stock(stock, "resistor,MF-23K7,23.7k,", "resistor,MF-23K7,100k,")
    before = stock.read_bytes()
    for result in (export(job, stock, saved, tmp_path / "a.cir", "--accept-changed-inputs"),
                   reserve(job, stock, "--from", str(saved), "--accept-changed-inputs")):
        assert result.exit_code == 1, result.output
        assert "fails the job" in result.stderr and "ic_min" in result.stderr
    assert not (tmp_path / "a.cir").exists()
    assert stock.read_bytes() == before


def test_a_result_that_records_no_files_is_refused(tmp_path: Path) -> None:
    stock, job = shelf(tmp_path), wide_job(tmp_path)
    saved = tmp_path / "old.json"
    saved.write_text(json.dumps({"status": "optimal", "designs": [SAVED_DESIGN]}))
    result = export(job, stock, saved, tmp_path / "a.cir")
    assert result.exit_code == 2
    assert one_line(result).startswith(f"{saved}: key 'inputs.job': the result records no "
                                       "SHA-256 of its job file")
    accepted = export(job, stock, saved, tmp_path / "a.cir", "--accept-changed-inputs")
    assert accepted.exit_code == 0, accepted.output


# --- reserve re-checks the design -------------------------------------------------------------

def test_reserve_refuses_a_design_that_fails_the_job_unless_force(tmp_path: Path) -> None:
    stock = shelf(tmp_path)
    job = tmp_path / "five_ma.toml"
    # VALUES sets IC ≈ 1.45 mA (hand calculation in test_reserve.py); this job wants
    # 5 mA ± 60 %, at least 2 mA
    job.write_text(WIDE_JOB.replace('ic = "1.5 mA"', 'ic = "5 mA"'))
    before = stock.read_bytes()
    args = ["--values", VALUES, "--transistor", "QN-GP40"]
    refused = reserve(job, stock, *args)
    assert refused.exit_code == 1, refused.output
    line = one_line(refused)
    assert line.startswith(f"{job}: --values fails the job: ic_min (worst ")
    assert "against limit 2 mA" in line and "nothing reserved (--force reserves it anyway)" in line
    assert stock.read_bytes() == before and not list(tmp_path.glob("*.bak"))
    forced = reserve(job, stock, *args, "--force", "--json")
    assert forced.exit_code == 0, forced.output
    assert json.loads(forced.stdout)["design_ok"] is False
    assert "reserved anyway (--force)" in forced.stderr
    assert qty(stock)["CF-47K"] == 40 - 1


# --- malformed result files -------------------------------------------------------------------

@pytest.mark.parametrize(("text", "message"), [
    ("[" * 5000 + "]" * 5000, "nested too deeply"),
    ('{"x": ' * 5000 + "1" + "}" * 5000, "nested too deeply"),
    ('{"designs": [1, }', "not valid JSON"),
    ('{"designs": [}\n', "not valid JSON"),
])
@pytest.mark.parametrize("cmd", ["export", "reserve"])
def test_a_deep_or_malformed_result_is_one_line_exit_2(tmp_path: Path, text: str, message: str,
                                                       cmd: str) -> None:
    stock, job = shelf(tmp_path), wide_job(tmp_path)
    saved = tmp_path / "bad.json"
    saved.write_text(text)
    before = stock.read_bytes()
    result = (export(job, stock, saved, tmp_path / "a.cir") if cmd == "export"
              else reserve(job, stock, "--from", str(saved)))
    assert result.exit_code == 2, result.output
    line = one_line(result)
    assert line.startswith(f"{saved}") and message in line
    assert stock.read_bytes() == before
