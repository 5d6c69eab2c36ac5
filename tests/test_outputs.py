"""Output files: never over an input, never over a file without --force, all or none.

Every command that writes files is run with every output option aimed at the stock file, at
the job file and at an existing file: each is refused with exit 2 and one line naming the
option, and the file is byte-identical afterwards.  The placing rules (symbolic links, a
failing second output, an interrupt, a read-only folder) are checked on the commands and on
:class:`stockbias.outputs.OutputSet` itself.
"""

from __future__ import annotations

import contextlib
import os
import shutil
import subprocess
from collections.abc import Iterator
from pathlib import Path

import pytest
from test_reserve import WIDE_JOB
from typer.testing import CliRunner

from stockbias.cli.app import app
from stockbias.errors import InputError
from stockbias.outputs import OutputError, OutputSet

ROOT = Path(__file__).resolve().parent.parent
SAMPLES = ROOT / "inventory_samples"
# The job is test_reserve.WIDE_JOB: a divider stage whose collector-current window is wide
# enough that GOOD meets it with a wide margin (hand calculation: VBB = 12 V·4.99k/28.69k =
# 2.09 V, IC ≈ (2.09 − 0.65) V / 0.94 kΩ = 1.5 mA against 0.6–2.4 mA).
GOOD = "R1=MF-23K7,R2=MF-4K99,RC=CF-2K2,RE=CF-470R+CF-470R"
GOOD_T = "QN-LB1"

runner = CliRunner()


@pytest.fixture
def bench(tmp_path: Path) -> dict[str, Path]:
    """Copies of the sample job, board and shelf in a folder of their own."""
    out = {"job": tmp_path / "wide_job.toml"}
    out["job"].write_text(WIDE_JOB)
    for key, name in (("board", "distribution_amp_board.toml"), ("shelf", "workshop_drawers.csv")):
        out[key] = tmp_path / name
        shutil.copyfile(SAMPLES / name, out[key])
    return out


def listing(folder: Path) -> dict[str, bytes | None]:
    """Every entry under ``folder`` (hidden ones too) with its bytes (None for a folder)."""
    return {str(p.relative_to(folder)): (None if p.is_dir() or p.is_symlink()
                                         else p.read_bytes())
            for p in sorted(folder.rglob("*"))}


def command(kind: str, b: dict[str, Path]) -> list[str]:
    """Arguments of a command that reads the job (or board) and the stock file."""
    job, board, shelf = str(b["job"]), str(b["board"]), str(b["shelf"])
    return {
        "check": ["check", job, "-i", shelf, "-v", GOOD, "-t", GOOD_T, "--samples", "0"],
        "design": ["design", job, "-i", shelf],
        "export": ["export", job, "-i", shelf, "-v", GOOD, "-t", GOOD_T],
        "consolidate": ["consolidate", board, "-i", shelf],
        "substitute": ["substitute", job, "-i", shelf, "-v", GOOD, "-t", GOOD_T],
    }[kind]


FILE_OPTIONS = [("check", "--report"), ("check", "--pick-list"), ("design", "--save"),
                ("design", "--report"), ("export", "--netlist"), ("export", "--pick-list"),
                ("consolidate", "--report"), ("substitute", "--report")]
FOLDER_OPTIONS = [("check", "--plot", "qpoints.png"), ("design", "--plot",
                                                        "design_cost_margin.svg")]


def one_line(result) -> str:
    """The one error line, after the command it names (``stockbias check: ``)."""
    lines = result.stderr.strip().splitlines()
    assert len(lines) == 1, result.output
    command, _, rest = lines[0].partition(": ")
    assert command.split()[0] == "stockbias" and len(command.split()) in (2, 3), lines[0]
    return rest


# --- every command x every output option ---------------------------------------------------

def job_of(kind: str) -> str:
    return "board" if kind == "consolidate" else "job"


@pytest.mark.parametrize(("kind", "option", "target"),
                         [(k, o, t) for k, o in FILE_OPTIONS for t in ("shelf", job_of(k))])
def test_an_output_aimed_at_an_input_is_refused(bench: dict[str, Path], kind: str, option: str,
                                                target: str) -> None:
    before = listing(bench["job"].parent)
    for force in ([], ["--force"]):
        result = runner.invoke(app, [*command(kind, bench), option, str(bench[target]),
                                     *force])
        assert result.exit_code == 2, result.output
        line = one_line(result)
        assert line.startswith(f"{bench[target]}: option '{option}': this is the ")
        assert "an input of the command" in line
    assert listing(bench["job"].parent) == before  # byte-identical, nothing added


