"""Conventional names of the small irreps of the cubic crystals, matched by characters.

Each irrep is named by its characters on a few *named classes* of operations, told apart by
what a physicist sees in them: det R, the order of the proper part ±R, whether its axis is
parallel or perpendicular to k, whether that axis is a cube axis ⟨100⟩, a face diagonal ⟨110⟩ or
a body diagonal ⟨111⟩, and (only where it matters, diamond's X) whether the operation carries a
translation in the canonical frame (:mod:`bandpert.symmetry.groups`). A name applies only
when every listed character matches; otherwise the neutral fallback ``<point>#<n>(<dim>)``.

Tables (characters, from memory; the notation is that of Bouckaert, Smoluchowski & Wigner,
Phys. Rev. 50, 58 (1936) for O_h and its subgroups, extended by Herring, J. Franklin Inst.
233, 525 (1942) to diamond's nonsymmorphic group; zincblende's T_d names as in Parmenter,
Phys. Rev. 100, 573 (1955) and Dresselhaus, Phys. Rev. 100, 580 (1955); Koster, Dimmock,
Wheeler & Statz, *Properties of the Thirty-Two Point Groups*, 1963, for the point groups):

* Γ, O_h (diamond, origin at the bond centre; fcc metals, origin at an atom): the proper part
  fixes the index 1, 2, 12, 15, 25 (characters on C3, C4, C2⟨110⟩, C2⟨100⟩ as for O), the
  character of I the prime: Γ1, Γ2, Γ12, Γ15′, Γ25′ are even, Γ1′, Γ2′, Γ12′, Γ15, Γ25 odd
  (Γ15 transforms as (x, y, z), Γ25′ as (yz, zx, xy)).
* Γ, T_d (zincblende): Γ1 (A1), Γ2 (A2), Γ12 (E), Γ15 (T2, as x, y, z), Γ25 (T1).
* L, D_3d (diamond with the bond centre at the origin; fcc): L1 (A1g), L2 (A2g), L3 (Eg),
  L1′ (A1u), L2′ (A2u), L3′ (Eu).
* L, C_3v (zincblende): L1 (A1), L2 (A2), L3 (E).
* X, D_2d (zincblende, atom at the origin): X1 (A1), X2 (B1), X3 (B2), X4 (A2), X5 (E); the
  lowest free-electron pair cos/sin(2πz/a) gives X1 + X3, which swap when the other atom is put
  at the origin. X2/X4 as B1/A2 is from memory; tests/test_symmetry_time_reversal.py checks the
  characters (bands 9 and 14 of the bundled GaAs at X).
* X, diamond (origin at the bond centre; all four irreps two-dimensional): X1 and X2 have
  character ±2 on the mirrors containing k through a face diagonal (X1 → Δ1 + Δ2′, X2 → Δ2 +
  Δ1′ along Δ); X3 and X4 have −2 on the twofold screw axis along k and ±2 on the twofold axes
  ⟨110⟩ ⊥ k without translation (both → Δ5). Which of X3/X4 is which was fixed by Herring's
  decomposition of the free-electron group |k+G|² = 2(2π/a)² into X1 + X4 (from memory).
* Along Δ (C_4v) and Λ (C_3v), points inside the zone: characters after removing the phase
  exp(−i k·t): Δ1, Δ1′, Δ2, Δ2′, Δ5 (BSW: classes E, C4², C4, JC4², JC2) and Λ1, Λ2, Λ3.
"""

from __future__ import annotations

import numpy as np

from ..input.material import Material
from .groups import ATOL, LittleGroup, SpaceGroupFrame

__all__ = ["irrep_names", "op_classes", "structure_kind"]

DIAMOND, ZINCBLENDE, FCC = "diamond", "zincblende", "fcc"


def structure_kind(frame: SpaceGroupFrame, material: Material) -> str | None:
    """``"diamond"`` (227, 2 atoms), ``"zincblende"`` (216, 2 atoms), ``"fcc"`` (225, 1 atom)."""
    n = len(material.atoms)
    return {(227, 2): DIAMOND, (216, 2): ZINCBLENDE, (225, 1): FCC}.get((frame.number, n))


def _axis_type(v: np.ndarray) -> str:
    """``"a"`` ⟨100⟩, ``"d"`` ⟨110⟩, ``"b"`` ⟨111⟩ or ``"?"``."""
    s = np.sort(np.abs(v / np.linalg.norm(v)))
    for name, ref in (("a", (0, 0, 1)), ("d", (0, 1, 1)), ("b", (1, 1, 1))):
        r = np.array(ref, float) / np.linalg.norm(ref)
        if np.allclose(s, r, atol=1e-6):
            return name
    return "?"


