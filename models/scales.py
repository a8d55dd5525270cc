"""The answer scale of each item: its low and high ends (e.g. 1-7 or 0-100).

Floor and ceiling effects are counted at the ends of the scale, not at the lowest and highest
answers given. A scale the user did not state is guessed from the answers: the first of
COMMON_SCALES (ordered by width, so the smallest usual range) that holds every answer; when
none does, the lowest and highest answers. Scales are written "LOW-HIGH" ("1-7", "-3-3") and
stored as JSON {item: [low, high]}.
"""

from __future__ import annotations

import re
from collections.abc import Mapping

import numpy as np

from lagwise.models import jsonread as jr
from lagwise.models.errors import DataError, FieldError

# Usual ends of rating scales in experience sampling (common practice), smallest first.
COMMON_SCALES: tuple[tuple[float, float], ...] = (
    (1.0, 5.0), (0.0, 4.0), (1.0, 7.0), (0.0, 6.0), (0.0, 10.0), (0.0, 100.0))
Scale = tuple[float, float]
_NUMBER = r"\s*(-?(?:\d+(?:\.\d*)?|\.\d+)(?:[eE][-+]?\d+)?)\s*"
_RANGE = re.compile(_NUMBER + "-" + _NUMBER)


def guess_scale(column: np.ndarray) -> Scale | None:
    """The smallest common scale holding every answer of `column` (NaN = unanswered), else
    its lowest and highest answers; None without answers."""
    x = np.asarray(column, dtype=float)
    x = x[~np.isnan(x)]
    if not x.size:
        return None
    low, high = float(x.min()), float(x.max())
    for scale in COMMON_SCALES:
        if scale[0] <= low and high <= scale[1]:
            return scale
    return low, high


def item_scales(items: tuple[str, ...], values: np.ndarray,
                stated: Mapping[str, Scale] | None = None) -> dict[str, Scale]:
    """Item -> scale: the stated one where given, otherwise `guess_scale` of its column."""
    stated = stated or {}
    out = {}
    for j, name in enumerate(items):
        scale = stated.get(name) or guess_scale(values[:, j])
        if scale is not None:
            out[name] = scale
    return out


def parse_scale(text: str) -> Scale:
    """'1-7' -> (1.0, 7.0), '-3-3' -> (-3.0, 3.0); DataError for anything else."""
    match = _RANGE.fullmatch(text)
    if not match:
        raise DataError(f"'{text}' is not a scale range: write its ends as LOW-HIGH, e.g. 1-7")
    low, high = float(match.group(1)), float(match.group(2))
    if not (np.isfinite(low) and np.isfinite(high) and low < high):
        raise DataError(f"scale range '{text}': the low end must be below the high end")
    return low, high


def scale_text(scale: Scale) -> str:
    """(1.0, 7.0) -> '1-7' (the form `parse_scale` reads)."""
    return f"{scale[0]:g}-{scale[1]:g}"


def scales_to_json(scales: Mapping[str, Scale]) -> dict:
    return {name: [low, high] for name, (low, high) in scales.items()}


def scales_from_json(value: object, where: str = "scales") -> dict[str, Scale]:
    """Scales written by `scales_to_json`; FieldError names a malformed entry."""
    return {jr.name(key, where): ends for key, ends in jr.mapping(value, where, _ends).items()}


def _ends(value: object, where: str) -> Scale:
    ends = jr.array(value, where, limit=2)
    low, high = (jr.number(v, f"{where}[{i}]") for i, v in enumerate(ends)) if len(ends) == 2 \
        else (None, None)
    if low is None or not low < high:
        raise FieldError(where, "should be [low, high] with the low end below the high end")
    return low, high
