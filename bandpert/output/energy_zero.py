"""The one energy zero of a run, as every output states it (CONVENTIONS.md, "Energies").

A run chooses one display zero (:func:`bandpert.physics.bands.choose_energy_zero`: the
valence-band maximum of a semiconductor, the Fermi level of a metal, or the model's own zero
without an electron count). Terminal, CSV, JSON and figure give energies from that zero and say
which it is; the absolute energies (the model's zero, V(G = 0) as given) ride along as extra
keys and columns named ``…_absolute_eV``.
"""

from __future__ import annotations

from typing import Any

import numpy as np

#: The zero's kind when a run has no electron count: the model's own zero.
ABSOLUTE = "absolute"

#: What the model's own zero is, in words (every output that gives absolute energies says it).
MODEL_ZERO = "the model's own zero (V(G = 0) as given)"


def zero_entry(kind: str, absolute_eV: float) -> dict[str, Any]:
    """The ``energy_zero`` of a JSON document: its name and its absolute value (eV)."""
    name = "model zero" if kind == ABSOLUTE else kind
    return {"name": name, "absolute_eV": float(absolute_eV)}


def from_zero(value, zero_eV: float):
    """``value`` (absolute, eV: a number, array or None) measured from the zero."""
    if value is None:
        return None
    if isinstance(value, np.ndarray | list | tuple):
        return np.asarray(value, dtype=float) - zero_eV
    return float(value) - zero_eV


def with_absolute(entry: dict[str, Any], key: str, value, zero_eV: float) -> None:
    """Put ``value`` into ``entry`` twice: from the zero as ``<key>_eV`` and absolute as
    ``<key>_absolute_eV``."""
    entry[f"{key}_eV"] = from_zero(value, zero_eV)
    entry[f"{key}_absolute_eV"] = value


def zero_phrase(kind: str, absolute_eV: float) -> str:
    """The zero in words for terminals, CSV headers and figure notes, e.g. "the valence-band
    maximum (-0.4021 eV on the model's absolute scale)"."""
    if kind == ABSOLUTE:
        return MODEL_ZERO
    return f"the {kind} ({absolute_eV:.4f} eV on the model's absolute scale)"


def energies_note(kind: str, absolute_eV: float) -> str:
    """One sentence: energies are from the zero, and how to get the absolute ones."""
    if kind == ABSOLUTE:
        return f"energies in eV from {MODEL_ZERO}"
    return (f"energies in eV from {zero_phrase(kind, absolute_eV)}; add {absolute_eV:.6f} eV "
            "for the model's absolute energies")