def op_classes(frame: SpaceGroupFrame, group: LittleGroup, k_cart: np.ndarray
               ) -> list[tuple[int, int, str, str, bool]]:
    """Per little-group operation: (det, order of ±R, axis vs k, axis type, no translation).

    The axis of an improper operation is that of its proper part −R (a mirror's normal).
    "par"/"perp"/"oblique" relate it to k ("none" at Γ or for E and I).
    """
    out = []
    kn = np.linalg.norm(k_cart)
    for n in group.indices:
        r = frame.rotations_cart[n]
        det = int(np.rint(np.linalg.det(r)))
        p = det * r
        tr = float(np.trace(p))
        order = {3: 1, -1: 2, 0: 3, 1: 4}.get(int(np.rint(tr)), 6)
        if order == 1:
            rel, kind = "none", "-"
        else:
            w, v = np.linalg.eig(p)
            axis = np.real(v[:, np.argmin(np.abs(w - 1))])
            kind = _axis_type(axis)
            if kn < 1e-12:
                rel = "none"
            else:
                c = abs(axis @ k_cart) / (np.linalg.norm(axis) * kn)
                rel = "par" if c > 1 - 1e-6 else "perp" if c < 1e-6 else "oblique"
        out.append((det, order, rel, kind, bool(np.all(frame.translations[n] == 0))))
    return out


# a named class: (det, order, axis relation or None, axis type or None, no-translation or None)
Pattern = tuple[int, int, str | None, str | None, bool | None]

_O_PARTS: dict[str, dict[Pattern, float]] = {  # characters on C3, C4, C2⟨110⟩, C2⟨100⟩ (O)
    "1": {(1, 3, None, None, None): 1, (1, 4, None, None, None): 1,
          (1, 2, None, "d", None): 1, (1, 2, None, "a", None): 1},
    "2": {(1, 3, None, None, None): 1, (1, 4, None, None, None): -1,
          (1, 2, None, "d", None): -1, (1, 2, None, "a", None): 1},
    "12": {(1, 3, None, None, None): -1, (1, 4, None, None, None): 0,
           (1, 2, None, "d", None): 0, (1, 2, None, "a", None): 2},
    "15": {(1, 3, None, None, None): 0, (1, 4, None, None, None): 1,
           (1, 2, None, "d", None): -1, (1, 2, None, "a", None): -1},
    "25": {(1, 3, None, None, None): 0, (1, 4, None, None, None): -1,
           (1, 2, None, "d", None): 1, (1, 2, None, "a", None): -1},
}
_INVERSION: Pattern = (-1, 1, None, None, None)

_TABLES: dict[tuple[str, str], dict[str, dict[Pattern, float]]] = {
    (ZINCBLENDE, "Γ"): {
        "Γ1": {(1, 3, None, None, None): 1, (-1, 4, None, None, None): 1,
               (-1, 2, None, "d", None): 1},
        "Γ2": {(1, 3, None, None, None): 1, (-1, 4, None, None, None): -1,
               (-1, 2, None, "d", None): -1},
        "Γ12": {(1, 3, None, None, None): -1, (1, 2, None, "a", None): 2},
        "Γ15": {(1, 3, None, None, None): 0, (-1, 4, None, None, None): -1,
                (-1, 2, None, "d", None): 1},
        "Γ25": {(1, 3, None, None, None): 0, (-1, 4, None, None, None): 1,
                (-1, 2, None, "d", None): -1},
    },
    (ZINCBLENDE, "X"): {
        "X1": {(-1, 4, "par", None, None): 1, (1, 2, "perp", None, None): 1,
               (-1, 2, "perp", None, None): 1},
        "X2": {(-1, 4, "par", None, None): -1, (1, 2, "perp", None, None): 1,
               (-1, 2, "perp", None, None): -1},
        "X3": {(-1, 4, "par", None, None): -1, (1, 2, "perp", None, None): -1,
               (-1, 2, "perp", None, None): 1},
        "X4": {(-1, 4, "par", None, None): 1, (1, 2, "perp", None, None): -1,
               (-1, 2, "perp", None, None): -1},
        "X5": {(1, 2, "par", None, None): -2},
    },
    (ZINCBLENDE, "L"): {
        "L1": {(1, 3, "par", None, None): 1, (-1, 2, "perp", None, None): 1},
        "L2": {(1, 3, "par", None, None): 1, (-1, 2, "perp", None, None): -1},
        "L3": {(1, 3, "par", None, None): -1},
    },
    (DIAMOND, "X"): {
        "X1": {(1, 2, "par", None, None): 2, (-1, 2, "perp", "d", None): 2},
        "X2": {(1, 2, "par", None, None): 2, (-1, 2, "perp", "d", None): -2},
        "X3": {(1, 2, "par", None, None): -2, (1, 2, "perp", "d", True): -2},
        "X4": {(1, 2, "par", None, None): -2, (1, 2, "perp", "d", True): 2},
    },
}
_D3D = {
    "L1": {(1, 3, "par", None, None): 1, (1, 2, "perp", None, None): 1, _INVERSION: 1},
    "L2": {(1, 3, "par", None, None): 1, (1, 2, "perp", None, None): -1, _INVERSION: 1},
    "L3": {(1, 3, "par", None, None): -1, _INVERSION: 2},
    "L1′": {(1, 3, "par", None, None): 1, (1, 2, "perp", None, None): 1, _INVERSION: -1},
    "L2′": {(1, 3, "par", None, None): 1, (1, 2, "perp", None, None): -1, _INVERSION: -1},
    "L3′": {(1, 3, "par", None, None): -1, _INVERSION: -2},
}
_TABLES[(DIAMOND, "L")] = _D3D
_TABLES[(FCC, "L")] = _D3D
_C4V = {  # Δ: classes E, C4², C4, JC4² (mirror ∥ k through a cube axis), JC2 (⟨110⟩ mirror)
    "1": {(1, 2, "par", None, None): 1, (1, 4, "par", None, None): 1,
          (-1, 2, "perp", "a", None): 1, (-1, 2, "perp", "d", None): 1},
    "1′": {(1, 2, "par", None, None): 1, (1, 4, "par", None, None): 1,
           (-1, 2, "perp", "a", None): -1, (-1, 2, "perp", "d", None): -1},
    "2": {(1, 2, "par", None, None): 1, (1, 4, "par", None, None): -1,
          (-1, 2, "perp", "a", None): 1, (-1, 2, "perp", "d", None): -1},
    "2′": {(1, 2, "par", None, None): 1, (1, 4, "par", None, None): -1,
           (-1, 2, "perp", "a", None): -1, (-1, 2, "perp", "d", None): 1},
    "5": {(1, 2, "par", None, None): -2},
}
_C3V = {"1": {(1, 3, "par", None, None): 1, (-1, 2, "perp", None, None): 1},
        "2": {(1, 3, "par", None, None): 1, (-1, 2, "perp", None, None): -1},
        "3": {(1, 3, "par", None, None): -1}}


