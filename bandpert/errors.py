"""The tool's own error types.

A :class:`InputError` is a user's mistake (bad material file, impossible request). The CLI prints
its one-line message and exits with status 2. Anything else escaping the library is a bug (exit 1).
"""

from __future__ import annotations


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
        """The message as a single line: ``file: key: problem``."""
        parts = [p for p in (self.source, self.key) if p]
        head = ": ".join(parts)
        text = f"{head}: {self.problem}" if head else self.problem
        return " ".join(text.split())


class ModelWarning(UserWarning):
    """A result that is computed but should be read with care (an unconverged basis, a series
    outside its radius of convergence). The CLI prints it as one ``bandpert: warning:`` line."""
