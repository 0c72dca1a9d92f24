"""Reading TOML files and checking table keys, with errors that name the place."""

import math
import tomllib
from pathlib import Path

from .errors import InputError, unknown

# Deepest nesting of tables and arrays a file may have. Schemes and setups use
# three levels ([[beam]] > reference_F > value); a parser walks nesting by
# recursion, so files thousands deep would otherwise end in a RecursionError.
MAX_DEPTH = 32


def read_toml(path):
    """Parse a TOML file into a dict; any failure is an :class:`InputError`."""
    p = Path(path)
    try:
        raw = p.read_bytes()
    except OSError as exc:
        raise InputError(f"cannot read file ({exc.strerror or exc})", file=str(p)) from None
    try:
        # utf-8-sig: editors on Windows may start a UTF-8 file with a byte-order mark
        text = raw.decode("utf-8-sig")
    except UnicodeDecodeError as exc:
        if raw[:2] in (b"\xff\xfe", b"\xfe\xff"):
            raise InputError("file is UTF-16 text; save it as UTF-8", file=str(p)) from None
        raise InputError(f"file is not UTF-8 text (invalid byte at offset {exc.start})",
                         file=str(p)) from None
    try:
        doc = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise InputError(f"not valid TOML: {exc}", file=str(p)) from None
    except RecursionError:
        doc = None
    if doc is None or _depth(doc) > MAX_DEPTH:
        raise InputError(f"nested too deeply (tables or arrays more than {MAX_DEPTH} levels "
                         "deep)", file=str(p))
    return doc, text


def _depth(value):
    """Levels of nesting of tables and arrays in ``value``, counted without recursion."""
    deepest, stack = 0, [(value, 0)]
    while stack:
        node, depth = stack.pop()
        if isinstance(node, dict):
            node = node.values()
        elif not isinstance(node, list):
            continue
        deepest = max(deepest, depth + 1)
        if depth + 1 <= MAX_DEPTH:
            stack.extend((child, depth + 1) for child in node)
    return deepest


def check_keys(table: dict, allowed, file, name, required=()):
    """Reject unknown keys and report missing required ones."""
    if not isinstance(table, dict):
        raise InputError(f"must be a table, got {type(table).__name__}", file, name)
    for key in table:
        if key not in allowed:
            raise InputError(unknown("key", key, sorted(allowed), "allowed"), file, name, key)
    for key in required:
        if key not in table:
            raise InputError("missing required key", file, name, key)


def table_list(doc: dict, key: str, file, required=True):
    """An array of tables such as ``[[level]]``, checked for shape."""
    items = doc.get(key)
    if items is None:
        if required:
            raise InputError(f"no [[{key}]] tables", file, key)
        return []
    if not isinstance(items, list) or not all(isinstance(t, dict) for t in items):
        raise InputError(f"must be an array of tables written [[{key}]]", file, key)
    return items


def number(table, key, file, name, *, positive=False, nonnegative=False, low=None,
           high=None, unit="", level=None):
    """A finite number from a table, with optional sign checks and bounds.

    ``positive`` and ``nonnegative`` are sign checks; ``low`` and ``high``
    (inclusive, same units as the file, named ``unit`` in messages) are the
    physical range.
    """
    value = table[key]
    if isinstance(value, bool) or not isinstance(value, (int, float)):
        raise InputError(f"must be a number, got {value!r}", file, name, key, level)
    if not math.isfinite(value):
        raise InputError(f"must be finite, got {value!r}", file, name, key, level)
    if positive and value <= 0:
        raise InputError(f"must be > 0, got {value!r}", file, name, key, level)
    if nonnegative and value < 0:
        raise InputError(f"must be >= 0, got {value!r}", file, name, key, level)
    u = f" {unit}" if unit else ""
    if low is not None and value < low:
        raise InputError(f"must be >= {low:g}{u}, got {value!r}", file, name, key, level)
    if high is not None and value > high:
        raise InputError(f"must be <= {high:g}{u}, got {value!r}", file, name, key, level)
    return float(value)


def text(table, key, file, name, level=None):
    value = table[key]
    if not isinstance(value, str) or not value.strip():
        raise InputError(f"must be non-empty text, got {value!r}", file, name, key, level)
    return value
