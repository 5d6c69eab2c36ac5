"""Reserve stock for a build: take pieces off the qty column of the stock file, safely.

The stock file is the user's record of the shelf, so a reservation changes
exactly the ``qty`` fields of the lines it takes from and no other byte:
rows, comments, blank lines, unknown columns, column order, quoting, line
endings, the byte-order mark, the delimiter and decimal commas all stay as
they were.  The qty text is edited in the raw line (found by the physical
line numbers :mod:`stockbias.stock_io` reports); the edited file is read back
and compared with the original, part by part, before it may replace it.

How the file is replaced (a crash at any point leaves the old file or the
new one, whole):

1. an exclusive lock (``fcntl.flock``) on the stock file itself serialises
   stockbias processes, with no lock file left beside it.  Since a reservation
   replaces the file (a new inode), a process that gets the lock checks that
   the file it locked is still the one at the path, and otherwise locks the new
   one: the lock that counts is always the current file's.  The file is read
   *under* the lock, so two reservations run one after the other and neither is
   lost;
2. the new bytes go to a temporary file in the same folder
   (``.<name>.<random>.tmp``), flushed and fsynced;
3. a timestamped backup ``<name>.YYYYmmdd-HHMMSS.bak`` is written next to the
   file (never over an existing backup: ``-2``, ``-3``, … are added);
4. just before the rename the file is hashed and stat'ed again: if anything
   else changed it since it was read, nothing is replaced (the temporary file
   and this run's backup are removed) and the user is told;
5. ``os.replace`` swaps the files, then the folder is fsynced.

A crash can leave a ``.<name>.*.tmp`` file behind; it is never read.

Every step works on the real file (symbolic links resolved): a link to the
stock file stays a link and the file it points to is the one changed, and a
link and the real path share one lock.  A file with several hard links is
refused (replacing it would leave the other names with the old quantities).
A dry run takes no lock and creates nothing.  A folder where the temporary
file or the backup cannot be written is a one-line
:class:`~stockbias.errors.InputError`.
"""

from __future__ import annotations

import contextlib
import errno
import fcntl
import hashlib
import os
import re
import stat
import tempfile
import time
from collections.abc import Callable, Iterator, Mapping
from dataclasses import dataclass
from datetime import datetime
from pathlib import Path

from .errors import InputError
from .outputs import fsync_path
from .parts import Inventory, Resistor, Transistor
from .stock_io import read_inventory

__all__ = [
    "QtyChange",
    "Reservation",
    "ShortStockError",
    "StockChangedError",
    "StockLockedError",
    "reserve_stock",
    "rewrite_quantities",
]

_BOM = b"\xef\xbb\xbf"
#: How long to wait for another stockbias process to release the lock, s.
LOCK_TIMEOUT_S = 30.0

Fault = Callable[[str], None]


class ShortStockError(InputError):
    """Not enough pieces on the shelf for the build; nothing was written."""


class StockChangedError(InputError):
    """The stock file changed while the reservation was being written; nothing was replaced."""


class StockLockedError(InputError):
    """Another process holds the stock file's lock."""


@dataclass(frozen=True)
class QtyChange:
    """One reserved line: part id, physical line, pieces before, taken and after."""

    part_id: str
    line: int
    before: int
    taken: int
    after: int

    def to_dict(self) -> dict[str, object]:
        return {"part_id": self.part_id, "line": self.line, "before": self.before,
                "taken": self.taken, "after": self.after}


@dataclass(frozen=True)
class Reservation:
    """What :func:`reserve_stock` did (or, with ``dry_run``, would do)."""

    path: str
    changes: tuple[QtyChange, ...]
    backup: str | None
    sha256_before: str
    sha256_after: str
    written: bool

    def to_dict(self) -> dict[str, object]:
        return {"file": self.path, "written": self.written, "backup": self.backup,
                "sha256_before": self.sha256_before, "sha256_after": self.sha256_after,
                "changes": [c.to_dict() for c in self.changes]}


# --- editing the raw text ------------------------------------------------------

