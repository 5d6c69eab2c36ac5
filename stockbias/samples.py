"""The bundled sample shelves, jobs and board, and how to name them to the user.

The files live in ``stockbias/samples/`` and ship with the package (package
data), so the demo works from any folder and after a plain ``pip install``; a
checkout also reaches them as ``inventory_samples/`` (a link to that folder).
"""

from __future__ import annotations

import os
import shlex
from pathlib import Path

from .errors import InputError

__all__ = ["SAMPLES_DIR", "sample_names", "sample_path", "shown_path"]

SAMPLES_DIR = Path(__file__).resolve().parent / "samples"


def sample_names() -> list[str]:
    """The bundled sample files as paths relative to their folder (``device_data/x.lib``
    for a file a shelf refers to), sorted."""
    return sorted(p.relative_to(SAMPLES_DIR).as_posix() for p in SAMPLES_DIR.rglob("*")
                  if p.is_file() and "__pycache__" not in p.parts)


def sample_path(name: str, folder: Path | None = None) -> Path:
    """Path of a bundled sample file (in ``folder`` when given, e.g. a copy).

    Raises
    ------
    InputError
        The file is not there (an installation without its package data).
    """
    path = (folder if folder is not None else SAMPLES_DIR) / name
    if not path.is_file():
        raise InputError(f"bundled sample '{name}' not found; the installation lacks its "
                         "package data (reinstall stockbias)", file=str(path))
    return path


def shown_path(path: Path, cwd: Path | None = None) -> str:
    """``path`` as a user standing in ``cwd`` types it in a shell command.

    Relative (``inventory_samples/x.csv``) when the file lies below the current
    folder, else absolute; quoted for a POSIX shell where it has spaces or other
    shell characters.
    """
    here = Path(cwd if cwd is not None else os.getcwd()).resolve()
    absolute = Path(os.path.abspath(path))
    try:
        text = str(absolute.relative_to(here))
    except ValueError:
        try:
            text = str(absolute.resolve().relative_to(here))
        except ValueError:
            text = str(absolute)
    return shlex.quote(text)
