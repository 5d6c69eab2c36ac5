"""The README's commands run as written and show what the tool prints today.

Every fenced block of README.md is read:

* a ``toml`` block is a job file and must load;
* a ``sh`` block is a list of commands (``\\`` continues a line, ``#`` starts a
  comment); each must exit 0.  A plain block right after it is the output of its
  last command;
* a plain block whose lines start with ``$ `` is a session: each ``$`` line is a
  command and the lines up to the next one are its output (``$ echo $?`` shows the
  exit code of the command before).

The blocks run in order, in one temporary folder holding a copy of the bundled
samples as ``inventory_samples/``, so files one block writes (``my_shelf.csv``,
``best.json``) are there for the next.  Shown output is compared with the real
output at 120 columns after both are normalised: table borders dropped, all
white space (line breaks too) one space, run times ``in 1.2 s`` as ``in … s``.
A line ``...`` stands for any output; the text between two of them must appear in
the output, in order.

When this test fails after a change to a screen, paste the current output it
prints into the README's example (keep the ``...`` where lines are left out).
"""

from __future__ import annotations

import re
import shlex
import shutil
import subprocess
from dataclasses import dataclass, field
from pathlib import Path

import pytest
from typer.testing import CliRunner

from stockbias.cli.app import app
from stockbias.job import parse_job
from stockbias.samples import SAMPLES_DIR

README = Path(__file__).resolve().parent.parent / "README.md"

#: Commands the test does not run, and why.
SKIPPED = {
    "bash scripts/setup.sh": "installs system packages and the virtual environment; "
                             ".ci/run runs exactly this on a clean checkout",
}

_BORDERS = re.compile(r"[│┃┏┓┗┛┡┩┣┫┳┻╇╋━─┌┐└┘├┤┬┴┼╭╮╯╰]")
_TIME = re.compile(r"\bin \d+(?:\.\d+)? s\b")


def normalised(text: str) -> str:
    return " ".join(_TIME.sub("in … s", _BORDERS.sub(" ", text)).split())


@dataclass
class Step:
    """One command of the README, the output it shows and where it is."""

    command: str
    line: int
    shown: list[str] | None = None     # None: the README shows no output
    exit_shown: int | None = None      # from a following `$ echo $?`
    must_succeed: bool = False


@dataclass
class Block:
    language: str
    line: int
    lines: list[str] = field(default_factory=list)


def blocks(text: str) -> list[Block]:
    out: list[Block] = []
    current: Block | None = None
    for number, line in enumerate(text.splitlines(), start=1):
        if line.startswith("```"):
            if current is None:
                current = Block(line[3:].strip(), number)
            else:
                out.append(current)
                current = None
        elif current is not None:
            current.lines.append(line)
    assert current is None, f"README.md:{current.line}: a code block is not closed"
    return out


def _joined(lines: list[str], start: int) -> list[tuple[int, str]]:
    """Commands with their `\\` continuations joined, comments and blank lines dropped."""
    out: list[tuple[int, str]] = []
    pending, first = "", 0
    for offset, raw in enumerate(lines):
        if not pending:
            first = start + offset
        pending += raw.rstrip().removesuffix("\\") + " "
        if raw.rstrip().endswith("\\"):
            continue
        words = " ".join(shlex.split(pending, comments=True))
        if words:
            out.append((first, pending.strip()))
        pending = ""
    return out


def steps(text: str) -> list[Step]:
    found: list[Step] = []
    all_blocks = blocks(text)
    for i, block in enumerate(all_blocks):
        if block.language == "sh":
            for line, command in _joined(block.lines, block.line + 1):
                found.append(Step(command, line, must_succeed=True))
            after = all_blocks[i + 1] if i + 1 < len(all_blocks) else None
            if after is not None and after.language == "" and \
                    not any(x.startswith("$ ") for x in after.lines) and \
                    text.splitlines()[block.line + len(block.lines) + 1:after.line - 1] \
                    in ([], [""]):
                found[-1].shown = after.lines
        elif block.language == "" and block.lines and block.lines[0].startswith("$ "):
            session: list[tuple[int, list[str]]] = []
            for offset, line in enumerate(block.lines):
                if line.startswith("$ "):
                    session.append((block.line + 1 + offset, [line[2:]]))
                elif session[-1][1][-1].rstrip().endswith("\\"):
                    session[-1][1].append(line)
                else:
                    session[-1][1].append("\0" + line)
            for line, parts in session:
                command = [p for p in parts if not p.startswith("\0")]
                shown = [p[1:] for p in parts if p.startswith("\0")]
                if command == ["echo $?"]:
                    found[-1].exit_shown = int(shown[0])
                    continue
                (_, joined), = _joined(command, line)
                found.append(Step(joined, line, shown=shown))
    return found


