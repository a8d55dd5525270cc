"""Which characters a name or a stored text may hold, and how a refused one is shown.

A name (item, state, column) may hold any printable character but no control character
(Unicode category Cc: C0, DEL, C1 — a terminal acts on them, e.g. ESC starts a colour or
cursor command), no unpaired surrogate (category Cs: it cannot be printed) and no
bidirectional embedding, override or isolate (U+202A-U+202E, U+2066-U+2069: they reorder
the text around them). A stored text (notes, messages) may in addition hold line breaks and
tabs. Messages quote a refused text through `shown`, so they never carry the character.
"""

from __future__ import annotations

import unicodedata

_REORDERING = frozenset({"LRE", "RLE", "LRO", "RLO", "PDF", "LRI", "RLI", "FSI", "PDI"})
LINE_BREAKS = "\n\r\t"


def _unsafe(char: str) -> bool:
    return (unicodedata.category(char) in ("Cc", "Cs")
            or unicodedata.bidirectional(char) in _REORDERING)


def unsafe_character(text: str, allowed: str = "") -> str | None:
    """The first character of `text` that a name may not hold (see above), or None;
    characters in `allowed` pass."""
    return next((c for c in text if c not in allowed and _unsafe(c)), None)


def shown(text: str, limit: int = 60) -> str:
    """`text` (cut to `limit` characters) with every unsafe character written as its code,
    e.g. "a\\x1b[31m" for an ESC: safe to print or to quote in a message."""
    cut = text[:limit] + ("..." if len(text) > limit else "")
    return "".join(f"\\u{ord(c):04x}" if ord(c) > 0xFF and _unsafe(c) else
                   f"\\x{ord(c):02x}" if _unsafe(c) else c for c in cut)


def problem(text: str, allowed: str = "") -> str | None:
    """Why `text` is refused, in words naming the character, or None when it is fine."""
    char = unsafe_character(text, allowed)
    if char is None:
        return None
    kind = {"Cc": "a control character", "Cs": "an unpaired surrogate"}.get(
        unicodedata.category(char), "a text-direction control")
    return f"holds U+{ord(char):04X}, {kind} ('{shown(text)}'); remove it"