@pytest.mark.parametrize(("kind", "option"), FILE_OPTIONS)
def test_an_existing_file_is_refused_without_force(bench: dict[str, Path], kind: str,
                                                   option: str) -> None:
    old = bench["job"].parent / "kept.out"
    old.write_bytes(b"an earlier result\n")
    before = listing(bench["job"].parent)
    result = runner.invoke(app, [*command(kind, bench), option, str(old)])
    assert result.exit_code == 2, result.output
    assert one_line(result) == (f"{old}: option '{option}': the file exists; nothing written "
                                "(--force replaces it)")
    assert listing(bench["job"].parent) == before


@pytest.mark.parametrize(("kind", "option"), FILE_OPTIONS)
def test_a_link_to_an_input_is_refused_even_with_force(bench: dict[str, Path], kind: str,
                                                       option: str) -> None:
    soft = bench["job"].parent / "soft.out"
    soft.symlink_to(bench["shelf"].name)
    hard = bench["job"].parent / "hard.out"
    os.link(bench[job_of(kind)], hard)
    before = listing(bench["job"].parent)
    for link in (soft, hard):
        result = runner.invoke(app, [*command(kind, bench), option, str(link), "--force"])
        assert result.exit_code == 2, result.output
        assert "an input of the command" in one_line(result)
    assert listing(bench["job"].parent) == before
    assert soft.is_symlink()


@pytest.mark.parametrize(("kind", "option", "name"), FOLDER_OPTIONS)
def test_a_plot_folder_with_the_plot_files_is_refused_without_force(
        bench: dict[str, Path], kind: str, option: str, name: str) -> None:
    folder = bench["job"].parent / "plots"
    folder.mkdir()
    (folder / name).write_bytes(b"an older plot")
    before = listing(bench["job"].parent)
    result = runner.invoke(app, [*command(kind, bench), option, str(folder)])
    assert result.exit_code == 2, result.output
    assert one_line(result) == (f"{folder / name}: option '{option}': the file exists; "
                                "nothing written (--force replaces it)")
    assert listing(bench["job"].parent) == before


@pytest.mark.parametrize(("kind", "option"), FILE_OPTIONS)
def test_a_missing_folder_is_one_line(bench: dict[str, Path], kind: str, option: str) -> None:
    target = bench["job"].parent / "no_such_folder" / "out.txt"
    result = runner.invoke(app, [*command(kind, bench), option, str(target)])
    assert result.exit_code == 2, result.output
    assert one_line(result) == (f"{target}: option '{option}': the folder {target.parent} "
                                "does not exist; create it first")


@pytest.mark.parametrize(("kind", "option"), [("check", "--report"), ("export", "--netlist")])
def test_two_outputs_on_one_path_are_refused(bench: dict[str, Path], kind: str,
                                             option: str) -> None:
    out = bench["job"].parent / "same.txt"
    result = runner.invoke(app, [*command(kind, bench), option, str(out), "--pick-list",
                                 str(out)])
    assert result.exit_code == 2, result.output
    assert f"option '--pick-list': {option} writes this path too" in one_line(result)
    assert not out.exists()


# --- writing, --force and links ------------------------------------------------------------

def test_check_writes_all_three_outputs_and_force_replaces_them(bench: dict[str, Path]) -> None:
    folder = bench["job"].parent
    args = [*command("check", bench), "--report", str(folder / "r.html"), "--pick-list",
            str(folder / "p.csv"), "--plot", str(folder / "plots")]
    first = runner.invoke(app, args)
    assert first.exit_code == 0, first.output
    assert (folder / "r.html").read_text().startswith("<!DOCTYPE html>")
    assert (folder / "p.csv").read_text().startswith("location,")
    assert sorted(p.name for p in (folder / "plots").iterdir()) == ["qpoints.png",
                                                                   "qpoints.svg"]
    assert not list(folder.rglob(".*.tmp"))  # no temporary left
    (folder / "p.csv").write_text("stale\n")
    again = runner.invoke(app, args)
    assert again.exit_code == 2  # they all exist now
    forced = runner.invoke(app, [*args, "--force"])
    assert forced.exit_code == 0, forced.output
    assert (folder / "p.csv").read_text().startswith("location,")
    assert not list(folder.rglob(".*.tmp")) and not list(folder.rglob(".*.old"))


def test_force_replaces_a_link_itself_never_its_target(bench: dict[str, Path]) -> None:
    folder = bench["job"].parent
    elsewhere = folder / "elsewhere.cir"
    elsewhere.write_text("* somebody else's netlist\n")
    link = folder / "out.cir"
    link.symlink_to(elsewhere.name)
    args = [*command("export", bench), "--netlist", str(link)]
    refused = runner.invoke(app, args)
    assert refused.exit_code == 2
    assert "a symbolic link is there" in one_line(refused)
    done = runner.invoke(app, [*args, "--force"])
    assert done.exit_code == 0, done.output
    assert not link.is_symlink() and ".model" in link.read_text()
    assert elsewhere.read_text() == "* somebody else's netlist\n"