def _segments(shown: list[str]) -> list[str]:
    parts, current = [], []
    for line in shown:
        if line.strip() == "...":
            parts.append(current)
            current = []
        else:
            current.append(line)
    parts.append(current)
    return [normalised("\n".join(p)) for p in parts if normalised("\n".join(p))]


def _run(step: Step, folder: Path, monkeypatch: pytest.MonkeyPatch) -> tuple[int, str]:
    words = shlex.split(step.command, comments=True)
    monkeypatch.chdir(folder)
    if words[0] in ("stockbias", ".venv/bin/stockbias"):   # the checkout's own copy
        result = CliRunner().invoke(app, words[1:], env={"COLUMNS": "120"})
        assert "Traceback" not in result.output, result.output
        return result.exit_code, result.output
    if words[0] == "cp" and len(words) == 3:
        shutil.copyfile(folder / words[1], folder / words[2])
        return 0, ""
    if words[0] == "cat" and len(words) == 2:
        return 0, (folder / words[1]).read_text()
    if words[0] == "ngspice":
        if shutil.which("ngspice") is None:
            pytest.skip("ngspice is not installed")
        done = subprocess.run(words, cwd=folder, capture_output=True, text=True, timeout=120,
                              check=False)
        return done.returncode, done.stdout + done.stderr
    raise AssertionError(f"README.md:{step.line}: the README test does not know how to run "
                         f"{step.command!r}; teach tests/test_readme.py or add it to SKIPPED")


def test_the_readme_examples_run_and_show_the_current_output(
        tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    shutil.copytree(SAMPLES_DIR, tmp_path / "inventory_samples")
    ran = 0
    for step in steps(README.read_text(encoding="utf-8")):
        if any(step.command.startswith(prefix) for prefix in SKIPPED):
            continue
        code, output = _run(step, tmp_path, monkeypatch)
        ran += 1
        where = f"README.md:{step.line}: {step.command}"
        if step.must_succeed:
            assert code == 0, f"{where}\nexit {code}:\n{output}"
        if step.exit_shown is not None:
            assert code == step.exit_shown, f"{where}\nexit {code}, README shows " \
                                            f"{step.exit_shown}:\n{output}"
        if step.shown is not None:
            actual = normalised(output)
            at = 0
            for segment in _segments(step.shown):
                found = actual.find(segment, at)
                assert found >= 0, (f"{where}\nthe README shows\n  {segment}\nwhich the "
                                    f"command no longer prints (in this order); it prints "
                                    f"now:\n{output}")
                at = found + len(segment)
    assert ran >= 8          # the error example, check, consolidate and the bench session
    # the bench session leaves the shelf it reserved from and no lock beside it
    assert sorted(p.name for p in tmp_path.iterdir() if p.name.startswith(".")) == []


def test_the_readme_job_example_loads() -> None:
    tomls = [b for b in blocks(README.read_text(encoding="utf-8")) if b.language == "toml"]
    assert tomls
    for block in tomls:
        job = parse_job("\n".join(block.lines), f"README.md:{block.line}")
        assert job.stages


def test_the_reader_finds_sessions_outputs_and_continuations() -> None:
    text = ("```sh\ncp a b   # copy\nstockbias x \\\n    --y z\n```\n\n```\nout 1\n...\nout 2\n"
            "```\n\n```\n$ stockbias q\nline\n$ echo $?\n2\n```\n")
    found = steps(text)
    assert [(s.command, s.line, s.must_succeed) for s in found] == [
        ("cp a b   # copy", 2, True), ("stockbias x      --y z", 3, True),
        ("stockbias q", 14, False)]
    assert found[1].shown == ["out 1", "...", "out 2"]
    assert (found[2].shown, found[2].exit_shown) == (["line"], 2)
    assert _segments(found[1].shown) == ["out 1", "out 2"]
    assert normalised("│ a  │ b │\n  Status: optimal in 2.12 s") == "a b Status: optimal in … s"
