"""What a setup's ``target`` names: a whole level, a hyperfine level, or a set of sublevels.

The text is a level id followed by optional quantum numbers, in the trade's
notation ``|F, m_F>`` written as words (docs/sublevel.md, *Targets*):

- ``"5S1/2"``: the whole level (the only form level mode takes; it means
  what it always meant);
- ``"5S1/2 F=2"``: every sublevel of the hyperfine level ``F = 2``;
- ``"5S1/2 F=2 m=+2"``: the single sublevel ``|F=2, m_F=+2>``;
- ``"5S1/2 F=2 m=max"``: the stretched state ``|F=2, m_F=+F>`` (``m=min``:
  ``m_F = -F``);
- ``"5S1/2 F=2 m=+1,+2"``, ``"5S1/2 F=1,2 m=0"``: every combination listed;
- ``"5S1/2 F=2 m=+2; F=1 m=+1"``: clauses separated by ``;`` add up (a
  clause without a level id belongs to the first clause's level).

Without hyperfine structure (no nuclear spin) a level's sublevels are
``|J, m_J>``: ``"g m=-1/2"`` (``F=`` or ``J=`` may name ``J``). ``m_F=`` and
``m_J=`` are accepted for ``m=``; ket brackets ``|`` ``>`` are ignored.
A target lies in one level, so that branching ratios into it, sinks and the
other level-mode notions keep their meaning.
"""

import re
from dataclasses import dataclass

import numpy as np

from .angular import twice
from .basis.sublevels import half, signed_half, sublevel_label
from .errors import unknown
from .hyperfine import f_values, m_values

KEY = re.compile(r"(?<![\w'])(F|J|m_F|m_J|m)\s*=\s*")


class TargetError(ValueError):
    """A target text that names no state of the scheme (the reason, in plain words)."""


@dataclass(frozen=True)
class Target:
    """A parsed target.

    Parameters
    ----------
    text : str
        As written.
    level : str
        The level it lies in.
    states : tuple
        ``((F, m), ...)`` in ascending order; empty for the whole level.
    """

    text: str
    level: str
    states: tuple = ()

    @property
    def whole_level(self) -> bool:
        return not self.states

    def mask(self, basis) -> np.ndarray:
        """Which of ``basis``'s states (``other`` included, never chosen) belong to it."""
        k = basis.scheme.index(self.level)
        inside = np.asarray(basis.level_of) == k
        if self.whole_level:
            return inside
        F, m = getattr(basis, "F", None), getattr(basis, "m", None)
        if F is None:
            raise TargetError("a sublevel target needs sublevel mode")
        wanted = {(twice(f), twice(mm)) for f, mm in self.states}
        picked = [bool(inside[s]) and (twice(F[s]), twice(m[s])) in wanted
                  for s in range(len(inside))]
        return np.array(picked)

    def labels(self, nuclear_spin) -> tuple:
        """Its sublevels' labels as sublevel mode names them (empty for a whole level)."""
        return tuple(sublevel_label(self.level, F, m, nuclear_spin) for F, m in self.states)


def _numbers(text, what):
    out = []
    for item in (x.strip() for x in text.split(",")):
        if item in ("max", "min") and what == "m":
            out.append(item)
            continue
        try:
            num, _, den = item.lstrip("+").partition("/")
            value = int(num) / (int(den) if den else 1)
            if den and int(den) != 2:
                raise ValueError
            twice(value)
        except (ValueError, ZeroDivisionError):
            raise TargetError(f"{what}={text!r}: expected whole or half-integer numbers "
                              "separated by commas" + (" (or max, min)" if what == "m" else "")
                              ) from None
        out.append(value)
    return out


def _clause(clause, scheme, default_level):
    ids = sorted(scheme.ids, key=len, reverse=True)
    level = next((i for i in ids if clause == i or clause.startswith(i + " ")), None)
    rest = clause[len(level):] if level else clause
    if level is None:
        head = clause.split()[0] if clause.split() else ""
        if default_level is None or not KEY.match(clause):
            raise TargetError(unknown("level", head or clause, scheme.ids))
        level = default_level
    pieces = KEY.split(rest)
    if pieces[0].strip(" ,"):
        raise TargetError(f"cannot read {pieces[0].strip()!r}: after the level id write "
                          "F=..., m=... (e.g. '5S1/2 F=2 m=+2')")
    given = {}
    for key, value in zip(pieces[1::2], pieces[2::2]):
        key = "m" if key.startswith("m") else "F"
        if key in given:
            raise TargetError(f"{key}= given twice in {clause!r}")
        given[key] = _numbers(value.strip().rstrip(","), key)
    lv = scheme.level(level)
    I = scheme.nuclear_spin
    allowed = f_values(lv.J, I)
    Fs = given.get("F", allowed)
    for F in Fs:
        if F not in allowed:
            name = "F" if I else "J"
            raise TargetError(f"level '{level}' has {name} = "
                              f"{', '.join(half(x) for x in allowed)}; got {half(F)}")
    if "F" not in given and "m" not in given:
        return level, None
    states = []
    for F in Fs:
        ms = m_values(F)
        for m in given.get("m", ms):
            m = {"max": F, "min": -F}.get(m, m)
            if m not in ms and "F" not in given and len(Fs) > 1:
                continue  # m=+2 without F= means every F that has it
            if m not in ms:
                raise TargetError(f"m={signed_half(m)} is not a sublevel of F={half(F)} "
                                  f"of level '{level}' (m runs from {signed_half(-F)} to "
                                  f"{signed_half(F)})")
            states.append((float(F), float(m)))
    if not states:
        raise TargetError(f"no F of level '{level}' has m={', '.join(map(str, given['m']))}")
    return level, states


def parse_target(scheme, text: str) -> Target:
    """The :class:`Target` a text names; :class:`TargetError` with the reason otherwise."""
    if text in scheme.ids:  # plain level ids first: they keep their meaning
        return Target(text, text)
    clauses = [c.strip() for c in re.sub(r"[|>⟩]", " ", text).split(";")]
    if not all(clauses):
        raise TargetError(f"empty clause in {text!r}")
    level, states = None, set()
    for clause in clauses:
        lid, found = _clause(" ".join(clause.split()), scheme, level)
        if level is not None and lid != level:
            raise TargetError(f"a target lies in one level; {text!r} names '{level}' and "
                              f"'{lid}'")
        level = lid
        if found is None:  # the whole level: nothing narrower counts
            return Target(text, level)
        states.update(found)
    return Target(text, level, tuple(sorted(states)))


def target_choices(scheme, sublevel: bool) -> tuple:
    """Targets to offer in a chooser: every level, and in sublevel mode each
    hyperfine level (when there is hyperfine structure), each stretched state
    and each single sublevel, level by level."""
    out = []
    I = scheme.nuclear_spin
    for lv in scheme.levels:
        out.append(lv.id)
        if not sublevel:
            continue
        for F in f_values(lv.J, I):
            head = f"{lv.id} F={half(F)}" if I else lv.id
            if I and len(f_values(lv.J, I)) > 1:
                out.append(head)
            out += [sublevel_label(lv.id, F, m, I) for m in reversed(m_values(F))]
    return tuple(out)
