"""Strict, bounded reading of JSON documents: the one place their limits and checks live.

- `parse(text)` turns JSON text into Python values and refuses what Lagwise never writes:
  NaN and Infinity, numbers beyond 64-bit integers or finite floats, a key twice in one
  object, lists and objects nested more than MAX_DEPTH deep, texts over MAX_TEXT and keys
  over MAX_NAME characters.
- Readers check one value and return it as Python wants it: `obj`, `array`, `text` (no
  control character but line breaks and tabs: models.names), `name` (none at all),
  `integer`, `number`, `number_or_nan`, `boolean`, `choice`, `tuple_of`, `mapping` (keys
  as names), `matrix`, `sha256` (a digest), `timestamp` (ISO 8601 with its UTC offset). Each takes the value and `where`, the value's path in the document
  ("results.parameters[3].se"), and raises FieldError(where, problem) for anything else.
- `field` and `read_fields` describe an object declaratively, one line per field (key,
  reader, default, reader options); the values' `from_json` methods (ModelSpec, FitOptions,
  FitResult, ...) are written with them and take the `where` of the document they read, so
  a project reader calls `FitResult.from_json(doc, where="results")`.
"""

from __future__ import annotations

import json
from dataclasses import dataclass, field as _dataclass_field
from datetime import datetime
from typing import Any, Callable, Iterable, Mapping

import numpy as np

from lagwise.models import names
from lagwise.models.errors import FieldError

# Bounds (a document beyond them is refused).
MAX_DEPTH = 32                     # nesting of lists and objects
MAX_TEXT = 1_000_000               # characters of one text (notes, a message)
MAX_NAME = 10_000                  # characters of a name, a key or a table cell
MAX_ITEMS = 10_000                 # items of a specification or of a diary
MAX_STATES = 200                   # states of a specification
MAX_LIST = 100_000                 # entries of any other list
MAX_INTEGER = 2**63 - 1            # integers fit in 64 bits

Reader = Callable[..., Any]


# ============================================================================ parsing

def parse(text: str) -> Any:
    """The JSON value of `text` within the bounds above.

    Raises json.JSONDecodeError for text that is not JSON, FieldError (where "") for a value
    beyond the bounds, RecursionError for nesting too deep for Python's parser.
    """
    doc = json.loads(text, parse_int=_bounded_int, parse_float=_finite_float,
                     parse_constant=_reject_constant, object_pairs_hook=_unique_keys)
    _check_tree(doc)
    return doc


def _reject_constant(name: str) -> None:
    raise FieldError("", f"holds {name}, which is not a number JSON allows")


def _bounded_int(text: str) -> int:
    if len(text.lstrip("-")) > 19 or abs(int(text)) > MAX_INTEGER:
        raise FieldError("", f"holds a number too large to use ({text[:30]}...)")
    return int(text)


def _finite_float(text: str) -> float:
    value = float(text)
    if not np.isfinite(value):
        raise FieldError("", f"holds a number too large to use ({text[:30]})")
    return value


def _unique_keys(pairs: list[tuple[str, Any]]) -> dict:
    out = {}
    for key, value in pairs:
        if key in out:
            raise FieldError("", f"names the field '{names.shown(key)}' twice in one object")
        out[key] = value
    return out


def _check_tree(doc: Any) -> None:
    """Depth of nesting and length of every text and key within bounds (iterative)."""
    stack = [(doc, 0)]
    while stack:
        value, depth = stack.pop()
        if isinstance(value, (list, dict)):
            if depth >= MAX_DEPTH:
                raise FieldError("", f"nests lists and objects more than {MAX_DEPTH} levels deep")
            children = value.values() if isinstance(value, dict) else value
            if isinstance(value, dict):
                for key in value:
                    if len(key) > MAX_NAME:
                        raise FieldError("", f"has a field name longer than {MAX_NAME} characters")
            stack.extend((child, depth + 1) for child in children)
        elif isinstance(value, str) and len(value) > MAX_TEXT:
            raise FieldError("", f"has a text longer than {MAX_TEXT} characters")


