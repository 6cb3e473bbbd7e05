"""The accepted range of every numeric material key: one home for the readers and the fit.

A plane-wave material file's numbers are refused outside their ranges by the readers
(:mod:`.lattice_input`, :mod:`.potential_input`, :mod:`.spin_orbit`, :mod:`.nonlocal_input`,
:mod:`.material`); ``bandpert fit`` varies the same keys and must stay inside the same ranges
(:mod:`bandpert.runs.fit` hands them to the least squares as bounds). Both take the ranges from
here, so a reader and the fit cannot drift apart (tests/test_key_ranges.py checks every
registered key against the reader: a value at each closed end, or just inside an open one, is
accepted; one just outside is refused naming the key).

:func:`key_range` resolves a dotted key as a sweep or a fit names it (``lattice.a_A``,
``nonlocal.species.Ge.R2_A``, ``potential.symmetric[1]``) to its :class:`KeyRange`. An open end
(a radius > 0) is kept by the fit a :meth:`KeyRange.margin` inside (:meth:`KeyRange.inner`), so
no trial point and no finite-difference step ever lands exactly on it.

Ranges are per key. Constraints between keys (atoms at least 0.3 Å apart, the shortest lattice
translation, a taper's q1 < q2, a continuous form factor's bound on |V|, the slope bumps'
order) are checked by the readers only; a fit step that breaks one stops the fit with one line
naming the parameter. The bound on tabulated form factors and Fourier coefficients,
|V| ≤ :data:`MAX_POTENTIAL_RATIO` × ħ²(2π/a)²/2m0, depends on the file's lattice constant and
energy unit: :func:`key_range` takes them from the document when given one.
"""

from __future__ import annotations

import math
import re
from collections.abc import Callable
from typing import Any, NamedTuple

from ..errors import InputError
from ..units import ENERGY_UNITS_TO_EV, HBAR2_OVER_2M0_EV_A2

#: Fraction of a range's width (of max(1, |end|) for an unbounded range) by which the fit keeps
#: away from an open end.
OPEN_MARGIN = 1e-6

#: Shortest accepted lattice length (lattice constants), Å: the closest allowed distance
#: between two atoms, since a shorter period puts every atom on its own image.
MIN_LATTICE_LENGTH_A = 0.3

#: Longest accepted lattice length (lattice constants and vector lengths), Å. A longer period
#: puts the first reciprocal shell below 4e-6 eV: every band energy would be a numerical
#: rounding of the free-electron continuum.
MAX_LATTICE_LENGTH_A = 1000.0

#: Largest accepted magnitude of a fractional coordinate (atoms, path points; guards the
#: arithmetic only).
MAX_FRACTIONAL_COORDINATE = 1000.0

#: Largest accepted plane-wave cutoff, eV (7350 Ry): beyond any basis the tool builds.
MAX_CUTOFF_EV = 1.0e5

#: Largest |G|² of a listed form-factor shell, in (2π/a)²: far beyond any basis the tool builds.
MAX_SHELL_G2 = 1.0e4

#: Largest accepted |V| of a Fourier coefficient or form factor, as a multiple of the kinetic
#: scale ħ²(2π/a)²/2m0 (silicon's strongest form factor is 0.56 of it). A stronger potential
#: binds states on a length scale no plane-wave basis of at most 4000 waves resolves; its bands
#: would be numbers without meaning.
MAX_POTENTIAL_RATIO = 100.0

#: Largest accepted |value| and uncertainty of a deformation-potential target (eV): measured
#: deformation potentials of semiconductors lie within about ±20 eV.
MAX_DEFORMATION_EV = 50.0

#: Largest accepted spin–orbit strength λ_s, eV: the fitted strengths of the bundled files are
#: of order 0.01–0.1 eV; 10 eV would split the valence top by tens of eV.
MAX_STRENGTH_EV = 10.0

#: Largest accepted |A_l| (eV) and radius R_l (Å) of a nonlocal square well: published depths
#: are a few eV and radii about 1–2 Å (Chelikowsky & Cohen, Phys. Rev. B 14, 556 (1976); from
#: memory).
MAX_DEPTH_EV = 100.0
MAX_RADIUS_A = 5.0

#: Accepted slope s of an l = 0 depth that follows the state's energy, A_0(E) = A_0 + s E
#: (dimensionless, eV of depth per eV of energy). With s ≤ 0 the metric 1 − s P_0 of the
#: eigenproblem (:mod:`bandpert.planewave.nonlocal_term`) is at least 1; a positive s needs
#: s λ_max(P_0) < 1, checked per k where the model is built (P_0 is a sum of projectors, so
#: λ_max is 1 while the wells do not overlap). Published energy slopes of the l = 0 well are
#: a fraction of 1 (Chelikowsky & Cohen, Phys. Rev. B 14, 556 (1976); from memory).
MIN_ENERGY_SLOPE = -1.0
MAX_ENERGY_SLOPE = 0.5