def _field_spans(text: str, start: int, delimiter: str) -> list[tuple[int, int]]:
    """(begin, end) offsets of each field of the CSV record that starts at ``start``.

    Follows the :mod:`csv` module's default dialect: a field that starts with
    ``"`` is quoted (``""`` inside is a quote and line breaks are data); the
    record ends at an unquoted ``\\r`` or ``\\n``.
    """
    spans = []
    i, n = start, len(text)
    while True:
        begin = i
        if i < n and text[i] == '"':
            i += 1
            while True:
                j = text.find('"', i)
                if j < 0:
                    raise ValueError("unterminated quoted field")
                if j + 1 < n and text[j + 1] == '"':
                    i = j + 2
                    continue
                i = j + 1
                break
        while i < n and text[i] not in (delimiter, "\r", "\n"):
            i += 1
        spans.append((begin, i))
        if i >= n or text[i] in "\r\n":
            return spans
        i += 1


_PADDED = re.compile(r"^(\s*)(.*?)(\s*)$", re.DOTALL)


def _new_field_text(raw: str, qty: int) -> str:
    """The qty field with its number replaced, its quoting and padding kept."""
    if raw.startswith('"') and raw.endswith('"') and len(raw) >= 2:
        lead, _, trail = _PADDED.match(raw[1:-1]).groups()  # type: ignore[union-attr]
        return f'"{lead}{qty}{trail}"'
    lead, _, trail = _PADDED.match(raw).groups()  # type: ignore[union-attr]
    return f"{lead}{qty}{trail}"


def _line_starts(text: str) -> list[int]:
    """Offset of each physical line, numbered as :mod:`stockbias.stock_io` numbers them."""
    starts, pos = [], 0
    for piece in text.splitlines(keepends=True):
        starts.append(pos)
        pos += len(piece)
    return starts


def rewrite_quantities(data: bytes, header_line: int, qty_index: int, delimiter: str,
                       new_qty: Mapping[int, int]) -> bytes:
    """The stock file's bytes with the qty field of some lines replaced.

    Parameters
    ----------
    data : bytes
        The file as read (UTF-8, with or without a byte-order mark).
    header_line : int
        Physical line of the header record (unused but checked to exist).
    qty_index : int
        Position of the ``qty`` column in each record (0-based).
    delimiter : str
        ``","`` or ``";"``.
    new_qty : Mapping[int, int]
        Physical line of a record → its new quantity, pieces.

    Returns
    -------
    bytes
        Identical to ``data`` outside the replaced qty fields.
    """
    bom = _BOM if data.startswith(_BOM) else b""
    text = data[len(bom):].decode("utf-8")
    starts = _line_starts(text)
    if not 1 <= header_line <= len(starts):
        raise ValueError(f"no header at line {header_line}")
    edits = []
    for line, qty in new_qty.items():
        if not 1 <= line <= len(starts) or qty < 0:
            raise ValueError(f"cannot set line {line} to {qty}")
        spans = _field_spans(text, starts[line - 1], delimiter)
        if qty_index >= len(spans):
            raise ValueError(f"line {line} has no qty field")
        begin, end = spans[qty_index]
        edits.append((begin, end, _new_field_text(text[begin:end], int(qty))))
    out, pos = [], 0
    for begin, end, new in sorted(edits):
        out.append(text[pos:begin])
        out.append(new)
        pos = end
    out.append(text[pos:])
    return bom + "".join(out).encode("utf-8")


def _layout(data: bytes, delimiter: str) -> tuple[int, int]:
    """(physical header line, index of the qty column) of a stock file's bytes."""
    bom = _BOM if data.startswith(_BOM) else b""
    text = data[len(bom):].decode("utf-8")
    starts = _line_starts(text)
    for number, begin in enumerate(starts, start=1):
        end = starts[number] if number < len(starts) else len(text)
        stripped = text[begin:end].strip()
        if stripped and not stripped.startswith("#"):
            spans = _field_spans(text, begin, delimiter)
            names = [text[a:b].strip().strip('"').strip().lower() for a, b in spans]
            if "qty" not in names:
                raise ValueError("header has no qty column")
            return number, names.index("qty")
    raise ValueError("no header")


# --- locking and writing -------------------------------------------------------

