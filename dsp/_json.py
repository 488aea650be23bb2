"""Plain JSON-ready data from results: the one conversion that steps, spectra and evaluations share."""

from __future__ import annotations

import math
from collections.abc import Mapping

import numpy as np


def json_ready(value, *, nonfinite_as_none: bool = False):
    """Return ``value`` as plain Python data that :func:`json.dumps` accepts.

    Mappings become dicts with text keys, lists and tuples become lists,
    numpy arrays become (nested) lists and numpy scalars Python numbers; with
    ``nonfinite_as_none`` NaN and infinities become None (JSON has no such
    numbers). Anything else is returned as it is.

    Examples
    --------
    >>> json_ready({"a": np.float64(1.5), 2: (np.arange(2), float("nan"))}, nonfinite_as_none=True)
    {'a': 1.5, '2': [[0, 1], None]}
    """
    if isinstance(value, Mapping):
        return {str(k): json_ready(v, nonfinite_as_none=nonfinite_as_none) for k, v in value.items()}
    if isinstance(value, list | tuple):
        return [json_ready(v, nonfinite_as_none=nonfinite_as_none) for v in value]
    if isinstance(value, np.ndarray):
        return json_ready(value.tolist(), nonfinite_as_none=nonfinite_as_none)
    if isinstance(value, np.generic):
        value = value.item()
    if nonfinite_as_none and isinstance(value, float) and not math.isfinite(value):
        return None
    return value
