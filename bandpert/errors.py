"""The tool's own error types.

A :class:`InputError` is a user's mistake (bad material file, impossible request). The CLI prints
its one-line message and exits with status 2. Anything else escaping the library is a bug (exit 1).
"""

from __future__ import annotations

import re

#: Longest value (a run of text without spaces, or a quoted stretch) a message echoes, in
#: characters; a longer one is cut in the middle, its length said ("zzz…zzz (5000 characters)").
MAX_ECHO = 80

#: Longest problem text of a message, in characters (the file and the key come on top): a
#: message that is still longer after :data:`MAX_ECHO` (a long value with spaces, unquoted)
#: keeps its start and its end, where the expected value is said.
MAX_PROBLEM = 400

#: A quoted stretch: the quote opens after a space or bracket and closes before one (so an
#: apostrophe, as in "file's", opens nothing).
_QUOTED = re.compile(r"(?<!\w)(?:'[^']*'|\"[^\"]*\"|`[^`]*`)(?!\w)")


def _cut(text: str, limit: int, quote: str = "") -> str:
    """``text`` shortened in the middle to about ``limit`` characters, its length said.

    ``quote`` (a quotation mark at both ends) is kept around the shortened text.
    """
    if len(text) + 2 * len(quote) <= limit:
        return f"{quote}{text}{quote}"
    head = (limit - 24) * 2 // 3
    tail = limit - 24 - head
    return f"{quote}{text[:head]}…{text[len(text) - tail:]}{quote} ({len(text)} characters)"


def bounded(text: str) -> str:
    """``text`` on one line with every echoed value at most about :data:`MAX_ECHO` characters.

    Whitespace runs (newlines included) become one space; each quoted stretch and each run
    without spaces longer than :data:`MAX_ECHO` is cut in the middle by :func:`_cut`.
    """
    text = " ".join(text.split())
    text = _QUOTED.sub(lambda m: _cut(m.group()[1:-1], MAX_ECHO, m.group()[0]), text)
    return " ".join(_cut(word, MAX_ECHO) for word in text.split(" "))


def _middle_out(text: str, limit: int) -> str:
    """``text`` cut to ``limit`` characters by dropping its middle (start and end kept)."""
    if len(text) <= limit:
        return text
    head = limit * 2 // 3
    return f"{text[:head]} … {text[len(text) - (limit - head - 3):]}"


class InputError(ValueError):
    """A user input that cannot be used, described in one line.

    Parameters
    ----------
    problem : str
        What is wrong, and what was expected.
    source : str, optional
        The file (or other origin) of the input.
    key : str, optional
        The dotted key inside the file, e.g. ``"lattice.a_A"``.
    """

    def __init__(self, problem: str, source: str | None = None, key: str | None = None):
        self.problem = problem
        self.source = source
        self.key = key
        super().__init__(self.one_line())

    def one_line(self) -> str:
        """The message as a single line: ``file: key: problem``.

        This is the one place every message is formatted, so the bounds hold for all of them:
        the key and each value echoed in the problem at most about :data:`MAX_ECHO`
        characters, the problem at most about :data:`MAX_PROBLEM` (:func:`bounded`). The file
        is named whole.
        """
        problem = _middle_out(bounded(self.problem), MAX_PROBLEM)
        parts = [" ".join(str(self.source).split()) if self.source else None,
                 bounded(str(self.key)) if self.key else None, problem]
        return ": ".join(p for p in parts if p)


class ModelWarning(UserWarning):
    """A result that is computed but should be read with care (an unconverged basis, a series
    outside its radius of convergence). The CLI prints it as one ``bandpert: warning:`` line."""