# ============================================================================ declared fields

_REQUIRED: Any = object()


@dataclass(frozen=True)
class Field:
    """One field of an object: its JSON `key`, the `reader` that checks and converts it (with
    `options`), the JSON value used when the key is absent (`default`, read like a given
    value; REQUIRED: the key must be there) and the keyword it fills (`name`, default `key`)."""

    key: str
    reader: Reader
    default: Any = _REQUIRED
    name: str | None = None
    options: Mapping[str, Any] = _dataclass_field(default_factory=dict)

    @property
    def required(self) -> bool:
        return self.default is _REQUIRED


def field(key: str, reader: Reader, default: Any = _REQUIRED, *, name: str | None = None,
          **options: Any) -> Field:
    """`field("depth", integer, None, low=0, high=50, null=True)`: see Field."""
    return Field(key, reader, default, name, options)


def read_fields(value: Any, where: str, fields: Iterable[Field], closed: bool = False,
                others: Iterable[str] = ()) -> dict[str, Any]:
    """The fields of an object, read in order, as {name: value} (constructor keywords).

    With `closed`, the object may hold no keys but the fields' and `others` (which the caller
    reads itself); otherwise other keys are allowed and ignored.
    """
    fields = tuple(fields)
    doc = obj(value, where, [f.key for f in fields if f.required],
              [f.key for f in fields if not f.required] + list(others), closed=closed)
    out = {}
    for f in fields:
        given = doc[f.key] if f.key in doc else f.default
        out[f.name or f.key] = f.reader(given, at(where, f.key), **f.options)
    return out


# ============================================================================ readers

def at(where: str, key: str) -> str:
    """The path of `key` inside the object at `where`."""
    return f"{where}.{key}" if where else key


def kind(value: Any) -> str:
    """A JSON value's type in words ("a number", "text", "null", ...)."""
    if value is None:
        return "null"
    if isinstance(value, bool):
        return "true/false"
    if isinstance(value, (int, float)):
        return "a number"
    if isinstance(value, str):
        return "text"
    if isinstance(value, list):
        return "a list"
    if isinstance(value, dict):
        return "an object"
    return type(value).__name__


def obj(value: Any, where: str, required: Iterable[str] = (), optional: Iterable[str] = (),
        closed: bool = True) -> dict:
    """A JSON object with the `required` keys; when `closed`, no keys but those and `optional`."""
    if not isinstance(value, dict):
        raise FieldError(where, f"should be an object, not {kind(value)}")
    required = tuple(required)
    missing = [key for key in required if key not in value]
    if missing:
        raise FieldError(where, f"lacks the field '{missing[0]}'")
    if closed:
        known = set(required) | set(optional)
        unknown = [key for key in value if key not in known]
        if unknown:
            raise FieldError(where, f"has an unknown field '{names.shown(unknown[0])}'")
    return value


def array(value: Any, where: str, limit: int = MAX_LIST, null: bool = False) -> list | None:
    """A JSON list of at most `limit` entries (its entries not checked)."""
    if value is None and null:
        return None
    if not isinstance(value, list):
        raise FieldError(where, f"should be a list, not {kind(value)}")
    if len(value) > limit:
        raise FieldError(where, f"holds {len(value)} entries; at most {limit} are allowed")
    return value


def tuple_of(value: Any, where: str, item: Reader, limit: int = MAX_LIST) -> tuple:
    """A JSON list read entry by entry with `item` (entry i at `where[i]`), as a tuple."""
    return tuple(item(v, f"{where}[{i}]") for i, v in enumerate(array(value, where, limit)))


def mapping(value: Any, where: str, item: Reader | None = None) -> dict:
    """A JSON object of any keys (names: no control character), each value read with `item`
    (None: kept as it is)."""
    doc = obj(value, where, closed=False)
    for key in doc:
        refused = names.problem(key)
        if refused:
            raise FieldError(where, f"has a field name that {refused}")
    if item is None:
        return dict(doc)
    return {key: item(v, at(where, key)) for key, v in doc.items()}


