"""The files one command writes: declared up front, staged, then all placed or none.

A command that writes files (``--report``, ``--pick-list``, ``--netlist``,
``--save``, ``--plot``) builds one :class:`OutputSet` before it reads or
analyses anything:

* every output path is checked first: its folder must exist and be writable;
  it must not be an input of the command (the job file, the stock file, a
  ``--from`` result ...; compared by real path and by ``(st_dev, st_ino)``, so
  a symbolic or hard link to an input is caught too); two outputs may not
  share a path; an existing file is refused unless ``force``; an existing
  folder is always refused where a file goes;
* a symbolic link at an output path is refused unless ``force``, and then the
  link itself is replaced by the new file: the file it points to is never
  written;
* each output is written to a temporary file in its own folder
  (``.<name>.<random>.tmp``, fsynced); a ``--plot`` folder's files are
  written into a temporary folder next to it;
* :meth:`OutputSet.commit` moves every staged file into place at the end;
  a file that did not exist is linked in without replacing anything that
  appeared meanwhile; a file replaced under ``force`` is kept until every
  output is placed, so a failure part way puts the old files back;
* on any exception, ``KeyboardInterrupt`` included, the staged temporaries
  are removed and nothing is left (use the set as a context manager).

Every problem is an :class:`~stockbias.errors.InputError` whose ``column`` is
the option (``column="--report"``): exit code 2 and one line.
"""

from __future__ import annotations

import contextlib
import errno
import os
import secrets
import shutil
import stat
import tempfile
from collections.abc import Iterable, Iterator, Mapping
from dataclasses import dataclass, field
from pathlib import Path
from types import TracebackType

from .errors import InputError

__all__ = ["OutputError", "OutputSet", "file_identity", "fsync_path"]


class OutputError(InputError):
    """An output path that cannot or may not be written (exit 2); ``column`` is the option."""

    field_label = "option"


def file_identity(path: str | Path) -> tuple[int, int] | None:
    """``(st_dev, st_ino)`` of the file a path leads to (links followed), None if none."""
    try:
        st = os.stat(path)
    except OSError:
        return None
    return st.st_dev, st.st_ino


def _real_target(path: Path) -> str:
    """The real path a new file at ``path`` would have (its folder resolved, name kept)."""
    return os.path.join(os.path.realpath(path.parent), path.name)


@dataclass
class _Output:
    option: str
    path: Path                      # as given
    folder: bool = False            # a --plot folder
    names: tuple[str, ...] = ()     # files a folder output may write
    staged: Path | None = None      # temporary file or folder


@dataclass
class _Placed:
    final: Path
    option: str
    undo: Path | None               # hard link to the file it replaced (None: it was new)
    replaced: bool = False          # replaced a file that could not be kept (no hard links)


