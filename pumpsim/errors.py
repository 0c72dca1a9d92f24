"""The one error type users see for bad input."""


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
            where.append(f"[{table}]")
        if key:
            where.append(f"key '{key}'")
        if level:
            where.append(f"level '{level}'")
        super().__init__(f"{' '.join(where)}: {message}")