def text(value: Any, where: str, limit: int = MAX_NAME, null: bool = False,
         allowed: str = names.LINE_BREAKS) -> str | None:
    """A text of at most `limit` characters with no control character but those in
    `allowed` (models.names)."""
    if value is None and null:
        return None
    if not isinstance(value, str):
        raise FieldError(where, f"should be text, not {kind(value)}")
    if len(value) > limit:
        raise FieldError(where, f"is longer than {limit} characters")
    refused = names.problem(value, allowed)
    if refused:
        raise FieldError(where, refused)
    return value


def name(value: Any, where: str, null: bool = False) -> str | None:
    """A name (item, state, column): text on one line, no control character at all."""
    return text(value, where, MAX_NAME, null, allowed="")


def integer(value: Any, where: str, low: int = -MAX_INTEGER, high: int = MAX_INTEGER,
            null: bool = False) -> int | None:
    if value is None and null:
        return None
    if not isinstance(value, int) or isinstance(value, bool):
        raise FieldError(where, f"should be a whole number, not {kind(value)}")
    if not low <= value <= high:
        raise FieldError(where, f"should lie between {low} and {high}, not {value}")
    return value


def number(value: Any, where: str, null: bool = False) -> float | None:
    """A finite number, as a float (None for null when `null`)."""
    if value is None and null:
        return None
    if not isinstance(value, (int, float)) or isinstance(value, bool):
        raise FieldError(where, f"should be a number, not {kind(value)}")
    try:
        finite = np.isfinite(float(value))
    except OverflowError:  # an integer beyond any float
        finite = False
    if not finite:
        raise FieldError(where, "should be a finite number")
    return float(value)


def number_or_nan(value: Any, where: str) -> float:
    """A number that may be null where it was not finite when written (read as NaN)."""
    return float("nan") if value is None else number(value, where)


def boolean(value: Any, where: str) -> bool:
    if not isinstance(value, bool):
        raise FieldError(where, f"should be true or false, not {kind(value)}")
    return value


def choice(value: Any, where: str, choices: Iterable[str]) -> str:
    choices = tuple(choices)
    if not isinstance(value, str) or value not in choices:
        shown = repr(value[:40]) if isinstance(value, str) else kind(value)
        raise FieldError(where, f"should be one of {', '.join(choices)}, not {shown}")
    return value


def matrix(value: Any, where: str, shape: tuple[int, ...]) -> np.ndarray:
    """A nested list of numbers (null: not available, read as NaN) of the given shape."""
    if len(shape) == 1:
        cells = array(value, where, MAX_LIST)
        if len(cells) != shape[0]:
            raise FieldError(where, f"should hold {shape[0]} numbers")
        return np.array([number_or_nan(v, f"{where}[{i}]") for i, v in enumerate(cells)],
                        dtype=float)
    rows = array(value, where, MAX_LIST)
    if len(rows) != shape[0]:
        raise FieldError(where, f"should have {shape[0]} rows")
    out = np.empty(shape, dtype=float)
    for i, row in enumerate(rows):
        out[i] = matrix(row, f"{where}[{i}]", shape[1:])
    return out


def sha256(value: Any, where: str, null: bool = False) -> str | None:
    """A SHA-256 digest as 64 lower-case hex digits."""
    if value is None and null:
        return None
    digest = text(value, where)
    if len(digest) != 64 or any(c not in "0123456789abcdef" for c in digest):
        raise FieldError(where, "should be a SHA-256 digest (64 lower-case hex digits)")
    return digest


def timestamp(value: Any, where: str) -> str:
    """An ISO 8601 time with its UTC offset, as text."""
    written = text(value, where, 100)
    try:
        moment = datetime.fromisoformat(written.replace("Z", "+00:00"))
    except ValueError:
        raise FieldError(where, f"should be an ISO 8601 time, not {written[:40]!r}") from None
    if moment.tzinfo is None:
        raise FieldError(where, "should be an ISO 8601 time with its UTC offset")
    return written
