"""The one exception type for bad input: it names the file, the key and what is wrong."""

from __future__ import annotations


class InputError(Exception):
    """Bad user input. `file` is the path (or '-'), `key` the offending key (dotted, e.g.
    'body[bob-east].radius'), `reason` a short plain-English statement of the problem."""

    def __init__(self, file: str | None, key: str | None, reason: str):
        self.file = str(file) if file is not None else None
        self.key = key
        self.reason = reason
        super().__init__(self.one_line())

    def one_line(self) -> str:
        """The single line the command line prints."""
        parts = [p for p in (self.file, self.key) if p]
        where = ": ".join(parts)
        text = f"{where}: {self.reason}" if where else self.reason
        return " ".join(text.split())
