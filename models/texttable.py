"""Plain-text tables whose columns size to their widest cell, for the reports.

Widths are counted as a terminal shows them: a wide or full-width character (East Asian
width W or F) takes two columns, a combining mark none (common practice for monospaced
text), so every row of a table starts each column at the same position.
"""

from __future__ import annotations

import unicodedata
from collections.abc import Sequence


def width(text: str) -> int:
    """Columns `text` takes in a monospaced terminal."""
    return sum(0 if unicodedata.combining(c) else
               2 if unicodedata.east_asian_width(c) in ("W", "F") else 1 for c in text)


def pad(text: str, columns: int, align: str = "<") -> str:
    """`text` padded with spaces to `columns` (align "<" left, ">" right)."""
    fill = " " * max(0, columns - width(text))
    return text + fill if align == "<" else fill + text


def table(header: Sequence[str], rows: Sequence[Sequence[str]], align: str,
          indent: str = "  ", gap: str = "  ") -> list[str]:
    """The header and rows as lines; `align` holds one "<" or ">" per column. Each column is
    as wide as its widest cell; a left-aligned last column is not padded."""
    widths = [max(width(row[i]) for row in (header, *rows)) for i in range(len(header))]
    if align[-1] == "<":
        widths[-1] = 0
    return [indent + gap.join(pad(cell, w, a) for cell, w, a in zip(row, widths, align))
            for row in (header, *rows)]