@contextlib.contextmanager
def _locked(path: Path, timeout_s: float, shown: str | None = None) -> Iterator[None]:
    """Hold an exclusive lock on the stock file at ``path`` (the real path).

    Every reservation replaces the file while it holds the lock on it, so a lock
    obtained on a file that is no longer at the path is let go and the new file's
    is taken: whoever holds the lock of the file now at the path is the only
    writer.  No lock file is created.
    """
    shown = str(path) if shown is None else shown
    deadline = time.monotonic() + timeout_s
    while True:
        try:
            fd = os.open(path, os.O_RDONLY)
        except OSError as exc:
            raise InputError(f"cannot open the stock file: {exc.strerror}; nothing written",
                             file=shown) from None
        try:
            while True:
                try:
                    fcntl.flock(fd, fcntl.LOCK_EX | fcntl.LOCK_NB)
                    break
                except OSError as exc:
                    if exc.errno not in (errno.EAGAIN, errno.EACCES, errno.EWOULDBLOCK):
                        raise
                    if time.monotonic() >= deadline:
                        raise StockLockedError(
                            f"another stockbias process has held the lock on the stock file "
                            f"for {timeout_s:g} s; nothing written, try again",
                            file=shown) from None
                    time.sleep(0.05)
            locked, now = os.fstat(fd), _identity(path)
            if now == (locked.st_dev, locked.st_ino):
                yield
                return
        finally:
            os.close(fd)  # closing releases the lock
        # the file was replaced while we waited: lock the one at the path now


def _identity(path: Path) -> tuple[int, int] | None:
    try:
        st = os.stat(path)
    except OSError:
        return None
    return st.st_dev, st.st_ino


def _refuse_hard_links(path: Path, shown: str) -> None:
    """A reservation replaces the file: a file with several names would be split."""
    try:
        links = os.stat(path).st_nlink
    except OSError as exc:
        raise InputError(f"cannot read the stock file: {exc.strerror}", file=shown) from None
    if links > 1:
        raise InputError(f"the stock file has {links} names (hard links); a reservation "
                         "replaces the file and the other names would keep the old "
                         "quantities; keep one name and reserve on it; nothing written",
                         file=shown)


def _fingerprint(path: Path) -> tuple[str, int, int, int]:
    data = path.read_bytes()
    st = path.stat()
    return hashlib.sha256(data).hexdigest(), st.st_size, st.st_mtime_ns, st.st_ino


def _write_backup(path: Path, data: bytes, now: datetime) -> Path:
    stamp = now.strftime("%Y%m%d-%H%M%S")
    for n in range(1, 1000):
        suffix = "" if n == 1 else f"-{n}"
        backup = path.with_name(f"{path.name}.{stamp}{suffix}.bak")
        try:
            with open(backup, "xb") as fh:
                fh.write(data)
                fh.flush()
                os.fsync(fh.fileno())
            return backup
        except FileExistsError:
            continue
    raise InputError("too many backups with the same time stamp", file=str(path))


def _short_message(short: list[tuple[str, int, int, int]], build: str) -> str:
    items = "; ".join(f"{pid} (line {line}) have {have}, need {need}"
                      for pid, line, have, need in short)
    return f"not enough stock{build}, nothing written: {items}"


def _same_apart_from_qty(old: Inventory, new: Inventory, expected: Mapping[str, int]) -> bool:
    rows_old: list[Resistor | Transistor] = [*old.resistors, *old.transistors]
    rows_new: list[Resistor | Transistor] = [*new.resistors, *new.transistors]
    before = {p.part_id: p.to_dict() for p in rows_old}
    after = {p.part_id: p.to_dict() for p in rows_new}
    if before.keys() != after.keys():
        return False
    for pid, row in before.items():
        got = dict(after[pid])
        if got.pop("qty") != expected.get(pid, row["qty"]):
            return False
        if {k: v for k, v in row.items() if k != "qty"} != got:
            return False
    return old.extra_columns == new.extra_columns and old.delimiter == new.delimiter


