"""Numbers as text for terminals and notes: fixed decimals, never a negative zero."""

from __future__ import annotations

import numpy as np


def fixed(x: float, digits: int = 4, *, sign: bool = False) -> str:
    """``x`` with ``digits`` decimals; a value that rounds to zero prints as 0, never "-0.0000".

    With ``sign`` a leading + is written for positive values (and for zero).
    """
    v = round(float(x), digits) + 0.0  # + 0.0 turns -0.0 into 0.0
    return f"{v:+.{digits}f}" if sign else f"{v:.{digits}f}"


def vector(v, digits: int = 4) -> str:
    """A vector as ``(a, b, c)`` with :func:`fixed` entries."""
    return "(" + ", ".join(fixed(x, digits) for x in np.asarray(v, dtype=float).ravel()) + ")"