def test_netlist_to_stdout_is_unchanged(bench: dict[str, Path]) -> None:
    result = runner.invoke(app, [*command("export", bench), "--netlist", "-"])
    assert result.exit_code == 0, result.output
    assert ".model" in result.stdout


# --- all or none ----------------------------------------------------------------------------

def test_a_failing_second_output_leaves_no_first_output(bench: dict[str, Path],
                                                        monkeypatch: pytest.MonkeyPatch) -> None:
    import stockbias.render.report as report

    def broken(path, **_k):  # as render_report reports a full disk, on the path it was given
        raise InputError("cannot write the report: No space left on device", file=str(path),
                         column="--report")

    monkeypatch.setattr(report, "render_report", broken)
    folder = bench["job"].parent
    before = listing(folder)
    result = runner.invoke(app, [*command("check", bench), "--plot", str(folder / "plots"),
                                 "--report", str(folder / "r.html"), "--pick-list",
                                 str(folder / "p.csv")])
    assert result.exit_code == 2, result.output
    assert one_line(result) == (f"{folder / 'r.html'}: option '--report': cannot write the "
                                "report: No space left on device")
    assert listing(folder) == before  # no plots, no pick list, no temporaries


@pytest.mark.parametrize("where", ["analysis", "writing"])
def test_an_interrupt_leaves_no_files(bench: dict[str, Path], monkeypatch: pytest.MonkeyPatch,
                                      where: str) -> None:
    import stockbias.cli.check_cmd as check_cmd
    import stockbias.render.pick_list as pick_list

    def interrupt(*_a, **_k):
        raise KeyboardInterrupt

    if where == "analysis":
        monkeypatch.setattr(check_cmd, "analyze", interrupt)
    else:  # after the plots and the report are staged
        monkeypatch.setattr(pick_list, "write_pick_list", interrupt)
    folder = bench["job"].parent
    before = listing(folder)
    result = runner.invoke(app, [*command("check", bench), "--plot", str(folder / "plots"),
                                 "--report", str(folder / "r.html"), "--pick-list",
                                 str(folder / "p.csv")])
    assert result.exit_code == 130, result.output
    assert listing(folder) == before


def test_a_failure_while_placing_puts_the_old_files_back(tmp_path: Path) -> None:
    first, second = tmp_path / "a.txt", tmp_path / "b.txt"
    first.write_text("old a\n")
    outs = OutputSet({}, force=True)
    outs.file("--report", first)
    outs.file("--pick-list", second)
    with outs:
        outs.write_text("--report", "new a\n")
        outs.write_text("--pick-list", "new b\n")
        second.mkdir()  # something takes the second path before the outputs are placed
        with pytest.raises(OutputError, match="a folder is there"):
            outs.commit()
    assert first.read_text() == "old a\n"
    assert sorted(p.name for p in tmp_path.iterdir()) == ["a.txt", "b.txt"]


def test_a_file_that_appears_meanwhile_is_not_replaced(tmp_path: Path) -> None:
    out = tmp_path / "r.html"
    outs = OutputSet({})
    outs.file("--report", out)
    with outs:
        outs.write_text("--report", "mine\n")
        out.write_text("theirs\n")
        with pytest.raises(OutputError, match="the file exists"):
            outs.commit()
    assert out.read_text() == "theirs\n"
    assert [p.name for p in tmp_path.iterdir()] == ["r.html"]


def test_new_files_get_the_usual_permissions(tmp_path: Path) -> None:
    outs = OutputSet({})
    outs.file("--save", tmp_path / "r.json")
    with outs:
        outs.write_text("--save", "{}\n")
        written = outs.commit()
    mask = os.umask(0)
    os.umask(mask)
    assert written == {"--save": [tmp_path / "r.json"]}
    assert (tmp_path / "r.json").stat().st_mode & 0o777 == 0o666 & ~mask


# --- read-only folders ----------------------------------------------------------------------

@contextlib.contextmanager
def read_only(folder: Path) -> Iterator[None]:
    """Make a folder read-only: its mode for an ordinary user; the immutable attribute for
    root, who is not bound by modes (skipped where neither works)."""
    if os.geteuid() != 0:
        folder.chmod(0o555)
        try:
            yield
        finally:
            folder.chmod(0o755)
        return
    chattr = shutil.which("chattr")
    if chattr is None or subprocess.run([chattr, "+i", str(folder)], capture_output=True,
                                        check=False).returncode != 0:
        pytest.skip("cannot make a read-only folder as root here")
    try:
        yield
    finally:
        subprocess.run([chattr, "-i", str(folder)], check=True)


