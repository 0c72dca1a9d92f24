"""Load, change and save setup TOML files (see ``files.md``).

The document (file units) is the source of truth: a :class:`~pumpsim.setup.Setup`
is always built from one by :func:`setup_from_document`, so a value changed with
``--set``, in code or in the window goes through exactly the same checks as a
value in a file.
"""

import copy
import math
import tomllib
from pathlib import Path

from .errors import InputError, near, unknown
from .hyperfine import check_component, check_zeeman_data
from .model import z_range
from .plausible import check_driven_line
from .schema import FIELDS, REQUIRED, fields_of
from .scheme_file import load_scheme
from .setup import Beam, NextStage, Numerics, Setup, Source
from .targets import TargetError, parse_target
from .tomlread import check_keys, read_toml, table_list, text
from .tomltext import dumps, restyle

TOP_KEYS = {"scheme", "target", "source", "beam", "numerics", "mode", "field", "next_stage"}
INITIAL_SUM_SLACK = 1e-6  # explicit initial populations must sum to 1 within this
NEEDS = {  # which optional source fields each kind requires
    "effusive": ("temperature_K",),
    "gaussian": ("speed_m_s", "speed_spread_m_s"),
    "monoenergetic": ("speed_m_s",),
}
UNUSED = {
    "effusive": ("speed_m_s", "speed_spread_m_s"),
    "gaussian": (),
    "monoenergetic": ("speed_spread_m_s",),
}


def load_setup(path) -> Setup:
    """Read and validate a setup file and the scheme it names.

    Parameters
    ----------
    path : str or Path

    Returns
    -------
    Setup

    Raises
    ------
    InputError
        Naming file, table and key (and level) for anything unusable.
    """
    doc, raw_text = read_toml(path)
    return setup_from_document(doc, str(path), text_=raw_text)


def setup_from_document(doc: dict, file=None, scheme=None, text_=None) -> Setup:
    """Validate a setup document and convert it to SI.

    Parameters
    ----------
    doc : dict
        Parsed TOML, file units.
    file : str or None
        Where it came from; relative scheme paths resolve against its folder.
    scheme : Scheme or None
        Reuse an already loaded scheme instead of reading ``doc["scheme"]``.
    text_ : str or None
        Verbatim file text to keep with the setup.
    """
    if "scheme" not in doc and {"species", "level", "decay"} & doc.keys():
        raise InputError("missing required key: this looks like a scheme file, not a setup; "
                         "give the setup that names it", file, None, "scheme")
    check_keys(doc, TOP_KEYS, file, None, required=("scheme", "target", "source"))
    if scheme is None:
        scheme = _load_named_scheme(doc, file)
    target = text(doc, "target", file, None)
    goal = _target(target, scheme, file)
    source = _source(doc["source"], file, scheme)
    beams = tuple(_beam(raw, i, file, scheme) for i, raw in enumerate(table_list(doc, "beam", file, required=False)))
    names = [b.name for b in beams]
    for n in names:
        if names.count(n) > 1:
            raise InputError(f"beam name {n!r} used twice", file, "beam", "name")
    numerics = _numerics(doc.get("numerics", {}), file, beams)
    mode = _mode(doc, file, scheme)
    if not goal.whole_level and mode["mode"] != "sublevel":
        raise InputError("names sublevels, which only sublevel mode resolves: add "
                         "mode = \"sublevel\" or target the whole level "
                         f"'{goal.level}'", file, None, "target")
    return Setup(scheme, target, source, beams, numerics, file, doc, text_, **mode,
                 next_stage=_next_stage(doc, file))


def _next_stage(doc, file):
    """The ``[next_stage]`` table (docs/measurement.md): an aperture needs its distance."""
    raw = doc.get("next_stage", {})
    fields = fields_of("next_stage")
    check_keys(raw, {f.key for f in fields}, file, "next_stage")
    v = _read_fields(raw, fields, file, "next_stage")
    for a, b in (("aperture_mm", "aperture_distance_mm"), ("aperture_distance_mm", "aperture_mm")):
        if a in raw and b not in raw:
            raise InputError(f"{a} needs {b} too", file, "next_stage", b)
    return NextStage(**v)


PROBE_KEYS = ("collection_sr", "collection_NA", "detection_efficiency")


def _check_probe(raw, v, file, table):
    """A probe names its collection (solid angle or NA, not both) and detection
    efficiency; a pump names neither (docs/measurement.md)."""
    if v["role"] == "probe":
        if ("collection_sr" in raw) == ("collection_NA" in raw):
            raise InputError("a probe needs exactly one of collection_sr or collection_NA",
                             file, table, "collection_sr")
        if "detection_efficiency" not in raw:
            raise InputError("a probe needs its detection efficiency (0 to 1)", file, table,
                             "detection_efficiency")
    else:
        for key in PROBE_KEYS:
            if key in raw:
                raise InputError("only a probe (role = \"probe\") has this key", file, table,
                                 key)


