"""The one home of the keys' accepted ranges (bandpert.input.key_ranges) agrees with the readers.

Generated over the whole registry: for every registered pattern a concrete key in a small
material document; at each finite end the reader accepts the end itself (closed) or a value a
fit's margin inside it (open), and refuses a value just outside, naming the key. A pattern
added to the registry without a case here fails :func:`test_every_registered_pattern_is_checked`;
a reader whose bound moves away from the registry fails :func:`test_reader_agrees_with_registry`.
"""

from __future__ import annotations

import copy
import math
import re
import tomllib

import pytest

from bandpert.data import MATERIALS_DIR
from bandpert.errors import InputError
from bandpert.input.key_ranges import (
    OPEN_MARGIN,
    REGISTRY,
    KeyRange,
    key_range,
    potential_limit_eV,
    registered_pattern,
)
from bandpert.input.material import parse_material
from bandpert.runs.sweep_spec import set_value

A_A = 5.43


def doc(lattice=None, atoms=None, potential=None, **extra) -> dict:
    """A small valid material document (fcc silicon-like, symmetric-antisymmetric, eV)."""
    return {"name": "t", "source": "test",
            "lattice": lattice or {"type": "fcc", "a_A": A_A},
            "atoms": atoms or [{"species": "Si", "position": [0.0, 0.0, 0.0]},
                               {"species": "Si", "position": [0.25, 0.25, 0.25]}],
            "potential": potential or {"form": "symmetric-antisymmetric", "unit": "eV",
                                       "shells": [3.0, 8.0, 11.0],
                                       "symmetric": [-2.9, 0.2, 0.8],
                                       "antisymmetric": [0.0, 0.0, 0.0]},
            **extra}


EMPTY = {"form": "empty"}
ONE_ATOM = [{"species": "X", "position": [0.0, 0.0, 0.0]}]
CONTINUOUS = {"form": "continuous", "unit": "eV", "reference_volume_A3": 20.0,
              "taper_invA": [0.0, 8.0],
              "species": {"Si": {"a1": 0.0, "a2_invA2": 0.0, "a3": 2.0, "a4_A2": 1.0,
                                 "slope_shells_invA": [2.0], "slope_half_widths_invA": [0.5],
                                 "slope_changes": [0.0]}}}
SO = {"species": {"Si": {"strength_eV": 0.01, "core_shell": 2, "slater_exponent_invA": 6.0}}}
NL = {"species": {"Si": {"A0_eV": 1.0, "R0_A": 1.0, "A2_eV": 1.0, "R2_A": 1.5}}}
TARGETS = {"gamma_gap": {"value_eV": -8.0, "uncertainty_eV": 1.0, "source": "test"}}

#: One concrete key per registered pattern, in a document where no constraint between keys
#: interferes at the key's ends (an empty potential where the lattice constant runs to 1000 Å;
#: a = 0.3 Å beside b = 1000 Å so that a 1.8e-4° oblique cell keeps its shortest translation).
CASES: list[tuple[str, dict]] = [
    ("lattice.a_A", doc({"type": "sc", "a_A": 5.0}, ONE_ATOM, EMPTY)),
    ("lattice.c_A", doc({"type": "tetragonal", "a_A": 5.0, "c_A": 5.0}, ONE_ATOM, EMPTY)),
    ("lattice.gamma_deg", doc({"type": "oblique", "a_A": 0.3, "b_A": 1000.0,
                               "gamma_deg": 60.0},
                              [{"species": "X", "position": [0.0, 0.0]}], EMPTY)),
    ("lattice.vectors_A[0][1]", doc({"type": "vectors", "a_A": 5.0,
                                     "vectors_A": [[5.0, 0.0, 0.0], [0.0, 5.0, 0.0],
                                                   [0.0, 0.0, 5.0]]}, ONE_ATOM, EMPTY)),
    ("atoms[0].position[2]", doc({"type": "sc", "a_A": 5.0}, ONE_ATOM, EMPTY)),
    ("path.points.X[0]", doc(path={"points": {"G": [0.0, 0.0, 0.0], "X": [0.5, 0.0, 0.0]},
                                   "legs": [["G", "X"]]})),
    ("basis.cutoff_eV", doc(basis={"cutoff_eV": 100.0})),
    ("basis.cutoff_Ry", doc(basis={"cutoff_Ry": 7.0})),
    ("potential.kinetic_factor", doc(potential={**doc()["potential"], "kinetic_factor": 1.0})),
    ("potential.shells[0]", doc()),
    ("potential.symmetric[1]", doc()),
    ("potential.antisymmetric[2]", doc()),
    ("potential.species.Si[0]", doc(potential={"form": "per-species", "unit": "eV",
                                               "shells": [3.0, 8.0],
                                               "species": {"Si": [-1.0, 0.5]}})),
    ("potential.coefficients[0].value", doc(potential={
        "form": "fourier", "unit": "eV",
        "coefficients": [{"miller": [1, 1, 1], "value": 1.0}]})),
    ("potential.coefficients[0].value[1]", doc(potential={
        "form": "fourier", "unit": "eV",
        "coefficients": [{"miller": [1, 1, 1], "value": [0.0, 1.0]}]})),
    ("potential.reference_volume_A3", doc(potential=CONTINUOUS)),
    ("potential.taper_invA[0]", doc(potential=CONTINUOUS)),
    ("potential.taper_invA[1]", doc(potential={**CONTINUOUS, "taper_invA": [0.0, 8.0]})),
    ("potential.species.Si.a1", doc(potential=CONTINUOUS)),
    ("potential.species.Si.a3", doc(potential=CONTINUOUS)),
    ("potential.species.Si.a4_A2", doc(potential=CONTINUOUS)),
    ("potential.species.Si.slope_half_widths_invA[0]", doc(potential=CONTINUOUS)),
    ("potential.species.Si.slope_changes[0]", doc(potential=CONTINUOUS)),
    ("potential.deformation_targets.gamma_gap.value_eV",
     doc(potential={**doc()["potential"], "deformation_targets": TARGETS})),
    ("potential.deformation_targets.gamma_gap.uncertainty_eV",
     doc(potential={**doc()["potential"], "deformation_targets": TARGETS})),
    ("spin_orbit.species.Si.strength_eV", doc(spin_orbit=SO)),
    ("spin_orbit.species.Si.slater_exponent_invA", doc(spin_orbit=SO)),
    ("nonlocal.species.Si.A2_eV", doc(**{"nonlocal": NL})),
    ("nonlocal.species.Si.R0_A", doc(**{"nonlocal": NL})),
    ("nonlocal.species.Si.A0_energy_slope",
     doc(**{"nonlocal": {"species": {"Si": {**NL["species"]["Si"], "A0_energy_slope": -0.1}}}})),
]


