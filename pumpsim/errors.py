"""The one error type users see for bad input."""

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
