"""The Summary as one JSON object: a stable, documented schema (docs/review.md) with SI units in the key names."""

from __future__ import annotations

import json
import math
from dataclasses import fields, is_dataclass

from monitor.review.summary import Summary


def to_dict(summary: Summary) -> dict:
    """The Summary as plain JSON-ready data: dataclasses become objects, tuples lists, NaN and inf null."""
    return _plain(summary)


def to_json(summary: Summary, indent: int | None = 2) -> str:
    """The Summary as JSON text (strict JSON: no NaN)."""
    return json.dumps(to_dict(summary), indent=indent, allow_nan=False)


def _plain(value):
    if is_dataclass(value):
        return {f.name: _plain(getattr(value, f.name)) for f in fields(value)}
    if isinstance(value, dict):
        return {str(k): _plain(v) for k, v in value.items()}
    if isinstance(value, (list, tuple)):
        return [_plain(v) for v in value]
    if isinstance(value, bool) or value is None or isinstance(value, (int, str)):
        return value
    number = float(value)
    return number if math.isfinite(number) else None
