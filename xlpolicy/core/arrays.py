"""Per-item input columns made uniform for the vectorised core.

A field may come as one value for every item or as one value per item; model names and
service measures come as the user typed them. These helpers give a length-n array either
way, and normalise names once per distinct text rather than once per item.
"""

from __future__ import annotations

from collections.abc import Callable

import numpy as np
import pandas as pd
from numpy.typing import ArrayLike

__all__ = ["item_model_names"]


def _column(x: ArrayLike, n: int) -> np.ndarray:
    return np.broadcast_to(np.asarray(x, dtype=float), (n,)).copy()


def item_model_names(model: ArrayLike | None, n: int) -> np.ndarray:
    """Per-item model names, lower case without outer spaces; "" where none is given.

    None, NaN and empty text mean "no name" (the default model). Accepts a scalar (applied
    to every item) or a 1-D array of length n. Names outside MODEL_NAMES are returned as
    they are (normalised), for the caller to report.
    """
    if model is None:
        return np.full(n, "", dtype=object)
    values = np.broadcast_to(np.asarray(model, dtype=object), (n,))
    return _per_distinct(values, _normalised_names)


def _normalised_names(values: np.ndarray) -> np.ndarray:
    raw = pd.Series(values, dtype=object)
    text = raw.where(raw.notna(), "").astype(str).str.strip().str.lower()
    return text.to_numpy(dtype=object)


def _per_distinct(values: np.ndarray, f: Callable[[np.ndarray], np.ndarray]) -> np.ndarray:
    """f(values) for an elementwise text function f, computed once per distinct value.

    A column of item names or measures holds a handful of distinct texts among 100,000
    items. Only for text (and missing) values: numbers such as 1, 1.0 and True would be
    one value to the hashing but three texts to f, so anything else takes f whole.
    """
    if len(values) < 64 or pd.api.types.infer_dtype(values, skipna=True) not in ("string", "empty"):
        return f(values)
    codes, uniques = pd.factorize(values, use_na_sentinel=True)
    if (codes < 0).any():  # missing values: f says what they become
        return f(values)
    return f(np.asarray(uniques, dtype=object))[codes]