def _matches(chars: np.ndarray, classes: list, table: dict[Pattern, float]) -> bool:
    """Every operation fitting a pattern of ``table`` has that character."""
    for pattern, value in table.items():
        hit = [i for i, c in enumerate(classes)
               if all(p is None or p == x for p, x in zip(pattern, c, strict=True))]
        if not hit or np.max(np.abs(chars[hit] - value)) > 1e-6:
            return False
    return True


def _line_kind(group: LittleGroup, classes: list) -> str | None:
    """``"Δ"`` or ``"Λ"`` for a point inside the zone on ⟨100⟩ or ⟨111⟩, else None."""
    if any(c[2] == "none" for c in classes if c[1] > 1):
        return None
    orders = sorted((c[0], c[1], c[2]) for c in classes)
    if len(classes) == 8 and (1, 4, "par") in orders:
        return "Δ"
    if len(classes) == 6 and (1, 3, "par") in orders:
        return "Λ"
    return None


def irrep_names(frame: SpaceGroupFrame, group: LittleGroup, point: str, kind: str | None
                ) -> list[str]:
    """Name every small irrep of the little group (conventional where known, else neutral).

    Parameters
    ----------
    frame, group
        Operations (canonical frame) and the little group.
    point : str
        Label of the point (``"Γ"``, ``"X"``, ``"L"`` select the tables).
    kind : str or None
        :func:`structure_kind`.

    Returns
    -------
    list of str
    """
    from_k = group.k_frac
    k_cart = from_k @ np.linalg.inv(frame.lattice_t)  # proportional to the Cartesian k
    classes = op_classes(frame, group, k_cart)
    phase = np.exp(2j * np.pi * np.array([from_k @ frame.translations[n]
                                          for n in group.indices]))
    names = []
    gamma = bool(np.allclose(from_k, np.rint(from_k), atol=ATOL))
    face = bool(np.allclose(2 * from_k, np.rint(2 * from_k), atol=ATOL))  # −k ≡ k
    line = None if face else _line_kind(group, classes)
    for i, chars in enumerate(group.characters):
        name = None
        if gamma and kind in (DIAMOND, FCC):
            name = _oh_name(chars, classes)
        elif gamma and kind == ZINCBLENDE:
            name = _first(_TABLES[(ZINCBLENDE, "Γ")], chars, classes)
        elif line is not None and kind is not None:
            table = {line + k: v for k, v in (_C4V if line == "Δ" else _C3V).items()}
            name = _first(table, chars * phase, classes)
        elif (kind, point) in _TABLES:
            name = _first(_TABLES[(kind, point)], chars, classes)
        names.append(name or f"{point}#{i + 1}({int(group.dimensions[i])})")
    return names


def _first(table: dict[str, dict[Pattern, float]], chars: np.ndarray, classes: list
           ) -> str | None:
    """The first name of ``table`` whose characters match."""
    found = [n for n, t in table.items() if _matches(chars, classes, t)]
    return found[0] if len(found) == 1 else None


def _oh_name(chars: np.ndarray, classes: list) -> str | None:
    """Γ names of O_h (module docstring): index from the proper part, prime from I."""
    base = _first(_O_PARTS, chars, classes)
    inv = [i for i, c in enumerate(classes) if c[0] == -1 and c[1] == 1]
    if base is None or not inv:
        return None
    odd = chars[inv[0]].real < 0
    prime = odd != (base in ("15", "25"))
    return f"Γ{base}{'′' if prime else ''}"
