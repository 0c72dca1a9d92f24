"""A small TOML writer for setup documents (tables, arrays of tables, scalars)."""

import json
import math


def _scalar(v):
    if isinstance(v, bool):
        return "true" if v else "false"
    if isinstance(v, int):
        return str(v)
    if isinstance(v, float):
        if math.isnan(v):
            return "nan"
        if math.isinf(v):
            return "inf" if v > 0 else "-inf"
        return repr(v)
    if isinstance(v, str):
        return json.dumps(v, ensure_ascii=False)
    if isinstance(v, list):
        return "[" + ", ".join(_scalar(x) for x in v) + "]"
    if isinstance(v, dict):
        return "{ " + ", ".join(f"{_key(k)} = {_scalar(x)}" for k, x in v.items()) + " }"
    raise TypeError(f"cannot write {type(v).__name__} to TOML")


def _key(k):
    return k if k.replace("_", "").replace("-", "").isalnum() and k.isascii() else json.dumps(k)


def _is_table_array(v):
    return isinstance(v, list) and v and all(isinstance(x, dict) for x in v)


def _emit(doc, prefix, lines):
    for k, v in doc.items():
        if not isinstance(v, dict) and not _is_table_array(v):
            lines.append(f"{_key(k)} = {_scalar(v)}")
    for k, v in doc.items():
        name = f"{prefix}{_key(k)}"
        if isinstance(v, dict):
            lines.append("")
            lines.append(f"[{name}]")
            _emit(v, name + ".", lines)
        elif _is_table_array(v):
            for item in v:
                lines.append("")
                lines.append(f"[[{name}]]")
                _emit(item, name + ".", lines)


def dumps(doc: dict) -> str:
    """TOML text for ``doc``; ``tomllib.loads(dumps(doc)) == doc``."""
    lines = []
    _emit(doc, "", lines)
    return "\n".join(lines).lstrip("\n") + "\n"
