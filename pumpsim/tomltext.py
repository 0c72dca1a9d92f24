"""TOML text of setup documents, written with tomlkit.

:func:`dumps` writes a document afresh; :func:`restyle` writes it into an
earlier text of the same file, so that the user's comments, key order,
blank lines and number formats survive wherever a value did not change.
tomlkit does the TOML itself (quoting, escapes, characters outside the
Basic Multilingual Plane), which a hand-made writer kept getting wrong.
"""

import math

import tomlkit
from tomlkit.items import AoT, InlineTable, Table


def _fresh(value, depth):
    """A tomlkit item for a plain value: tables at the top level, arrays of tables
    for lists of tables there, inline tables deeper (``initial = { g = 1.0 }``)."""
    if isinstance(value, dict):
        if depth == 0:
            table = tomlkit.table()
            for k, v in value.items():
                table[k] = _fresh(v, depth + 1)
            return table
        inline = tomlkit.inline_table()
        for k, v in value.items():
            inline[k] = _fresh(v, depth + 1)
        return inline
    if depth == 0 and _tables(value):
        aot = tomlkit.aot()
        for v in value:
            aot.append(_fresh(v, 0))
        return aot
    if isinstance(value, list):
        array = tomlkit.array()
        for v in value:
            array.append(_fresh(v, depth + 1))
        return array
    return tomlkit.item(value)


def _tables(value):
    return isinstance(value, list) and bool(value) and all(isinstance(v, dict) for v in value)


def _same(a, b):
    """Equal as TOML values: 30 and 30.0 are, true and 1 are not, nan equals nan."""
    if isinstance(a, bool) or isinstance(b, bool):
        return type(a) is type(b) and a == b
    if isinstance(a, float) and isinstance(b, float) and math.isnan(a) and math.isnan(b):
        return True
    if isinstance(a, dict) and isinstance(b, dict):
        return a.keys() == b.keys() and all(_same(a[k], b[k]) for k in a)
    if isinstance(a, list) and isinstance(b, list):
        return len(a) == len(b) and all(_same(x, y) for x, y in zip(a, b))
    if isinstance(a, (int, float)) and isinstance(b, (int, float)):
        return a == b
    return type(a) is type(b) and a == b


def _merge(container, new, depth):
    """Make ``container`` (a tomlkit document or table) hold ``new``, touching only
    what differs."""
    for key in [k for k in container if k not in new]:
        del container[key]
    for key, value in new.items():
        if key not in container:
            container[key] = _fresh(value, depth)
            continue
        old = container[key]
        if isinstance(old, (Table, InlineTable)) and isinstance(value, dict):
            _merge(old, value, depth + 1)
        elif isinstance(old, AoT) and _tables(value):
            for table, item in zip(old, value):
                _merge(table, item, depth + 1)
            for item in value[len(old):]:
                old.append(_fresh(item, 0))
            while len(old) > len(value):
                del old[len(old) - 1]
        elif not _same(old.unwrap() if hasattr(old, "unwrap") else old, value):
            container[key] = _fresh(value, depth)


def dumps(document):
    """TOML text for a document (dicts, lists, strings, numbers, booleans)."""
    return tomlkit.dumps(_fresh_document(document))


def _fresh_document(document):
    doc = tomlkit.document()
    for k, v in document.items():
        doc[k] = _fresh(v, 0)
    return doc


def restyle(document, text):
    """TOML text for ``document``, written into ``text`` (an earlier TOML text of it):
    its comments, order and formats stay wherever the value is unchanged.

    ``tomllib.loads(restyle(d, text)) == d`` for any ``text`` that parses.
    """
    doc = tomlkit.parse(text)
    _merge(doc, document, 0)
    return tomlkit.dumps(doc)
