"""`stockbias demo`: a real design on the bundled shelf, from any folder, installed or not."""

from __future__ import annotations

import os
import re
import shlex
import shutil
import subprocess
import sys
import sysconfig
import venv
from pathlib import Path

import pytest
from typer.testing import CliRunner

from stockbias.cli.app import app
from stockbias.samples import SAMPLES_DIR, sample_names, shown_path

ROOT = Path(__file__).resolve().parent.parent
runner = CliRunner()


def _printed_commands(output: str) -> list[list[str]]:
    """The stockbias commands the demo prints (Equivalent command, Next, A whole board).

    A command wider than the terminal is printed on lines of its own joined by shell
    line continuations (`` \\`` at a line's end); they are read back as one line."""
    output = re.sub(r" \\\n\s*", " ", output)
    output = re.sub(r":\n\s+(\S*stockbias) ", r": \1 ", output)
    found = re.findall(r"(?:Equivalent command|Next: [^:]*|in spec): ((?:\S*/)?stockbias .*)$",
                       output, flags=re.MULTILINE)
    return [shlex.split(c) for c in found]


def test_demo_runs_a_design_on_the_bundled_shelf() -> None:
    result = runner.invoke(app, ["demo"])
    assert result.exit_code == 0, result.output
    assert "Status: optimal" in result.stdout
    assert "Ranked designs" in result.stdout
    assert "stockbias demo --copy-to FOLDER" in result.stdout