def reserve_stock(path: str | Path, takes: Callable[[Inventory], Mapping[str, int]], *,
                  dry_run: bool = False, build_label: str = "",
                  now: datetime | None = None, lock_timeout_s: float = LOCK_TIMEOUT_S,
                  fault: Fault | None = None) -> Reservation:
    """Take pieces off the stock file for a build, atomically and with a backup.

    Parameters
    ----------
    path : str or Path
        The stock CSV file.
    takes : callable(Inventory) -> Mapping[str, int]
        Pieces to take per part id, computed from the file as read under the lock
        (so that it sees every earlier reservation).
    dry_run : bool
        Compute and check, but write nothing.
    build_label : str
        Words for messages, e.g. ``" for 10 boards"``.
    now : datetime, optional
        Time for the backup's name (default: now, local time).
    lock_timeout_s : float
        Longest wait for another stockbias process's lock, s.
    fault : callable(str), optional
        Test hook called at each step (``"read"``, ``"temp_partial"``,
        ``"temp_written"``, ``"backup_written"``, ``"before_replace"``,
        ``"replaced"``).

    Raises
    ------
    ShortStockError
        A line has fewer pieces than the build takes (each short line named).
    StockChangedError
        The file changed between reading and replacing it.
    StockFileError
        The file is not a valid stock file.
    """
    given = str(path)
    # Everything (lock, read, temporary file, backup, replace) works on the real file, so
    # that a symbolic link stays a link and two names of one file share one lock.
    path = Path(os.path.realpath(path))
    step = fault or (lambda _name: None)
    if not dry_run:
        _refuse_hard_links(path, given)
    lock = contextlib.nullcontext() if dry_run else _locked(path, lock_timeout_s, given)
    with lock:
        data = path.read_bytes()
        fingerprint = _fingerprint(path)
        inventory = read_inventory(path)
        if hashlib.sha256(data).hexdigest() != inventory.sha256:
            raise StockChangedError("the stock file changed while it was being read; "
                                    "nothing written, try again", file=given)
        step("read")
        wanted = {pid: int(n) for pid, n in takes(inventory).items() if int(n) != 0}
        changes, short = [], []
        new_qty: dict[int, int] = {}
        expected: dict[str, int] = {}
        for pid, n in wanted.items():
            try:
                row = inventory.part(pid)
            except KeyError:
                raise InputError(f"part {pid} is not in the stock file; nothing written",
                                 file=given, column="part_id", text=pid) from None
            if n < 0:
                raise InputError(f"cannot take a negative number of pieces of {pid}",
                                 file=given, line=row.line, column="qty", text=str(n))
            if n > row.qty:
                short.append((pid, row.line, row.qty, n))
                continue
            changes.append(QtyChange(pid, row.line, row.qty, n, row.qty - n))
            new_qty[row.line] = row.qty - n
            expected[pid] = row.qty - n
        if short:
            raise ShortStockError(_short_message(short, build_label), file=given)
        header_line, qty_index = _layout(data, inventory.delimiter)
        new_data = rewrite_quantities(data, header_line, qty_index, inventory.delimiter,
                                      new_qty)
        changes.sort(key=lambda c: c.line)
        result = Reservation(given, tuple(changes), None, inventory.sha256,
                             hashlib.sha256(new_data).hexdigest(), written=False)
        if dry_run or not changes:
            return result
        try:
            backup = _replace(path, data, new_data, inventory, expected, fingerprint,
                              now or datetime.now(), step, given)
        except OSError as exc:
            raise InputError(f"cannot write in {path.parent}: {exc.strerror}; a reservation "
                             "writes a temporary file and a backup next to the stock file; "
                             "nothing written", file=given) from None
        return Reservation(result.path, result.changes, str(backup), result.sha256_before,
                           result.sha256_after, written=True)


def _replace(path: Path, data: bytes, new_data: bytes, inventory: Inventory,
             expected: Mapping[str, int], fingerprint: tuple[str, int, int, int],
             now: datetime, step: Fault, shown: str) -> Path:
    folder = path.parent
    fd, tmp_name = tempfile.mkstemp(prefix=f".{path.name}.", suffix=".tmp", dir=folder)
    tmp = Path(tmp_name)
    backup: Path | None = None
    try:
        with os.fdopen(fd, "wb") as fh:
            half = len(new_data) // 2
            fh.write(new_data[:half])
            fh.flush()
            step("temp_partial")
            fh.write(new_data[half:])
            fh.flush()
            os.fsync(fh.fileno())
        os.chmod(tmp, stat.S_IMODE(path.stat().st_mode))
        step("temp_written")
        # Read the new file back: only the reserved quantities may differ.
        try:
            check = read_inventory(tmp)
        except InputError:
            check = None
        if check is None or not _same_apart_from_qty(inventory, check, expected):
            raise InputError("internal check failed: the rewritten stock file does not read "
                             "back as the old one with new quantities; nothing written",
                             file=shown)
        backup = _write_backup(path, data, now)
        step("backup_written")
        step("before_replace")
        if _fingerprint(path) != fingerprint:
            raise StockChangedError("the stock file was changed by another program while "
                                    "the reservation was being written; nothing written, "
                                    "run it again", file=shown)
        os.replace(tmp, path)
        tmp = None  # type: ignore[assignment]
        fsync_path(folder)
        step("replaced")
        return backup
    except BaseException:
        if tmp is not None:
            with contextlib.suppress(OSError):
                tmp.unlink()
        if backup is not None and tmp is not None:
            with contextlib.suppress(OSError):
                backup.unlink()
        raise