def ends(rng: KeyRange) -> list[tuple[float, float]]:
    """(accepted, refused) at each finite end: the end or a margin inside it, and just outside
    (for an open end the end itself)."""
    out = []
    lo_in, hi_in = rng.inner()
    for end, inner, is_open, outward in ((rng.lo, lo_in, rng.open_low, -1.0),
                                         (rng.hi, hi_in, rng.open_high, 1.0)):
        if not math.isfinite(end):
            continue
        width = rng.hi - rng.lo
        step = OPEN_MARGIN * (width if math.isfinite(width) else max(1.0, abs(end)))
        out.append((inner, end if is_open else end + outward * step))
    return out


def named(exc: InputError, key: str) -> bool:
    """The error names the key, or the array that holds it (``potential.symmetric`` for
    ``potential.symmetric[1]``, ``potential.coefficients`` for its entries' values)."""
    return exc.key is not None and (exc.key == key or key.startswith(exc.key + "["))


def test_every_registered_pattern_is_checked():
    covered = {registered_pattern(key) for key, _ in CASES}
    assert None not in covered
    assert covered == {pattern for pattern, _ in REGISTRY}


@pytest.mark.parametrize("key, document", CASES, ids=[k for k, _ in CASES])
def test_reader_agrees_with_registry(key, document):
    parse_material(document, "t.toml")  # the template itself is valid
    rng = key_range(key, document)
    assert rng.inner()[0] < rng.inner()[1]
    for accepted, refused in ends(rng):
        inside = copy.deepcopy(document)
        set_value(inside, key, accepted, "t.toml")
        parse_material(inside, "t.toml")
        outside = copy.deepcopy(document)
        set_value(outside, key, refused, "t.toml")
        with pytest.raises(InputError) as info:
            parse_material(outside, "t.toml")
        assert named(info.value, key), (key, refused, str(info.value))
        assert "\n" not in str(info.value)


def test_form_factor_range_follows_the_lattice_constant_and_unit():
    # common practice, no source: the limit is 100 × ħ²(2π/a)²/2m0, 5.10 eV × 100 for a = 5.43 Å
    rng = key_range("potential.symmetric[0]", doc())
    assert rng.hi == pytest.approx(510.1, abs=0.1) and rng.lo == -rng.hi
    ry = doc(potential={**doc()["potential"], "unit": "Ry"})
    assert key_range("potential.symmetric[0]", ry).hi == pytest.approx(
        potential_limit_eV(A_A) / 13.605693, rel=1e-6)
    assert key_range("potential.symmetric[0]") == KeyRange(-math.inf, math.inf)


def test_open_ends_keep_a_margin():
    rng = key_range("nonlocal.species.Ge.R2_A")
    assert rng == KeyRange(0.0, 5.0, True, False)
    lo, hi = rng.inner()
    assert lo == pytest.approx(5e-6) and hi == 5.0
    assert rng.contains(lo) and not rng.contains(0.0) and rng.contains(5.0)


def test_unregistered_keys_are_refused():
    for key in ("electrons.valence", "basis.bands", "spin_orbit.species.Si.core_shell",
                "name", "lattice.type"):
        with pytest.raises(InputError, match="no accepted range"):
            key_range(key)


def numeric_leaves(node, prefix=""):
    """Dotted keys of every number of a document (arrays indexed)."""
    if isinstance(node, dict):
        for k, v in node.items():
            yield from numeric_leaves(v, f"{prefix}.{k}" if prefix else k)
    elif isinstance(node, list):
        for i, v in enumerate(node):
            yield from numeric_leaves(v, f"{prefix}[{i}]")
    elif isinstance(node, int | float) and not isinstance(node, bool):
        yield prefix, node


#: Integer keys: counts and indices, not continuous parameters.
COUNTS = re.compile(r"(electrons\.valence|basis\.bands|.*\.core_shell|.*\.miller\[\d+\])$")


@pytest.mark.parametrize("path", sorted((MATERIALS_DIR / "planewave").glob("*.toml")),
                         ids=lambda p: p.stem)
def test_every_number_of_the_bundled_files_has_a_range(path):
    document = tomllib.loads(path.read_text(encoding="utf-8"))
    for key, value in numeric_leaves(document):
        if COUNTS.match(key):
            continue
        rng = key_range(key, document)
        assert rng.contains(value), (key, value, rng)