@pytest.mark.parametrize("columns", ["80", "120"])
def test_the_printed_commands_run_from_another_folder(tmp_path: Path, columns: str,
                                                      monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.chdir(tmp_path)             # not below the samples: absolute paths
    result = runner.invoke(app, ["demo"], env={"COLUMNS": columns})
    assert result.exit_code == 0, result.output
    commands = _printed_commands(result.stdout)
    assert [c[1] for c in commands] == ["design", "check", "consolidate"]
    for words in commands:
        for word in words:
            if word.endswith((".csv", ".toml")):
                assert Path(word).is_absolute() and Path(word).parent == SAMPLES_DIR
    check = runner.invoke(app, commands[1][1:])
    assert check.exit_code == 0, check.output    # the best design passes its own check


def test_copy_to_copies_every_sample_and_runs_on_the_copies(
        tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.chdir(tmp_path)
    result = runner.invoke(app, ["demo", "--copy-to", "my samples"])
    assert result.exit_code == 0, result.output
    folder = tmp_path / "my samples"
    assert sorted(p.relative_to(folder).as_posix() for p in folder.rglob("*")
                  if p.is_file()) == sample_names()
    assert "device_data/fernhill_models.lib" in sample_names()   # subfolders too
    for name in sample_names():
        assert (folder / name).read_bytes() == (SAMPLES_DIR / name).read_bytes()
    assert "Sample files copied to 'my samples'" in result.stdout
    commands = _printed_commands(result.stdout)
    assert "'my samples/line_driver_job.toml'" in result.stdout   # quoted for the shell
    check = runner.invoke(app, commands[1][1:])
    assert check.exit_code == 0, check.output
    # a second copy would overwrite the user's copies: refused, nothing changed
    (folder / "workshop_drawers.csv").write_text("my own edits\n")
    again = runner.invoke(app, ["demo", "--copy-to", "my samples"])
    assert again.exit_code == 2
    assert "option '--copy-to': the file exists; nothing written (--force replaces it)" \
        in again.stderr
    assert (folder / "workshop_drawers.csv").read_text() == "my own edits\n"
    forced = runner.invoke(app, ["demo", "--copy-to", "my samples", "--force"])
    assert forced.exit_code == 0, forced.output
    assert (folder / "workshop_drawers.csv").read_bytes() == \
        (SAMPLES_DIR / "workshop_drawers.csv").read_bytes()


def test_shown_path_relative_below_the_current_folder_else_absolute(tmp_path: Path) -> None:
    (tmp_path / "a b").mkdir()
    inside = tmp_path / "a b" / "x.csv"
    assert shown_path(inside, tmp_path) == "'a b/x.csv'"
    assert shown_path(inside, tmp_path / "a b") == "x.csv"
    elsewhere = tmp_path / "c"
    elsewhere.mkdir()
    assert shown_path(inside, elsewhere) == shlex.quote(str(inside))


def test_the_checkout_reaches_the_samples_as_inventory_samples() -> None:
    """One copy of each sample: inventory_samples is a link to the package's folder."""
    link = ROOT / "inventory_samples"
    assert link.is_symlink() and link.resolve() == SAMPLES_DIR
    assert "samples/*" in (ROOT / "pyproject.toml").read_text()


@pytest.mark.slow
def test_an_installed_wheel_runs_the_demo_from_any_folder(tmp_path: Path) -> None:
    """Build a wheel, install it alone into a fresh virtual environment, run the demo
    elsewhere.  The dependencies come from this environment's site-packages through a
    .pth line (after the wheel's own folder, so the wheel's stockbias is the one found)."""
    src = tmp_path / "src"
    src.mkdir()
    for name in ("pyproject.toml", "README.md"):
        shutil.copy(ROOT / name, src / name)
    shutil.copytree(ROOT / "stockbias", src / "stockbias",
                    ignore=shutil.ignore_patterns("__pycache__"))
    subprocess.run([sys.executable, "-m", "pip", "wheel", "--no-deps", "-q", "-w",
                    str(tmp_path / "dist"), str(src)], check=True, capture_output=True,
                   timeout=600)
    wheel, = (tmp_path / "dist").glob("stockbias-*.whl")
    env_dir = tmp_path / "venv"
    venv.create(env_dir, with_pip=False)
    python = env_dir / "bin" / "python"
    subprocess.run([sys.executable, "-m", "pip", "--python", str(python), "install", "-q",
                    "--no-deps", "--no-index", str(wheel)], check=True, capture_output=True,
                   timeout=600)
    site = Path(subprocess.run([str(python), "-c", "import sysconfig; print(sysconfig."
                                "get_paths()['purelib'])"], check=True, capture_output=True,
                               text=True).stdout.strip())
    (site / "_deps.pth").write_text(sysconfig.get_paths()["purelib"] + "\n")
    where = tmp_path / "elsewhere"
    where.mkdir()
    env = {k: v for k, v in os.environ.items() if not k.startswith("PYTHON")}
    env["COLUMNS"] = "80"
    found = subprocess.run([str(python), "-c", "import stockbias; print(stockbias.__file__)"],
                           cwd=where, env=env, check=True, capture_output=True, text=True)
    assert Path(found.stdout.strip()).is_relative_to(env_dir)   # the wheel, not the checkout
    names = subprocess.run([str(python), "-c", "from stockbias.samples import sample_names; "
                            "print('\\n'.join(sample_names()))"], cwd=where, env=env,
                           check=True, capture_output=True, text=True).stdout.split()
    assert names == sample_names()                  # every sample shipped, subfolders too
    demo = subprocess.run([str(env_dir / "bin" / "stockbias"), "demo"], cwd=where, env=env,
                          capture_output=True, text=True, timeout=600, check=False)
    assert demo.returncode == 0, demo.stderr
    assert "Status: optimal" in demo.stdout
    commands = _printed_commands(demo.stdout)
    assert len(commands) == 3
    # `stockbias` is not on the PATH here: the commands name the program as it was started
    assert all(Path(words[0]) == env_dir / "bin" / "stockbias" for words in commands)
    for words in commands:
        assert all(Path(w).is_relative_to(env_dir) for w in words if w.endswith(".csv"))
    check = subprocess.run([str(env_dir / "bin" / "stockbias"), *commands[1][1:]], cwd=where,
                           env=env, capture_output=True, text=True, timeout=600, check=False)
    assert check.returncode == 0, check.stdout + check.stderr
