"""The one error type users see for bad input, and the words it is built from."""

import difflib
import unicodedata

NAME_CHARS = 60  # longest key, table or level id shown as typed
REASON_CHARS = 300  # longest reason; the middle of a longer one (an echoed value) is cut


def shown(name):
    """A key, table or level id as it can be shown on one line: as typed if it
    is short and printable, else escaped (``repr``) and shortened."""
    name = str(name)
    if not name.isprintable():
        name = repr(name)[1:-1]
    if len(name) > NAME_CHARS:
        name = name[: NAME_CHARS - 3] + "..."
    return name


def _short(reason):
    reason = " ".join(str(reason).splitlines())
    if len(reason) <= REASON_CHARS:
        return reason
    half = (REASON_CHARS - 5) // 2
    return f"{reason[:half]} ... {reason[-half:]}"


def _folded(name):
    """A name without case and accents: what a slip of the keyboard changes."""
    decomposed = unicodedata.normalize("NFKD", str(name))
    return "".join(ch for ch in decomposed if not unicodedata.combining(ch)).casefold()


def near(name, candidates, n=3):
    """The candidates a mistyped ``name`` most likely meant: those equal but for
    case or accents (``e2`` for ``E2``) if any, else the closest spellings
    (:class:`difflib.SequenceMatcher` ratio at least 0.6, and within 0.05 of
    the best, so that one clear match is not diluted by distant ones)."""
    candidates = [str(c) for c in candidates if str(c) != str(name)]
    same = [c for c in candidates if _folded(c) == _folded(name)]
    if same:
        return same[:n]
    score = {c: difflib.SequenceMatcher(None, _folded(name), _folded(c)).ratio()
             for c in candidates}
    best = max(score.values(), default=0.0)
    ranked = sorted((c for c in candidates if score[c] >= max(0.6, best - 0.05)),
                    key=lambda c: -score[c])
    return ranked[:n]


def unknown(what, name, candidates, listing=""):
    """``unknown level; did you mean 'e2'? (levels: g, e1, e2)``: the reason for a
    name that is not among ``candidates``, with the near ones, then all of them
    under the heading ``listing`` (default ``what`` + "s"; ``None``: no list)."""
    guesses = near(name, candidates)
    reason = f"unknown {what}"
    if guesses:
        reason += "; did you mean " + " or ".join(f"'{shown(g)}'" for g in guesses) + "?"
    if listing is not None:
        names = ", ".join(shown(c) for c in candidates) or "none"
        reason += f" ({listing or what + 's'}: {names})"
    return reason


def apart(a, b, digits=6):
    """``a`` and ``b`` as text with as many significant digits as it takes to
    show that they differ (at least ``digits``): 1.0000001 against 1 must not
    print as "1, more than 1"."""
    for p in range(digits, 18):
        sa, sb = f"{a:.{p}g}", f"{b:.{p}g}"
        if sa != sb:
            return sa, sb
    return repr(a), repr(b)


class InputError(ValueError):
    """A scheme or setup value that cannot be used.

    The message always names the file, the table and the key, and the level id
    where one is involved, so that a user can go straight to the offending line.

    Parameters
    ----------
    message : str
        What is wrong, in plain words.
    file : str or None
        The file the value came from (``None`` for values set in code).
    table : str or None
        The TOML table, e.g. ``"beam 'pump'"`` or ``"level"``.
    key : str or None
        The key within that table.
    level : str or None
        The level id involved, if any.
    """

    def __init__(self, message, file=None, table=None, key=None, level=None):
        self.file, self.table, self.key, self.level = file, table, key, level
        self.reason = message
        where = [str(file) if file else "<setup in code>"]
        if table:
            where.append(f"[{shown(table)}]")
        if key is not None:
            where.append(f"key '{shown(key)}'")
        if level is not None:
            where.append(f"level '{shown(level)}'")
        super().__init__(f"{' '.join(where)}: {_short(message)}")


class NumericalError(ArithmeticError):
    """A computation that could not produce trustworthy numbers (exit code 1)."""
