"""JSON on stdout: plain types only, no NaN (infinite and missing values become null)."""

from __future__ import annotations

import json
import math
from typing import Any

__all__ = ["clean", "dumps"]


def clean(value: Any) -> Any:
    """Turn numpy scalars and arrays, tuples and non-finite floats into JSON-safe values."""
    kind = type(value)   # the plain types first (a result holds thousands of them)
    if kind is float:
        return value if math.isfinite(value) else None
    if kind is str or kind is int or kind is bool or value is None:
        return value
    if kind is dict:
        return {str(k): clean(v) for k, v in value.items()}
    if kind is list:
        return [clean(v) for v in value]
    if isinstance(value, dict):
        return {str(k): clean(v) for k, v in value.items()}
    if isinstance(value, (list, tuple, set, frozenset)):
        items = sorted(value) if isinstance(value, (set, frozenset)) else value
        return [clean(v) for v in items]
    if hasattr(value, "tolist") and not isinstance(value, (str, bytes)):
        return clean(value.tolist())
    if isinstance(value, bool) or value is None or isinstance(value, (int, str)):
        return value
    if isinstance(value, float):
        return value if math.isfinite(value) else None
    if hasattr(value, "item"):
        return clean(value.item())
    return str(value)


def dumps(payload: dict[str, Any]) -> str:
    """Serialise a result object for stdout."""
    return json.dumps(clean(payload), indent=2, ensure_ascii=False, allow_nan=False)