def _target(target, scheme, file):
    """The parsed target (a level id, or sublevels as in :mod:`pumpsim.targets`)."""
    try:
        return parse_target(scheme, target)
    except TargetError as exc:
        plain = "=" not in target  # a mistyped level id is named as a level, as elsewhere
        raise InputError(str(exc), file, None, "target", target if plain else None) from None


def _mode(doc, file, scheme):
    """Top-level ``mode`` and the ``[field]`` table (sublevel mode, docs/sublevel.md)."""
    out = _read_fields(doc, fields_of(""), file, None)
    raw = doc.get("field", {})
    fields = fields_of("field")
    check_keys(raw, {f.key for f in fields}, file, "field")
    out.update(_read_fields(raw, fields, file, "field"))
    if out["mode"] == "sublevel" and out["magnetic_field"] != 0:
        def fail(message, level):
            raise InputError(message, scheme.path, "level", "g_J", level)

        check_zeeman_data(scheme, fail)
    return out


def _load_named_scheme(doc, file):
    name = text(doc, "scheme", file, None)
    base = Path(file).parent if file else Path.cwd()
    path = base / name
    try:
        found = path.is_file()
    except OSError as exc:  # e.g. a name too long for the file system
        raise InputError(f"scheme file cannot be opened ({exc.strerror or exc})", file, None,
                         "scheme") from None
    if not found:
        raise InputError(f"scheme file not found: {path}", file, None, "scheme")
    return load_scheme(path)


def _read_fields(raw, fields, file, table):
    out = {}
    for f in fields:
        if f.key in raw:
            why = f.check(raw[f.key])
            if why:
                raise InputError(why, file, table, f.key)
            out[f.attr] = f.to_si(raw[f.key])
        elif f.default is REQUIRED:
            raise InputError("missing required key", file, table, f.key)
        else:
            out[f.attr] = None if f.default is None else f.to_si(f.default)
    return out


def _source(raw, file, scheme):
    fields = fields_of("source")
    check_keys(raw, {f.key for f in fields} | {"initial"}, file, "source", required=("kind",))
    v = _read_fields(raw, fields, file, "source")
    for key in NEEDS[v["kind"]]:
        if key not in raw:
            raise InputError(f"the {v['kind']} source needs this key", file, "source", key)
    for key in UNUSED[v["kind"]]:
        if key in raw:
            raise InputError(f"not used by the {v['kind']} source; remove it", file, "source", key)
    initial = raw.get("initial", "thermal")
    if isinstance(initial, str):
        if initial != "thermal":
            raise InputError(f"must be \"thermal\" or a table of level fractions, got {initial!r}",
                             file, "source", "initial")
        if v["temperature"] is None:
            raise InputError("thermal initial populations need temperature_K", file, "source",
                             "temperature_K")
    elif isinstance(initial, dict):
        pairs = []
        for lid, frac in initial.items():
            if lid not in scheme.ids:
                raise InputError(unknown("level", lid, scheme.ids), file, "source.initial", lid,
                                 lid)
            if isinstance(frac, bool) or not isinstance(frac, (int, float)) or not math.isfinite(frac) or frac < 0:
                raise InputError(f"must be a fraction >= 0, got {frac!r}", file, "source.initial", lid, lid)
            pairs.append((lid, float(frac)))
        total = sum(f for _, f in pairs)
        if abs(total - 1.0) > INITIAL_SUM_SLACK:
            raise InputError(f"fractions sum to {total:.9g}, not 1", file, "source.initial", None)
        initial = tuple((lid, f / total) for lid, f in pairs)
    else:
        raise InputError(f"must be \"thermal\" or a table, got {initial!r}", file, "source", "initial")
    return Source(initial=initial, **v)


def _beam(raw, i, file, scheme):
    fields = fields_of("beam")
    given = raw.get("name") if isinstance(raw, dict) else None
    # name the beam as the user does wherever it has a usable name, else by position
    table = f"beam '{given}'" if isinstance(given, str) and given.strip() else f"beam #{i + 1}"
    check_keys(raw, {f.key for f in fields} | {"name", "transition"}, file, table,
               required=("name", "transition"))
    name = text(raw, "name", file, table)
    if any(ch in name for ch in ".=[] "):
        raise InputError("beam names may not contain '.', '=', brackets or spaces", file, table, "name")
    tr = raw["transition"]
    if not (isinstance(tr, list) and len(tr) == 2 and all(isinstance(x, str) for x in tr)):
        raise InputError(f"must be [lower, upper] level ids, got {tr!r}", file, table, "transition")
    lower, upper = tr
    for lid in tr:
        if lid not in scheme.ids:
            raise InputError(unknown("level", lid, scheme.ids), file, table, "transition", lid)
    if scheme.level(upper).energy <= scheme.level(lower).energy:
        raise InputError(f"upper level '{upper}' must lie above lower level '{lower}'",
                         file, table, "transition", upper)
    if scheme.decay(upper, lower) is None:
        raise InputError(f"the scheme lists no decay {upper} -> {lower}, so the line has no "
                         "strength to drive", file, table, "transition", upper)
    check_driven_line(scheme, name, lower, upper, file, table)
    v = _read_fields(raw, fields, file, table)
    _check_probe(raw, v, file, table)
    if v["reference_F"] is not None:
        def fail(message):
            raise InputError(message, file, table, "reference_F")

        check_component(scheme, lower, upper, v["reference_F"], fail)
    if v["waist_across"] is None:
        v["waist_across"] = v["waist"]
    return Beam(name=name, lower=lower, upper=upper, **v)