class KeyRange(NamedTuple):
    """The accepted values of one key: lo ≤ x ≤ hi, with < where an end is open.

    Attributes
    ----------
    lo, hi : float
        The ends (±inf: unbounded).
    open_low, open_high : bool
        The end itself is refused (a radius > 0).
    """

    lo: float
    hi: float
    open_low: bool = False
    open_high: bool = False

    @property
    def closed(self) -> tuple[float, float]:
        """(lo, hi): the ``bounds`` a reader checks (the open ends separately)."""
        return (self.lo, self.hi)

    def contains(self, x: float) -> bool:
        """Whether the reader accepts ``x``."""
        return ((self.lo < x if self.open_low else self.lo <= x)
                and (x < self.hi if self.open_high else x <= self.hi))

    def margin(self, end: float) -> float:
        """How far inside the open end ``end`` the fit keeps (:data:`OPEN_MARGIN`)."""
        width = self.hi - self.lo
        return OPEN_MARGIN * (width if math.isfinite(width) else max(1.0, abs(end)))

    def inner(self) -> tuple[float, float]:
        """The closed interval a fit searches: the range less a margin at each open end."""
        lo = self.lo + self.margin(self.lo) if self.open_low else self.lo
        hi = self.hi - self.margin(self.hi) if self.open_high else self.hi
        return lo, hi

    def text(self) -> str:
        """The range as a reader would say it (``0 < x <= 5``)."""
        low = "" if self.lo == -math.inf else f"{self.lo:g} {'<' if self.open_low else '<='} "
        high = "" if self.hi == math.inf else f" {'<' if self.open_high else '<='} {self.hi:g}"
        return f"{low}x{high}" if low or high else "any finite number"


UNBOUNDED = KeyRange(-math.inf, math.inf)
POSITIVE = KeyRange(0.0, math.inf, open_low=True)

#: Named ranges the readers check (their ``bounds=`` and open ends come from these).
LATTICE_LENGTH_A = KeyRange(MIN_LATTICE_LENGTH_A, MAX_LATTICE_LENGTH_A)
LATTICE_ANGLE_DEG = KeyRange(0.0, 180.0, open_low=True, open_high=True)
VECTOR_COMPONENT_A = KeyRange(-MAX_LATTICE_LENGTH_A, MAX_LATTICE_LENGTH_A)
FRACTIONAL_COORDINATE = KeyRange(-MAX_FRACTIONAL_COORDINATE, MAX_FRACTIONAL_COORDINATE)
CUTOFF_EV = KeyRange(0.0, MAX_CUTOFF_EV, open_low=True)
CUTOFF_RY = KeyRange(0.0, MAX_CUTOFF_EV / ENERGY_UNITS_TO_EV["Ry"], open_low=True)
KINETIC_FACTOR = KeyRange(0.5, 1.5)
SHELL_G2 = KeyRange(0.0, MAX_SHELL_G2)
CONTINUOUS_A3 = KeyRange(1.0, math.inf, open_low=True)
TAPER_START_INVA = KeyRange(0.0, math.inf)
DEFORMATION_VALUE_EV = KeyRange(-MAX_DEFORMATION_EV, MAX_DEFORMATION_EV)
DEFORMATION_UNCERTAINTY_EV = KeyRange(0.0, MAX_DEFORMATION_EV, open_low=True)
SPIN_ORBIT_STRENGTH_EV = KeyRange(0.0, MAX_STRENGTH_EV)
SLATER_EXPONENT_INVA = KeyRange(0.5, 200.0)
NONLOCAL_DEPTH_EV = KeyRange(-MAX_DEPTH_EV, MAX_DEPTH_EV)
NONLOCAL_RADIUS_A = KeyRange(0.0, MAX_RADIUS_A, open_low=True)
NONLOCAL_ENERGY_SLOPE = KeyRange(MIN_ENERGY_SLOPE, MAX_ENERGY_SLOPE)


def kinetic_scale_eV(a_A: float) -> float:
    """The kinetic scale ħ²(2π/a)²/2m0 of a lattice constant ``a`` (Å), in eV.

    It is the free-electron energy of the first reciprocal shell of a simple cubic lattice of
    edge ``a``, the natural unit of the form factors (5.10 eV for silicon's a = 5.43 Å).
    """
    return HBAR2_OVER_2M0_EV_A2 * (2.0 * math.pi / a_A) ** 2


def potential_limit_eV(a_A: float) -> float:
    """Largest accepted |V| of a form factor or Fourier coefficient, eV
    (:data:`MAX_POTENTIAL_RATIO` × :func:`kinetic_scale_eV`)."""
    return MAX_POTENTIAL_RATIO * kinetic_scale_eV(a_A)


