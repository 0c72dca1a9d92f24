"""Numeric scheme values as keys, so that a fit can vary them like setup values.

Keys (file units): ``decay.UPPER.LOWER.branching``, ``decay.UPPER.LOWER.A_per_s``
and ``level.ID.lifetime_s``. Changing one branching of an upper level
rescales the level's other listed branchings so that their sum, and with it
the share lost to unlisted levels, stays as in the file: a measured branching
to the target takes its share from the other listed decays in their old
proportions.
"""

import copy

from .errors import InputError
from .scheme_file import scheme_from_document
from .setup_file import setup_from_document

BOUNDS = {"branching": (0.0, 1.0), "A_per_s": (1e-30, 1e15), "lifetime_s": (1e-15, 1e20)}


def is_scheme_key(key) -> bool:
    return key.startswith("decay.") or key.startswith("level.")


def _entry(setup, key):
    """The scheme document's table a key points to, and the value's name."""
    doc = setup.scheme.document
    parts = key.split(".")
    where = dict(file=setup.scheme.path, table=parts[0], key=key)
    if parts[0] == "decay" and len(parts) == 4 and parts[3] in ("branching", "A_per_s"):
        for d in doc.get("decay", []):
            if d.get("upper") == parts[1] and d.get("lower") == parts[2]:
                if parts[3] not in d:
                    raise InputError(f"this decay is given by "
                                     f"{'A_per_s' if parts[3] == 'branching' else 'branching'}; "
                                     "vary that", **where)
                return parts, parts[3]
        raise InputError(f"the scheme lists no decay {parts[1]} -> {parts[2]}", **where)
    if parts[0] == "level" and len(parts) == 3 and parts[2] == "lifetime_s":
        if not any(lv.get("id") == parts[1] for lv in doc.get("level", [])):
            raise InputError(f"no level {parts[1]!r}", **where)
        return parts, "lifetime_s"
    raise InputError("scheme keys are decay.UPPER.LOWER.branching, decay.UPPER.LOWER.A_per_s "
                     "or level.ID.lifetime_s", **where)


def scheme_value(setup, key) -> float:
    """The scheme's current value (file units) of a scheme key."""
    parts, name = _entry(setup, key)
    doc = setup.scheme.document
    if parts[0] == "decay":
        return float(next(d[name] for d in doc["decay"]
                          if d["upper"] == parts[1] and d["lower"] == parts[2]))
    lv = next(lv for lv in doc["level"] if lv["id"] == parts[1])
    if name not in lv:
        raise InputError("the level has no lifetime_s to vary", setup.scheme.path, "level", key)
    return float(lv[name])


def with_scheme_value(setup, key, value):
    """A new setup whose scheme has ``key`` set to ``value`` (re-validated)."""
    parts, name = _entry(setup, key)
    doc = copy.deepcopy(setup.scheme.document)
    if parts[0] == "decay":
        mine = [d for d in doc["decay"] if d["upper"] == parts[1]]
        this = next(d for d in mine if d["lower"] == parts[2])
        if name == "branching":
            others = [d for d in mine if d is not this]
            total = sum(d["branching"] for d in mine)
            rest = sum(d["branching"] for d in others)
            if value > total:
                raise InputError(f"a branching of {value:g} exceeds the {total:g} the listed "
                                 f"decays of {parts[1]} share", setup.scheme.path, "decay", key)
            for d in others:
                d["branching"] = d["branching"] * (total - value) / rest if rest else 0.0
            others_zero = [d for d in others if d["branching"] <= 0]
            for d in others_zero:  # a decay cannot have a zero branching: it leaves the list
                doc["decay"].remove(d)
        this[name] = float(value)
    else:
        next(lv for lv in doc["level"] if lv["id"] == parts[1])[name] = float(value)
    scheme = scheme_from_document(doc, setup.scheme.path, setup.scheme.text)
    return setup_from_document(setup.document, setup.path, scheme=scheme, text_=setup.text)


def scheme_bounds(key) -> tuple:
    return BOUNDS[key.rsplit(".", 1)[1]]
