"""The shape of a JSON document: every path (keys joined by '.', list elements as '[]') with
the set of JSON kinds seen there. Used to hold command-line JSON contracts steady."""

from __future__ import annotations


def kind(value) -> str:
    if value is None:
        return "null"
    if isinstance(value, bool):
        return "boolean"
    if isinstance(value, (int, float)):
        return "number"
    if isinstance(value, str):
        return "string"
    if isinstance(value, list):
        return "array"
    return "object"


def shape(doc, path: str = "$", out: dict[str, set[str]] | None = None) -> dict[str, set[str]]:
    """{path: kinds}; object keys under free-form maps (r_squared, reliability) are kept."""
    out = {} if out is None else out
    out.setdefault(path, set()).add(kind(doc))
    if isinstance(doc, dict):
        for key, value in doc.items():
            shape(value, f"{path}.{key}", out)
    elif isinstance(doc, list):
        for value in doc:
            shape(value, f"{path}[]", out)
    return out