def _potential_range(document: dict[str, Any] | None) -> KeyRange:
    """±:func:`potential_limit_eV` in the file's energy unit (unbounded without a document)."""
    try:
        lattice, potential = document["lattice"], document["potential"]
        a = lattice["a_A"] if "a_A" in lattice else math.hypot(*lattice["vectors_A"][0])
        limit = potential_limit_eV(float(a)) / ENERGY_UNITS_TO_EV[potential["unit"]]
    except (KeyError, TypeError, IndexError, ValueError, ZeroDivisionError):
        return UNBOUNDED
    return KeyRange(-limit, limit)


Resolver = KeyRange | Callable[[dict[str, Any] | None], KeyRange]

_NAME = r"[^.\[\]]+"
_INDEX = r"\[\d+\]"

#: (pattern of dotted keys, its range or a function of the document giving it). A key
#: matches at most one pattern.
REGISTRY: tuple[tuple[str, Resolver], ...] = (
    (r"lattice\.(a_A|b_A|c_A)", LATTICE_LENGTH_A),
    (r"lattice\.gamma_deg", LATTICE_ANGLE_DEG),
    (rf"lattice\.vectors_A{_INDEX}{_INDEX}", VECTOR_COMPONENT_A),
    (rf"atoms{_INDEX}\.position{_INDEX}", FRACTIONAL_COORDINATE),
    (rf"path\.points\.{_NAME}{_INDEX}", FRACTIONAL_COORDINATE),
    (r"basis\.cutoff_eV", CUTOFF_EV),
    (r"basis\.cutoff_Ry", CUTOFF_RY),
    (r"potential\.kinetic_factor", KINETIC_FACTOR),
    (rf"potential\.shells{_INDEX}", SHELL_G2),
    (rf"potential\.(symmetric|antisymmetric){_INDEX}", _potential_range),
    (rf"potential\.species\.{_NAME}{_INDEX}", _potential_range),
    (rf"potential\.coefficients{_INDEX}\.value({_INDEX})?", _potential_range),
    (r"potential\.(reference_volume_A3|reference_area_A2|reference_length_A)", POSITIVE),
    (r"potential\.taper_invA\[0\]", TAPER_START_INVA),
    (r"potential\.taper_invA\[1\]", POSITIVE),
    (rf"potential\.species\.{_NAME}\.(a1|a2_invA2)", UNBOUNDED),
    (rf"potential\.species\.{_NAME}\.a3", CONTINUOUS_A3),
    (rf"potential\.species\.{_NAME}\.a4_A2", POSITIVE),
    (rf"potential\.species\.{_NAME}\.(slope_shells_invA|slope_half_widths_invA){_INDEX}",
     POSITIVE),
    (rf"potential\.species\.{_NAME}\.slope_changes{_INDEX}", UNBOUNDED),
    (rf"potential\.deformation_targets\.{_NAME}\.value_eV", DEFORMATION_VALUE_EV),
    (rf"potential\.deformation_targets\.{_NAME}\.uncertainty_eV", DEFORMATION_UNCERTAINTY_EV),
    (rf"spin_orbit\.species\.{_NAME}\.strength_eV", SPIN_ORBIT_STRENGTH_EV),
    (rf"spin_orbit\.species\.{_NAME}\.slater_exponent_invA", SLATER_EXPONENT_INVA),
    (rf"nonlocal\.species\.{_NAME}\.A[02]_eV", NONLOCAL_DEPTH_EV),
    (rf"nonlocal\.species\.{_NAME}\.R[02]_A", NONLOCAL_RADIUS_A),
    (rf"nonlocal\.species\.{_NAME}\.A0_energy_slope", NONLOCAL_ENERGY_SLOPE),
)

_COMPILED = tuple((re.compile(pattern + r"\Z"), resolver) for pattern, resolver in REGISTRY)


def registered_pattern(key: str) -> str | None:
    """The :data:`REGISTRY` pattern ``key`` matches (None: no range registered)."""
    for (pattern, _), (compiled, _) in zip(REGISTRY, _COMPILED, strict=True):
        if compiled.match(key):
            return pattern
    return None


def key_range(key: str, document: dict[str, Any] | None = None) -> KeyRange:
    """The accepted range of the numeric material key ``key`` (module docstring).

    Parameters
    ----------
    key : str
        A dotted key as a sweep or a fit names it (``nonlocal.species.Ge.R2_A``).
    document : dict, optional
        The material document, for the ranges that depend on it (form factors: the lattice
        constant and the energy unit); without it those are unbounded.

    Returns
    -------
    KeyRange
        (lo, hi, open_low, open_high).

    Raises
    ------
    InputError
        For a key with no registered range (an integer count, a string, an unknown key).
    """
    for compiled, resolver in _COMPILED:
        if compiled.match(key):
            return resolver if isinstance(resolver, KeyRange) else resolver(document)
    raise InputError("has no accepted range registered (bandpert.input.key_ranges); expected a "
                     "numeric key of a plane-wave material file such as lattice.a_A, "
                     "potential.symmetric[0] or spin_orbit.species.<X>.strength_eV", key=key)
