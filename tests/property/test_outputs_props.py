"""Output sets on random folders: inputs never change, all outputs or none.

Each example builds a folder with two inputs and a few other entries (regular files, symbolic
links to inputs or to other files, hard links to inputs, folders), declares a random set of
outputs on random names there, stages random contents and places them, with a failure
injected at a random step (while staging, or at the k-th link or rename while placing).
Afterwards, whatever happened:

* the inputs are byte-identical and the paths that named them still do;
* either every output holds its staged content, or the folder is exactly as before (the
  entries and their bytes, links included);
* a file that existed is only ever replaced with force, and no temporary is left behind.
"""

from __future__ import annotations

import os
import shutil
import tempfile
from pathlib import Path

import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from stockbias.outputs import OutputError, OutputSet

NAMES = ["a.txt", "b.txt", "c.html", "plots"]  # entries built in the folder
# output names: mostly free names, now and then an input or the plot folder (repeats weight)
OUT_NAMES = [*NAMES[:3] * 4, "stock.csv", "job.toml", "plots"]
KINDS = [*["absent", "file"] * 3, "link_input", "link_file", "dangling", "hard_input", "folder"]
OPTIONS = ["--report", "--pick-list", "--save"]


def snapshot(folder: Path) -> dict[str, object]:
    """Every entry: a link's target, a file's bytes, or 'dir' (with its own entries)."""
    out: dict[str, object] = {}
    for p in sorted(folder.rglob("*")):
        key = str(p.relative_to(folder))
        if p.is_symlink():
            out[key] = ("link", os.readlink(p))
        elif p.is_dir():
            out[key] = "dir"
        else:
            out[key] = p.read_bytes()
    return out


def build(folder: Path, layout: dict[str, str]) -> dict[str, Path]:
    inputs = {"the stock file": folder / "stock.csv", "the job file": folder / "job.toml"}
    inputs["the stock file"].write_bytes(b"kind,part_id,qty\n")
    inputs["the job file"].write_bytes(b"[supply]\nvolts = 12\n")
    (folder / "other.txt").write_bytes(b"someone else's file\n")
    for name, kind in layout.items():
        path = folder / name
        if path.exists() or path.is_symlink():
            continue
        if kind == "file":
            path.write_bytes(b"an earlier " + name.encode() + b"\n")
        elif kind == "link_input":
            path.symlink_to("stock.csv")
        elif kind == "link_file":
            path.symlink_to("other.txt")
        elif kind == "dangling":
            path.symlink_to("nowhere.txt")
        elif kind == "hard_input":
            os.link(folder / "job.toml", path)
        elif kind == "folder":
            path.mkdir()
    return inputs


class Injected(Exception):
    """The failure a test injects."""


def declare(outs: OutputSet, folder: Path, wanted: list[tuple[str, str]],
            plot: bool) -> dict[str, Path]:
    declared: dict[str, Path] = {}
    for option, name in wanted:
        outs.file(option, folder / name)
        declared[option] = folder / name
    if plot:
        outs.folder("--plot", folder / "plots", ["p.png", "p.svg"])
    return declared


@settings(max_examples=200, derandomize=True, deadline=None)
@given(layout=st.fixed_dictionaries({n: st.sampled_from(KINDS) for n in NAMES}),
       wanted=st.lists(st.tuples(st.sampled_from(OPTIONS), st.sampled_from(OUT_NAMES)),
                       min_size=1, max_size=3, unique_by=lambda t: t[0]),
       plot=st.booleans(), force=st.booleans())