@dataclass
class OutputSet:
    """The output files of one command (see the module notes).

    Parameters
    ----------
    inputs : Mapping[str, str or Path or None]
        What each input is called in messages (``"the stock file (--inventory)"``)
        → its path; ``None`` entries are skipped.
    force : bool
        Replace existing files (and symbolic links, not what they point to).
    """

    inputs: Mapping[str, str | Path | None]
    force: bool = False
    _outputs: dict[str, _Output] = field(default_factory=dict)

    # --- declaring -----------------------------------------------------------

    def _input_ids(self) -> list[tuple[str, tuple[int, int] | None, str]]:
        out = []
        for label, p in self.inputs.items():
            if p is None or str(p) == "-":
                continue
            out.append((label, file_identity(p), os.path.realpath(p)))
        return out

    def _refuse(self, option: str, path: Path, message: str) -> OutputError:
        return OutputError(message, file=str(path), column=option)

    def _check_folder(self, option: str, path: Path) -> None:
        parent = path.parent
        if not parent.is_dir():
            raise self._refuse(option, path, f"the folder {parent} does not exist; "
                               "create it first")
        if not os.access(parent, os.W_OK | os.X_OK):
            raise self._refuse(option, path, f"the folder {parent} is not writable; "
                               "nothing written")

    def _check_not_input(self, option: str, path: Path) -> None:
        ident = file_identity(path) if os.path.lexists(path) else None
        target = _real_target(path)
        for label, input_id, real in self._input_ids():
            if (ident is not None and ident == input_id) or target == real or \
                    os.path.realpath(path) == real:
                raise self._refuse(option, path, f"this is {label}, an input of the "
                                   "command; it is never written over (even with --force)")

    def _check_file(self, option: str, path: Path) -> None:
        """Checks for one file path (a file output, or a file of a folder output)."""
        self._check_not_input(option, path)
        try:
            st = os.lstat(path)
        except FileNotFoundError:
            return
        except OSError as exc:
            raise self._refuse(option, path, f"cannot examine the path: {exc.strerror}") \
                from None
        if stat.S_ISLNK(st.st_mode):
            if not self.force:
                raise self._refuse(option, path, "a symbolic link is there; nothing written "
                                   "(--force replaces the link itself, never the file it "
                                   "points to)")
            return
        if stat.S_ISDIR(st.st_mode):
            raise self._refuse(option, path, "a folder is there; give a file name")
        if not self.force:
            raise self._refuse(option, path, "the file exists; nothing written (--force "
                               "replaces it)")

    def _check_unique(self, option: str, targets: Iterable[str]) -> None:
        mine = set(targets)
        for other in self._outputs.values():
            if mine & set(self._targets(other)):
                raise self._refuse(option, Path(sorted(mine & set(self._targets(other)))[0]),
                                   f"{other.option} writes this path too; give each output "
                                   "its own path")

    @staticmethod
    def _targets(out: _Output) -> list[str]:
        if out.folder:
            base = os.path.realpath(out.path)
            return [base, *(os.path.join(base, n) for n in out.names)]
        return [_real_target(out.path)]

    def file(self, option: str, path: str | Path | None) -> Path | None:
        """Declare a file output; ``None`` (option not given) and ``"-"`` (stdout) pass through.

        Returns
        -------
        Path or None
            The path as given (``None`` when not given or ``"-"``).
        """
        if path is None or str(path) == "-":
            return None
        path = Path(path)
        if option in self._outputs:
            raise ValueError(f"{option} declared twice")
        self._check_folder(option, path)
        self._check_file(option, path)
        out = _Output(option, path)
        self._check_unique(option, self._targets(out))
        self._outputs[option] = out
        return path

    def folder(self, option: str, path: str | Path | None, names: Iterable[str]) -> Path | None:
        """Declare a folder output (``--plot DIR``) that may write the files ``names``.

        The folder may exist (a symbolic link to a folder is followed: it is a place,
        not a file being replaced) or be new; its parent must exist and be writable.
        Each file it may write is checked as a file output.
        """
        if path is None:
            return None
        path = Path(path)
        if option in self._outputs:
            raise ValueError(f"{option} declared twice")
        names = tuple(names)
        if os.path.lexists(path):
            if not path.is_dir():
                raise self._refuse(option, path, "this is not a folder; give a folder for "
                                   "the plots")
            if not os.access(path, os.W_OK | os.X_OK):
                raise self._refuse(option, path, "the folder is not writable; nothing "
                                   "written")
        else:
            self._check_folder(option, path)
        self._check_not_input(option, path)
        for n in names:
            self._check_file(option, path / n)
        out = _Output(option, path, folder=True, names=names)
        self._check_unique(option, self._targets(out))
        self._outputs[option] = out
        return path

    # --- staging -------------------------------------------------------------

    def stage(self, option: str) -> Path:
        """A temporary path to write ``option``'s content to (a folder for a folder output).

        The writer may write it in any way; it is fsynced and placed by :meth:`commit`.
        """
        out = self._outputs[option]
        if out.staged is not None:
            return out.staged
        try:
            if out.folder:
                base = Path(os.path.realpath(out.path))
                out.staged = Path(tempfile.mkdtemp(prefix=f".{base.name}.", suffix=".tmp",
                                                   dir=base.parent))
            else:
                fd, name = tempfile.mkstemp(prefix=f".{out.path.name}.", suffix=".tmp",
                                            dir=out.path.parent)
                os.close(fd)
                out.staged = Path(name)
                os.chmod(out.staged, 0o666 & ~_umask())
        except OSError as exc:
            raise self._refuse(option, out.path, f"cannot write here: {exc.strerror}") \
                from None
        return out.staged

    @contextlib.contextmanager
    def writing(self, option: str) -> Iterator[Path]:
        """``with outs.writing("--report") as tmp:`` write ``tmp``; a write error names the
        real output path and the option."""
        tmp = self.stage(option)
        out = self._outputs[option]
        try:
            yield tmp
        except InputError as exc:
            if exc.file is not None and exc.file.startswith(str(tmp)):
                raise OutputError(exc.message, file=str(out.path), column=option) from None
            raise
        except OSError as exc:
            raise self._refuse(option, out.path, f"cannot write the file: {exc.strerror}") \
                from None

    def write_text(self, option: str, text: str) -> None:
        """Stage ``text`` (UTF-8) as the content of ``option``'s file."""
        self.write_bytes(option, text.encode("utf-8"))

    def write_bytes(self, option: str, data: bytes) -> None:
        """Stage ``data`` as the content of ``option``'s file."""
        with self.writing(option) as tmp:
            tmp.write_bytes(data)

    # --- placing -------------------------------------------------------------

    def _staged_files(self) -> list[tuple[Path, Path, str]]:
        """(temporary file, final path, option) of everything staged."""
        out = []
        for o in self._outputs.values():
            if o.staged is None:
                continue
            if o.folder:  # names may lie in subfolders ("device_data/x.lib")
                for tmp in sorted(p for p in o.staged.rglob("*") if not p.is_dir()):
                    out.append((tmp, o.path / tmp.relative_to(o.staged), o.option))
            else:
                out.append((o.staged, o.path, o.option))
        return out

    def commit(self) -> dict[str, list[Path]]:
        """Place every staged output; all of them or (on any failure) none.

        Returns
        -------
        dict
            option → the files written for it, as the user named them.
        """
        placed: list[_Placed] = []
        made_dirs: list[Path] = []
        try:
            files = self._staged_files()
            for tmp, final, option in files:  # the declared checks again, just before placing
                self._check_file(option, final)
                fsync_path(tmp)
            for o in self._outputs.values():
                if o.folder and any(opt == o.option for _t, _f, opt in files) and \
                        not os.path.lexists(o.path):
                    o.path.mkdir()
                    made_dirs.append(o.path)
            for tmp, final, option in files:
                missing = [d for d in final.parents if not os.path.lexists(d)]
                for d in reversed(missing):  # a subfolder of a folder output
                    d.mkdir()
                    made_dirs.append(d)
                placed.append(self._place(tmp, final, option))
            for folder in {os.path.realpath(p.final.parent) for p in placed}:
                fsync_path(folder)
        except BaseException:
            for p in reversed(placed):
                with contextlib.suppress(OSError):
                    if p.undo is not None:
                        os.replace(p.undo, p.final)
                    elif not p.replaced:
                        os.unlink(p.final)
            for d in reversed(made_dirs):
                with contextlib.suppress(OSError):
                    d.rmdir()
            self.discard()
            raise
        for p in placed:
            if p.undo is not None:
                with contextlib.suppress(OSError):
                    os.unlink(p.undo)
        self.discard()
        written: dict[str, list[Path]] = {}
        for p in placed:
            written.setdefault(p.option, []).append(p.final)
        return written

    def _place(self, tmp: Path, final: Path, option: str) -> _Placed:
        try:
            if not os.path.lexists(final):
                try:  # link() never replaces a file that appeared meanwhile
                    os.link(tmp, final)
                except OSError as exc:
                    if exc.errno == errno.EEXIST:
                        raise self._refuse(option, final, "the file appeared while the "
                                           "command ran; nothing written") from None
                    if exc.errno not in (errno.EPERM, errno.ENOTSUP, errno.EOPNOTSUPP,
                                         errno.EMLINK, errno.EXDEV):
                        raise
                    os.replace(tmp, final)  # a file system without hard links
                    return _Placed(final, option, None)
                os.unlink(tmp)
                return _Placed(final, option, None)
            try:
                undo: Path | None = _keep_old(final)
            except OSError as exc:
                if exc.errno not in (errno.EPERM, errno.ENOTSUP, errno.EOPNOTSUPP,
                                     errno.EMLINK):
                    raise
                undo = None  # a file system without hard links: no way back for this one
            try:
                os.replace(tmp, final)  # replaces a symbolic link itself, not its target
            except BaseException:
                if undo is not None:
                    os.unlink(undo)
                raise
            return _Placed(final, option, undo, replaced=undo is None)
        except OSError as exc:
            raise self._refuse(option, final, f"cannot write the file: {exc.strerror}; "
                               "nothing written") from None

    def discard(self) -> None:
        """Remove every staged temporary (nothing is placed)."""
        for o in self._outputs.values():
            if o.staged is None:
                continue
            with contextlib.suppress(OSError):
                if o.staged.is_dir() and not o.staged.is_symlink():
                    shutil.rmtree(o.staged)
                else:
                    o.staged.unlink()
            o.staged = None

    def __enter__(self) -> OutputSet:
        return self

    def __exit__(self, exc_type: type[BaseException] | None, exc: BaseException | None,
                 tb: TracebackType | None) -> None:
        self.discard()


def _keep_old(final: Path) -> Path:
    """A hard link ``.<name>.<random>.old`` to the file (or link) at ``final``."""
    for _ in range(100):
        undo = final.with_name(f".{final.name}.{secrets.token_hex(4)}.old")
        try:
            os.link(final, undo, follow_symlinks=False)
            return undo
        except FileExistsError:
            continue
    raise FileExistsError(errno.EEXIST, "no free name for the old file", str(final))


def _umask() -> int:
    mask = os.umask(0)
    os.umask(mask)
    return mask


def fsync_path(path: str | Path) -> None:
    """Flush a file's or a folder's contents to disk (a folder: its entries, after a rename)."""
    fd = os.open(path, os.O_RDONLY)
    try:
        os.fsync(fd)
    finally:
        os.close(fd)
