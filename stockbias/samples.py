"""Where the bundled sample shelves and jobs live."""

from __future__ import annotations

from pathlib import Path

from .errors import InputError

__all__ = ["sample_path"]

SAMPLES_DIR = Path(__file__).resolve().parent.parent / "inventory_samples"


def sample_path(name: str) -> Path:
    """Path of a bundled sample file; InputError when the checkout does not have it."""
    path = SAMPLES_DIR / name
    if not path.is_file():
        raise InputError(f"bundled sample '{name}' not found; run from a checkout of stockbias "
                         "(installed with pip install -e .)", file=str(path))
    return path
