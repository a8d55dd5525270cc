"""Numbers as people read them: the one formatter of the report, the command line and the
window (so a test can compare the screen with the engine).

`fmt(value, "number")`: 3 decimals ("-0.000" shows as "0.000"); `fmt(value, "p")`: a
p-value without the leading zero, "<.001" below .001 (".042", "1.000": common reporting
practice); `fmt(value, "int")`: a count. None, NaN and infinities show as an em dash.
`p_phrase` writes a p-value inside a sentence ("p = .042", "p < .001").
"""

from __future__ import annotations

import math
from typing import Any

MISSING = "—"


def fmt(value: Any, style: str = "number", digits: int = 3) -> str:
    """Display text of one number (see the module docstring)."""
    if value is None:
        return MISSING
    number = float(value)
    if not math.isfinite(number):
        return MISSING
    if style == "int":
        return str(int(round(number)))
    if style == "p":
        if number < 0.001:
            return "<.001"
        text = f"{number:.3f}"
        return text[1:] if text.startswith("0.") else text
    text = f"{number:.{digits}f}"
    return text[1:] if text.startswith("-") and float(text) == 0.0 else text


def p_phrase(value: float | None) -> str:
    """'p < .001' or 'p = .042' (MISSING when undefined)."""
    if value is None or not math.isfinite(float(value)):
        return f"p {MISSING}"
    text = fmt(value, "p")
    return f"p < {text[1:]}" if text.startswith("<") else f"p = {text}"
