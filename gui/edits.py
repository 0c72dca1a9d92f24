"""Changing a setup from the window (no Qt): every edit is a ``--set`` key.

All edits go through :meth:`pumpsim.setup.Setup.with_value`, so the window
applies exactly the checks a file or ``--set`` gets. The one exception is a
change of source kind, which must add and drop keys together (each kind
needs its own keys and refuses the others'); it edits the document the same
way and validates it once.
"""

import copy

from pumpsim.setup_file import NEEDS, UNUSED, setup_from_document
from pumpsim.sources import speeds_of

ROOM_TEMPERATURE_K = 300.0  # proposed when a source kind needs a temperature the file lacks
SPREAD_SHARE = 0.1  # proposed gaussian rms spread, as a fraction of the speed


def apply_edit(setup, key, value):
    """A new setup with ``key`` set to ``value`` (file units; ``None`` removes it).

    Raises
    ------
    pumpsim.InputError
        Naming the key, for a bad key or value; ``setup`` is unchanged.
    """
    if key == "source.kind":
        return switch_source_kind(setup, value)
    return setup.with_value(key, value)


def switch_source_kind(setup, kind):
    """The setup with another source kind, proposing the keys the new kind needs."""
    doc = copy.deepcopy(setup.document)
    src = doc["source"]
    if kind not in NEEDS:
        src["kind"] = kind  # let the loader's message name the allowed kinds
        return setup_from_document(doc, setup.path, scheme=setup.scheme)
    speed = setup.source.speed or speeds_of(setup.source, setup.scheme.mass).mean()
    proposals = {"temperature_K": ROOM_TEMPERATURE_K, "speed_m_s": float(f"{speed:.3g}"),
                 "speed_spread_m_s": float(f"{SPREAD_SHARE * speed:.3g}")}
    src["kind"] = kind
    for key in UNUSED[kind]:
        src.pop(key, None)
    for key in NEEDS[kind]:
        src.setdefault(key, proposals[key])
    return setup_from_document(doc, setup.path, scheme=setup.scheme)


def table_object(setup, table, beam=None):
    """The SI dataclass a table's fields fill (the setup itself for the top level and
    ``[field]``, whose values it holds)."""
    if table == "beam":
        return setup.beam(beam)
    return {"source": setup.source, "numerics": setup.numerics, "": setup, "field": setup}[table]


def document_table(setup, table, beam=None):
    """The file-unit dict of a table in the setup's document."""
    doc = setup.document
    if table == "beam":
        return next(b for b in doc.get("beam", []) if b.get("name") == beam)
    if table == "":
        return doc
    return doc.get(table, {})


def field_state(setup, field, beam=None):
    """``(effective file-unit value, given in the file?)`` of one field."""
    si = getattr(table_object(setup, field.table, beam), field.attr)
    return field.from_si(si), field.key in document_table(setup, field.table, beam)


def field_key(field, beam=None):
    """The ``--set`` key of a field."""
    if field.table == "beam":
        return f"beam.{beam}.{field.key}"
    return f"{field.table}.{field.key}" if field.table else field.key


SUBLEVEL_ONLY = {("beam", "polarization"), ("beam", "reference_F"),
                 ("field", "B_gauss")}  # level mode ignores them


def shown_fields(setup, fields):
    """The fields of a table worth a control for this setup: not a source kind's unused
    keys, nor in level mode the values only sublevel mode reads."""
    unused = UNUSED.get(setup.source.kind, ())
    return [f for f in fields if not (f.table == "source" and f.key in unused)
            and not (setup.mode == "level" and (f.table, f.key) in SUBLEVEL_ONLY)]