def _numerics(raw, file, beams):
    fields = fields_of("numerics")
    check_keys(raw, {f.key for f in fields}, file, "numerics")
    v = _read_fields(raw, fields, file, "numerics")
    if not beams and (v["start"] is None or v["end"] is None):
        raise InputError("with no [[beam]], give both start_mm and end_mm", file, "numerics", "start_mm")
    n = Numerics(**v)
    start, end = z_range(n, beams)
    if not end > start:
        raise InputError(f"integration range is empty ({start * 1e3:g} to {end * 1e3:g} mm)",
                         file, "numerics", "end_mm")
    return n


def parse_value(value):
    """A ``--set`` value: a TOML value if it parses as one, else plain text."""
    if not isinstance(value, str):
        return value
    try:
        return tomllib.loads(f"v = {value}")["v"]
    except (tomllib.TOMLDecodeError, RecursionError):  # nested thousands deep: text too
        return value


def with_value(setup: Setup, key: str, value) -> Setup:
    """A new setup with the value at ``key`` replaced (``None`` removes it).

    Keys are dotted paths in file units: ``target``, ``source.temperature_K``,
    ``source.initial.g``, ``beam.pump.power_mW``, ``numerics.tolerance``.
    """
    doc = copy.deepcopy(setup.document)
    parts = key.split(".")
    file = setup.path
    if parts[0] == "beam":
        if len(parts) != 3:
            raise InputError("beam keys are beam.NAME.KEY", file, "beam", key)
        beams = doc.get("beam", [])
        match = [b for b in beams if b.get("name") == parts[1]]
        if not match:
            names = [str(b.get("name")) for b in beams]
            raise InputError(unknown("beam", parts[1], names).replace(
                "unknown beam", f"no beam named {parts[1]!r}", 1), file, "beam", key)
        node, leaf = match[0], parts[2]
    else:
        node = doc
        for p in parts[:-1]:
            node = node.setdefault(p, {})
            if not isinstance(node, dict):
                raise InputError("not a table", file, p, key)
        leaf = parts[-1]
    value = parse_value(value)
    if value is None:
        node.pop(leaf, None)
    else:
        node[leaf] = value
    scheme = None if key == "scheme" else setup.scheme
    return setup_from_document(doc, file, scheme=scheme, text_=setup.text)


def setup_keys(setup: Setup, numeric=False) -> list:
    """Every ``--set`` key of ``setup`` (``target``, ``source.temperature_K``,
    ``beam.pump.power_mW``, ``source.initial.g``, ...); with ``numeric``, only
    those that take numbers: what a scan can vary."""
    keys = [] if numeric else ["scheme", "target"]
    for f in FIELDS:
        if numeric and f.kind not in (float, int):
            continue
        if f.table == "beam":
            keys += [f"beam.{b.name}.{f.key}" for b in setup.beams]
        else:
            keys.append(f"{f.table}.{f.key}" if f.table else f.key)
    return keys + [f"source.initial.{lid}" for lid in setup.scheme.ids]


def check_numeric_key(setup: Setup, key: str, table: str) -> None:
    """Raise an :class:`InputError` (naming ``table``, e.g. ``--vary``) unless
    ``key`` is a ``--set`` key of ``setup`` that takes numbers; an unknown key
    is answered with the near ones (``did you mean``)."""
    if key in setup_keys(setup, numeric=True):
        return
    if key in setup_keys(setup):
        raise InputError("takes text, not numbers: only numeric setup values can be varied",
                         setup.path, table, key)
    numeric = setup_keys(setup, numeric=True)
    reason = unknown("key", key, numeric, None)
    if not near(key, numeric):
        beams = ", ".join(b.name for b in setup.beams) or "none"
        reason += (f" (numeric keys are source.KEY, beam.NAME.KEY with beams {beams}, "
                   "numerics.KEY, field.B_gauss and source.initial.LEVEL, as for --set)")
    raise InputError(reason, setup.path, table, key)


def setup_to_toml(setup: Setup) -> str:
    """The setup's document as TOML text (file units)."""
    return dumps(setup.document)


def save_setup(setup: Setup, path) -> None:
    """Write the setup to ``path`` atomically (temporary name, then rename).

    A setup read from a file keeps that file's comments, key order and number
    formats wherever a value did not change; only changed values are rewritten.
    """
    p = Path(path)
    tmp = p.with_name(p.name + ".partial")
    text = setup_to_toml(setup) if setup.text is None else restyle(setup.document, setup.text)
    tmp.write_text(text, encoding="utf-8")
    tmp.replace(p)
