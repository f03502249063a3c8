"""Plain JSON from numpy results: the rules every ``--json`` output and JSON file follows.

- numpy arrays become (nested) lists, numpy scalars plain numbers, tuples lists, paths strings;
- NaN and ±inf become ``null`` (strict JSON has no such numbers);
- floats keep full precision (Python's shortest round-trip form), so a number read back equals
  the one computed;
- complex numbers and unknown objects raise TypeError: a caller must choose how to show them.
"""

from __future__ import annotations

import json
import math
import os
from typing import Any

import numpy as np

__all__ = ["to_jsonable", "dumps_json"]


def _clean(x):
    if isinstance(x, float):
        return x if math.isfinite(x) else None
    if isinstance(x, list):
        return [_clean(v) for v in x]
    return x


def to_jsonable(obj: Any) -> Any:
    """``obj`` as plain JSON values (dict, list, str, int, float, bool, None); see module doc."""
    if obj is None or isinstance(obj, (bool, str, int)):
        return obj
    if isinstance(obj, float):
        return obj if math.isfinite(obj) else None
    if isinstance(obj, np.ndarray):
        if np.iscomplexobj(obj):
            raise TypeError("complex arrays have no JSON form; split into real and imaginary")
        if obj.dtype == object:
            return [to_jsonable(v) for v in obj.tolist()]
        return _clean(obj.tolist())
    if isinstance(obj, np.generic):
        return to_jsonable(obj.item())
    if isinstance(obj, dict):
        return {str(k): to_jsonable(v) for k, v in obj.items()}
    if isinstance(obj, (list, tuple)):
        return [to_jsonable(v) for v in obj]
    if isinstance(obj, os.PathLike):
        return os.fspath(obj)
    raise TypeError(f"cannot write {type(obj).__name__} as JSON")


def dumps_json(obj: Any, *, indent: int | None = None) -> str:
    """Strict JSON text of ``obj`` (see :func:`to_jsonable`)."""
    return json.dumps(to_jsonable(obj), allow_nan=False, ensure_ascii=False, indent=indent)