@pytest.mark.parametrize(("kind", "option"), [("check", "--report"), ("export", "--netlist"),
                                              ("check", "--plot")])
def test_a_read_only_folder_is_one_line_exit_2(bench: dict[str, Path], tmp_path: Path,
                                               kind: str, option: str) -> None:
    locked = tmp_path / "locked"
    locked.mkdir()
    with read_only(locked):
        target = locked / ("plots" if option == "--plot" else "out.txt")
        result = runner.invoke(app, [*command(kind, bench), option, str(target)])
        assert result.exit_code == 2, result.output
        line = one_line(result)
        assert f"option '{option}'" in line
        assert "not writable" in line or "Permission denied" in line or \
            "Operation not permitted" in line
        assert list(locked.iterdir()) == []


def test_an_unwritable_system_folder_is_one_line(bench: dict[str, Path]) -> None:
    # /proc accepts no new files, for root too (even where access() says it may write)
    result = runner.invoke(app, [*command("check", bench), "--report", "/proc/stockbias.html"])
    assert result.exit_code == 2, result.output
    assert one_line(result).startswith("/proc/stockbias.html: option '--report': ")


@pytest.mark.parametrize("option", ["--netlist", "--pick-list"])
def test_export_never_writes_over_its_from_file(bench: dict[str, Path], option: str) -> None:
    saved = bench["job"].parent / "result.json"
    saved.write_text('{"designs": []}\n')
    before = listing(bench["job"].parent)
    result = runner.invoke(app, ["export", str(bench["job"]), "-i", str(bench["shelf"]),
                                 "--from", str(saved), option, str(saved), "--force"])
    assert result.exit_code == 2, result.output
    assert one_line(result) == (f"{saved}: option '{option}': this is the saved result "
                                "(--from), an input of the command; it is never written over "
                                "(even with --force)")
    assert listing(bench["job"].parent) == before


def looks_written(option: str, data: bytes) -> bool:
    """The file holds what the option writes (not the stale bytes put there first)."""
    text = data.decode("utf-8")
    return {"--report": text.startswith("<!DOCTYPE html>"),
            "--pick-list": text.startswith("location,part_id"),
            "--save": '"designs"' in text and '"inputs"' in text,
            "--netlist": ".model" in text and text.rstrip().endswith(".end")}[option]


@pytest.mark.parametrize(("kind", "option"), FILE_OPTIONS)
def test_force_replaces_an_existing_file(bench: dict[str, Path], kind: str,
                                         option: str) -> None:
    folder = bench["job"].parent
    out = folder / "earlier.out"
    out.write_bytes(b"stale\n")
    others = {k: v for k, v in listing(folder).items() if k != "earlier.out"}
    result = runner.invoke(app, [*command(kind, bench), option, str(out), "--force"])
    assert result.exit_code == 0, result.output
    assert looks_written(option, out.read_bytes())
    assert {k: v for k, v in listing(folder).items() if k != "earlier.out"} == others


def test_a_folder_output_with_subfolders_is_placed_whole_or_not_at_all(tmp_path: Path) -> None:
    names = ["a.csv", "data/b.lib", "data/deep/c.csv"]
    target = tmp_path / "copy"
    outs = OutputSet({})
    outs.folder("--copy-to", target, names)
    with outs:
        staged = outs.stage("--copy-to")
        for n in names:
            (staged / n).parent.mkdir(parents=True, exist_ok=True)
            (staged / n).write_text(n)
        written = outs.commit()
    assert sorted(p.relative_to(target).as_posix() for p in written["--copy-to"]) == names
    assert all((target / n).read_text() == n for n in names)
    assert sorted(p.name for p in tmp_path.iterdir()) == ["copy"]     # no temporaries left

    # the last file cannot be placed (a folder took its path): nothing stays, not even
    # the folders the commit made
    again = tmp_path / "again"
    outs = OutputSet({})
    outs.folder("--copy-to", again, names)
    with outs:
        staged = outs.stage("--copy-to")
        for n in names:
            (staged / n).parent.mkdir(parents=True, exist_ok=True)
            (staged / n).write_text(n)
        (again / "data" / "deep" / "c.csv").mkdir(parents=True)
        with pytest.raises(OutputError, match="a folder is there"):
            outs.commit()
    assert sorted(p.relative_to(again).as_posix() for p in again.rglob("*")) == \
        ["data", "data/deep", "data/deep/c.csv"]                    # only what was there
    assert sorted(p.name for p in tmp_path.iterdir()) == ["again", "copy"]