def test_declaring_refuses_inputs_existing_entries_and_clashes(
        layout: dict[str, str], wanted: list[tuple[str, str]], plot: bool,
        force: bool) -> None:
    folder = Path(tempfile.mkdtemp(prefix="outputs-prop-"))
    try:
        inputs = build(folder, layout)
        before = snapshot(folder)
        try:
            declared = declare(OutputSet(inputs, force=force), folder, wanted, plot)
        except OutputError:
            assert snapshot(folder) == before  # refused before anything was written
            return
        assert snapshot(folder) == before  # declaring writes nothing
        names = [p.name for p in declared.values()]
        assert len(set(names)) == len(names)  # no two outputs on one path
        for path in declared.values():
            # never an input (by name, symbolic link or hard link) ...
            assert path.name not in ("stock.csv", "job.toml")
            if os.path.exists(path):
                assert not any(os.path.samefile(path, p) for p in inputs.values())
            # ... and an existing entry only with force, never a folder
            if os.path.lexists(path):
                assert force and not path.is_dir()
        if plot:
            for name in ("p.png", "p.svg"):
                assert not (folder / "plots" / name).exists() or force
    finally:
        shutil.rmtree(folder, ignore_errors=True)


# entries an output may replace with force, and free names
PLACEABLE = [*["absent", "file"] * 2, "link_file", "dangling"]


@settings(max_examples=300, derandomize=True, deadline=None,
          suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(layout=st.fixed_dictionaries({n: st.sampled_from(PLACEABLE) for n in NAMES[:3]}),
       order=st.permutations(NAMES[:3]), count=st.integers(min_value=1, max_value=3),
       plot=st.booleans(),
       fail=st.sampled_from(["none", "staging", "placing", "placing"]),
       fail_at=st.integers(min_value=0, max_value=5),
       interrupt=st.booleans())
def test_outputs_are_placed_all_or_none(
        monkeypatch: pytest.MonkeyPatch, layout: dict[str, str], order: list[str],
        count: int, plot: bool, fail: str, fail_at: int, interrupt: bool) -> None:
    folder = Path(tempfile.mkdtemp(prefix="outputs-prop-"))
    try:
        inputs = build(folder, layout)
        input_bytes = {label: p.read_bytes() for label, p in inputs.items()}
        before = snapshot(folder)
        outs = OutputSet(inputs, force=True)
        declared = declare(outs, folder, list(zip(OPTIONS, order[:count], strict=False)), plot)
        error: type[BaseException] = KeyboardInterrupt if interrupt else Injected
        calls = {"n": 0}

        def failing(real):  # one failure, at call number fail_at + 1
            def wrapper(*args, **kwargs):
                calls["n"] += 1
                if calls["n"] == fail_at + 1:
                    raise error
                return real(*args, **kwargs)
            return wrapper

        contents = {option: f"{option} {i}\n".encode() for i, option in enumerate(declared)}
        placed = None
        try:
            with outs:
                for option, data in contents.items():
                    if fail == "staging" and option == list(contents)[-1]:
                        raise error
                    outs.write_bytes(option, data)
                if plot:
                    with outs.writing("--plot") as tmp:
                        (tmp / "p.png").write_bytes(b"png")
                        (tmp / "p.svg").write_bytes(b"svg")
                if fail == "placing":  # the k-th link or rename while placing fails
                    monkeypatch.setattr(os, "link", failing(os.link))
                    monkeypatch.setattr(os, "replace", failing(os.replace))
                placed = outs.commit()
        except (Injected, KeyboardInterrupt):
            placed = None
        finally:
            monkeypatch.undo()

        assert {label: p.read_bytes() for label, p in inputs.items()} == input_bytes
        after = snapshot(folder)
        if placed is None:
            assert after == before
            return
        for option, path in declared.items():
            assert path.read_bytes() == contents[option] and not path.is_symlink()
        if plot:
            assert (folder / "plots" / "p.png").read_bytes() == b"png"
        assert [k for k in after if k.endswith((".tmp", ".old"))] == []
        # entries that were not outputs are untouched (other.txt behind a replaced link too)
        touched = {p.name for p in declared.values()}
        if plot:
            touched |= {"plots", "plots/p.png", "plots/p.svg"}
        assert {k: v for k, v in after.items() if k not in touched} == \
            {k: v for k, v in before.items() if k not in touched}
    finally:
        shutil.rmtree(folder, ignore_errors=True)
