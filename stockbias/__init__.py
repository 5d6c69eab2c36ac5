"""stockbias: bias bipolar transistor stages with the parts you have in stock.

The public API (DESIGN §3) is imported lazily so that ``import stockbias``
stays light; the physics needs only numpy and scipy.
"""

from __future__ import annotations

from importlib import import_module
from typing import Any

__version__ = "0.1.0"

_API = {
    "load_inventory": ("stockbias.stock_io", "load_inventory"),
    "load_job": ("stockbias.job", "load_job"),
    "analyze": ("stockbias.analysis.check", "analyze"),
    "design": ("stockbias.search.route", "design"),
    "substitute": ("stockbias.search.substitute", "substitute"),
    "consolidate": ("stockbias.search.consolidate", "consolidate"),
}

__all__ = ["__version__", *_API]


def __getattr__(name: str) -> Any:
    if name in _API:
        module, attr = _API[name]
        return getattr(import_module(module), attr)
    raise AttributeError(f"module 'stockbias' has no attribute {name!r}")
